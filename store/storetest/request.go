package storetest

import (
	"bytes"
	"encoding/json"
	"reflect"
	"testing"
	"time"

	"riffle/store"
)

// testKeptRequest checks that a kept request (experiment.keep_requests)
// and the logged draw probabilities survive recording, finalisation and
// export byte for byte, that an impression without one exports none, and
// that retention deletes it with its impression.
func testKeptRequest(t *testing.T, open Opener) {
	f := newFixture(t, open, store.Rules{}, time.Hour)
	kept, bare := TeamDraft(T0, 1, 7), TeamDraft(T0.Add(time.Second), 2, 8)
	kept.Policy = "probabilistic"
	for i := range kept.Slots {
		kept.Slots[i].PA, kept.Slots[i].PB = 0.25, 0.5
	}
	want := &store.Request{Route: "/v1/recommend", Method: "POST", Path: "/v1/recommend", Query: "n=4",
		Header: [][2]string{{"Accept-Language", "en-GB"}}, Body: []byte("{\"basket\":[\"trowel\"]}\x00\xff"),
		Lengths: [2]int32{4, 3}}
	kept.Request = want
	f.record(kept, bare)
	f.finalize(T0.Add(31*time.Minute), 2)
	lines := exportRaw(t, f.st)
	if len(lines) != 2 {
		t.Fatalf("export: %d lines, want 2", len(lines))
	}
	got := lines[0].Request
	if got == nil || got.Route != want.Route || got.Method != want.Method || got.Path != want.Path ||
		got.Query != want.Query || !reflect.DeepEqual(got.Header, want.Header) ||
		string(got.Body) != string(want.Body) || got.Lengths != want.Lengths {
		t.Errorf("kept request exported as %+v, want %+v", got, want)
	}
	if s := lines[0].Slots[1]; s.PIncumbent != 0.25 || s.PChallenger != 0.5 {
		t.Errorf("slot 2 probabilities %v, %v; want 0.25, 0.5", s.PIncumbent, s.PChallenger)
	}
	if lines[1].Request != nil {
		t.Errorf("impression without a kept request exports %+v", lines[1].Request)
	}
	f.clk.Set(T0.Add(2 * time.Hour))
	if n, err := f.st.Retain(t.Context(), T0.Add(2*time.Hour)); n != 2 || err != nil {
		t.Fatalf("Retain = %d, %v; want 2 (the kept request goes with its impression)", n, err)
	}
	if lines := exportRaw(t, f.st); len(lines) != 0 {
		t.Errorf("export after retention: %d lines, want none", len(lines))
	}
}

// keptLine is the part of an export line that a replay reads.
type keptLine struct {
	Slots []struct {
		PIncumbent  float32 `json:"p_incumbent"`
		PChallenger float32 `json:"p_challenger"`
	} `json:"slots"`
	Request *struct {
		Route, Method, Path, Query string
		Header                     [][2]string
		Body                       []byte
		Lengths                    [2]int32 `json:"list_lengths"`
	} `json:"request"`
}

// exportRaw reads the whole export as keptLines.
func exportRaw(t *testing.T, st store.Reader) []keptLine {
	t.Helper()
	var buf bytes.Buffer
	if err := st.Export(t.Context(), &buf, time.Time{}); err != nil {
		t.Fatalf("Export: %v", err)
	}
	var lines []keptLine
	dec := json.NewDecoder(&buf)
	for dec.More() {
		var l keptLine
		if err := dec.Decode(&l); err != nil {
			t.Fatalf("Export line %d: %v", len(lines)+1, err)
		}
		lines = append(lines, l)
	}
	return lines
}
