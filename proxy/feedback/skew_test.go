package feedback

import (
	"fmt"
	"net/http"
	"strings"
	"testing"
	"time"

	"riffle/merge"
	"riffle/store"
)

// TestClockSkew sends clicks as clients send them: stamped with second
// precision 50 ms after each of 100 impressions served at random
// sub-second offsets (before the skew allowance, 96 of 100 were refused as
// "event before its impression"), and from a client whose clock is 3 s
// behind (100 of 100 refused). With the default skew of 30s every one is
// accepted, and stored at its impression's time (the store would refuse
// it otherwise); a click 31 s before is refused, saying by how much.
func TestClockSkew(t *testing.T) {
	f := newFixture(t, Options{})
	ims := make([]*store.Impression, 100)
	for i := range ims {
		at := t0.Add(time.Duration(i)*time.Second + time.Duration(i*379%1000)*time.Millisecond)
		im := &store.Impression{ID: store.NewID(at), Time: at, Experiment: "spring-refresh", Policy: "team-draft",
			Slots: []merge.Slot{{Item: "rake", Team: merge.Incumbent, RankA: 1}}}
		im.Seed = im.ID.Seed()
		if !f.st.Record(im) {
			t.Fatal("Record = false")
		}
		ims[i] = im
	}
	post := func(lag time.Duration, event string) (int, Response) {
		var b strings.Builder
		for _, im := range ims {
			stamp := im.Time.Add(50 * time.Millisecond).Add(-lag).Truncate(time.Second)
			fmt.Fprintf(&b, `{"impression":%q,"item":"rake","event":%q,"time":%q}`+"\n", im.ID, event, stamp.Format(time.RFC3339))
		}
		return f.post(t, b.String())
	}
	for _, c := range []struct {
		name  string
		lag   time.Duration
		event string
	}{{"second precision", 0, "click"}, {"clock 3s behind", 3 * time.Second, "purchase"}} {
		status, r := post(c.lag, c.event)
		if status != http.StatusAccepted || r.Accepted != 100 || r.RejectedTotal != 0 {
			t.Errorf("%s: %d, %d accepted, %d rejected (%v); want all 100 accepted", c.name, status, r.Accepted, r.RejectedTotal, r.RejectedByReason)
		}
	}
	status, r := post(31*time.Second+time.Second, "click")
	if status != http.StatusBadRequest || r.RejectedTotal != 100 || r.RejectedByReason[reasonTooEarly] != 100 ||
		!strings.Contains(r.Rejected[0].Error, "before its impression") || !strings.Contains(r.Rejected[0].Error, "clock skew of 30s") {
		t.Errorf("31s behind: %d %+v; want every click refused as too early, saying by how much", status, r)
	}
}

// TestTimeOfReceipt checks that an event sent without a time takes the
// time it was received (the handler's clock), as the README documents.
func TestTimeOfReceipt(t *testing.T) {
	f := newFixture(t, Options{})
	if status, r := f.post(t, f.ev("hoe", "click", "")); status != http.StatusAccepted || r.Accepted != 1 {
		t.Fatalf("answer %d %+v; want 1 accepted", status, r)
	}
	var b strings.Builder
	if err := f.st.Export(t.Context(), &b, time.Time{}); err != nil {
		t.Fatal(err)
	}
	if want := t0.Add(time.Minute).Format(time.RFC3339); !strings.Contains(b.String(), want) {
		t.Errorf("export %s lacks the time of receipt %s", b.String(), want)
	}
}
