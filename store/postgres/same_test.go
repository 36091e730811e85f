package postgres

import (
	"bytes"
	"math/rand/v2"
	"path/filepath"
	"reflect"
	"testing"
	"time"

	"riffle/merge/verdict"
	"riffle/store"
	"riffle/store/storetest"
)

// traffic is a recorded day of the garden shop: impressions of three
// policies and their events, the same every run.
func traffic() ([]*store.Impression, []store.Event) {
	r := rand.New(rand.NewPCG(7, 11))
	var ims []*store.Impression
	var evs []store.Event
	policies := []string{"team-draft", "balanced", "team-draft"}
	for i := range 300 {
		at := storetest.T0.Add(time.Duration(i) * 7 * time.Second)
		im := storetest.TeamDraft(at, uint64(i), uint64(r.IntN(40)))
		im.Policy = policies[i%3]
		if i%10 == 9 {
			im.Policy, im.Fallback = "", "ramp"
		}
		ims = append(ims, im)
		for _, item := range []string{"a1", "b1", "a2", "b2"} {
			if r.Float64() < 0.2 {
				typ := "click"
				if r.Float64() < 0.3 {
					typ = "purchase"
				}
				evs = append(evs, store.Event{Impression: im.ID, Item: item, Type: typ, Time: at.Add(time.Duration(r.IntN(600)) * time.Second)})
			}
		}
	}
	return ims, evs
}

// feed records the traffic into st, finalises it and returns the
// aggregate and the export.
func feed(t *testing.T, st store.Contract) (store.Aggregate, []byte) {
	t.Helper()
	ims, evs := traffic()
	for _, im := range ims {
		if !st.Record(im) {
			t.Fatal("Record = false")
		}
	}
	if err := st.Flush(t.Context()); err != nil {
		t.Fatal(err)
	}
	for i, err := range st.AddEvents(t.Context(), evs) {
		if err != nil {
			t.Fatalf("event %d: %v", i, err)
		}
	}
	if _, err := st.Finalize(t.Context(), storetest.T0.Add(48*time.Hour)); err != nil {
		t.Fatal(err)
	}
	agg, err := st.Aggregate(t.Context(), storetest.Experiment)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := st.Export(t.Context(), &buf, time.Time{}); err != nil {
		t.Fatal(err)
	}
	return agg, buf.Bytes()
}

// TestSameTrafficSameVerdict feeds one recorded traffic to the bbolt file
// and to PostgreSQL: the outcomes, the per-user counts, the export and the
// verdict must be identical.
func TestSameTrafficSameVerdict(t *testing.T) {
	clk := &storetest.Clock{}
	clk.Set(storetest.T0.Add(time.Hour))
	o := store.Options{Now: clk.Now, FinalizeEvery: -1}
	file, err := store.Open(filepath.Join(t.TempDir(), "riffle.db"), &o)
	if err != nil {
		t.Fatal(err)
	}
	defer file.Close()
	fa, fx := feed(t, file)
	pa, px := feed(t, openTest(t, o))
	if fa.Outcomes != pa.Outcomes || fa.Impressions != pa.Impressions || fa.Interleaved != pa.Interleaved ||
		!reflect.DeepEqual(fa.Users, pa.Users) || fa.Policy != pa.Policy || !fa.Start.Equal(pa.Start) {
		t.Errorf("aggregates differ:\nbbolt      %+v\npostgresql %+v", fa, pa)
	}
	if fa.Outcomes[1]+fa.Outcomes[2] == 0 {
		t.Fatalf("the traffic decided nothing (%v): the comparison would be empty", fa.Outcomes)
	}
	if !bytes.Equal(fx, px) {
		t.Errorf("exports differ (%d and %d bytes)", len(fx), len(px))
	}
	p := verdict.Params{}
	fv, err1 := verdict.Compute(fa.Input(p))
	pv, err2 := verdict.Compute(pa.Input(p))
	if err1 != nil || err2 != nil || !reflect.DeepEqual(fv, pv) {
		t.Errorf("verdicts differ: %+v (%v)\n%+v (%v)", fv, err1, pv, err2)
	}
}
