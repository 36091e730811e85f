package store

import (
	"bytes"
	"errors"
	"reflect"
	"testing"
	"time"

	"riffle/merge"
)

func TestRecordCodecRoundTrip(t *testing.T) {
	im := teamDraftImpression(t0.Add(123456789), 7, HashUser("shopper"))
	im.Time = im.Time.Add(-1500) // a served time before the id's time
	tests := []record{
		{Impression: *im},
		{Impression: *im, Final: true, Outcome: 2, Score: merge.Score{Incumbent: 1.5, Challenger: 3}},
		{Impression: Impression{ID: fixedID(t0, 1), Time: t0, Experiment: "e", Seed: 99, Fallback: "ramp"}},
	}
	kept := *im
	kept.Request = &Request{Route: "/v1/recommend", Method: "POST", Path: "/v1/recommend", Query: "n=5&lang=en",
		Header: [][2]string{{"Accept-Language", "en"}, {"X-Region", "north"}}, Body: []byte(`{"basket":["trowel"]}`),
		Lengths: [2]int32{10, 12}}
	bare := kept
	bare.Request = &Request{Method: "GET", Path: "/r", Lengths: [2]int32{1, 1}}
	tests = append(tests, record{Impression: kept}, record{Impression: kept, Final: true, Outcome: 1,
		Score: merge.Score{Incumbent: 1}}, record{Impression: bare})
	for i, want := range tests {
		b := encodeRecord(nil, &want)
		got, err := decodeRecord(want.ID[:], b)
		if err != nil {
			t.Fatalf("case %d: decode: %v", i, err)
		}
		if !got.Time.Equal(want.Time) {
			t.Errorf("case %d: time %v, want %v", i, got.Time, want.Time)
		}
		got.Time = want.Time
		if !reflect.DeepEqual(got, want) {
			t.Errorf("case %d: round trip\n got %+v\nwant %+v", i, got, want)
		}
		for cut := range len(b) { // every truncation is reported, none panics
			if _, err := decodeRecord(want.ID[:], b[:cut]); !errors.Is(err, ErrCorrupt) {
				t.Errorf("case %d: record cut to %d of %d bytes: %v, want ErrCorrupt", i, cut, len(b), err)
			}
		}
	}
}

func TestEventCodecRoundTrip(t *testing.T) {
	want := Event{Impression: fixedID(t0, 5), Item: "watering-can", Type: "purchase", Time: t0.Add(-time.Second).UTC(), Key: "order-12"}
	key := append(want.Impression[:], 0, 0, 0, 0, 0, 0, 0, 9)
	got, err := decodeEvent(key, encodeEvent(nil, &want))
	if err != nil || !reflect.DeepEqual(got, want) {
		t.Errorf("event round trip = %+v, %v; want %+v", got, err, want)
	}
}

// FuzzDecodeRecord feeds arbitrary bytes to the impression decoder: it
// must never panic, and whatever it accepts must re-encode stably.
func FuzzDecodeRecord(f *testing.F) {
	im := teamDraftImpression(t0, 1, 2)
	f.Add(encodeRecord(nil, &record{Impression: *im}))
	f.Add(encodeRecord(nil, &record{Impression: *im, Final: true, Outcome: 3}))
	im.Slots[0].PA, im.Seed = 0.25, 5
	f.Add(encodeRecord(nil, &record{Impression: *im}))
	f.Add([]byte{0xff, 0xff, 0xff})
	key := fixedID(t0, 1)
	f.Fuzz(func(t *testing.T, v []byte) {
		r, err := decodeRecord(key[:], v)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error %v does not wrap ErrCorrupt", err)
			}
			return
		}
		b1 := encodeRecord(nil, &r)
		r2, err := decodeRecord(key[:], b1)
		if err != nil {
			t.Fatalf("re-encoded record does not decode: %v", err)
		}
		if b2 := encodeRecord(nil, &r2); !bytes.Equal(b1, b2) {
			t.Fatalf("encoding not stable:\n%x\n%x", b1, b2)
		}
	})
}

// FuzzDecodeEvent does the same for event records.
func FuzzDecodeEvent(f *testing.F) {
	ev := Event{Impression: fixedID(t0, 1), Item: "rake", Type: "click", Time: t0, Key: "k"}
	f.Add(encodeEvent(nil, &ev))
	f.Add([]byte{})
	key := make([]byte, eventKeyLen)
	f.Fuzz(func(t *testing.T, v []byte) {
		ev, err := decodeEvent(key, v)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error %v does not wrap ErrCorrupt", err)
			}
			return
		}
		ev2, err := decodeEvent(key, encodeEvent(nil, &ev))
		if err != nil || !reflect.DeepEqual(ev, ev2) {
			t.Fatalf("re-encoded event %+v, %v; want %+v", ev2, err, ev)
		}
	})
}

// FuzzDecodeTotals: the totals decoder never panics, and what it accepts
// survives a re-encoding unchanged.
func FuzzDecodeTotals(f *testing.F) {
	tt := totals{Impressions: 10, Interleaved: 9, Outcomes: [4]int64{1, 2, 3, 4}, Start: 5, Last: 6, Policy: "team-draft"}
	f.Add(tt.encode())
	f.Add([]byte{0x80})
	f.Fuzz(func(t *testing.T, v []byte) {
		got, err := decodeTotals("x", v)
		if err != nil {
			return
		}
		again, err := decodeTotals("x", got.encode())
		if err != nil || again != got {
			t.Fatalf("re-encoded totals %+v, %v; want %+v", again, err, got)
		}
	})
}
