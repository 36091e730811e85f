package proxy

import (
	"bytes"
	"encoding/json"
	"errors"
	"flag"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"riffle/merge"
	"riffle/proxy/jsonptr"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

func mustAdapter(t testing.TB, list, id string) *adapter {
	t.Helper()
	l, err := jsonptr.Parse(list)
	if err != nil {
		t.Fatal(err)
	}
	i, err := jsonptr.Parse(id)
	if err != nil {
		t.Fatal(err)
	}
	return &adapter{list: l, id: i}
}

func TestAdapterIdentities(t *testing.T) {
	tests := []struct {
		name, list, id, doc string
		want                []string
		dropped             int
	}{
		{"strings", "/items", "/sku", `{"items":[{"sku":"a"},{"sku":"b"}]}`, []string{"a", "b"}, 0},
		// A string identity is its decoded text (RFC 8259 section 7).
		{"escaped string", "/items", "/sku", `{"items":[{"sku":"caf\u00e9"},{"sku":"a\/b"}]}`, []string{"café", "a/b"}, 0},
		// A number's identity is its JSON text as written.
		{"numbers", "/items", "/id", `{"items":[{"id":12},{"id":1.50},{"id":-0},{"id":1e3}]}`, []string{"12", "1.50", "-0", "1e3"}, 0},
		{"no identity dropped", "/items", "/sku", `{"items":[{"sku":"a"},{"name":"x"},{"sku":null},{"sku":{"v":1}},{"sku":true},{"sku":["c"]},7]}`, []string{"a"}, 6},
		{"duplicate keeps first", "/items", "/sku", `{"items":[{"sku":"a","n":1},{"sku":"b"},{"sku":"a","n":2}]}`, []string{"a", "b"}, 0},
		{"string and number differ", "/items", "/id", `{"items":[{"id":"1"},{"id":1}]}`, []string{"1"}, 0},
		{"nested pointers", "/data/0/recs", "/meta/sku~1id", `{"data":[{"recs":[{"meta":{"sku/id":"x"}},{"meta":{"sku/id":"y"}}]}]}`, []string{"x", "y"}, 0},
		{"list of strings", "/items", "", `{"items":["trowel","twine","trowel"]}`, []string{"trowel", "twine"}, 0},
		{"whole document is the list", "", "/sku", ` [ {"sku":"a"} ] `, []string{"a"}, 0},
		{"empty", "/items", "/sku", `{"items":[]}`, nil, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var d listDoc
			if err := mustAdapter(t, tt.list, tt.id).parse(&d, []byte(tt.doc)); err != nil {
				t.Fatalf("parse: %v", err)
			}
			if !slices.Equal(d.ids, tt.want) || d.dropped != tt.dropped {
				t.Errorf("ids %q dropped %d, want %q dropped %d", d.ids, d.dropped, tt.want, tt.dropped)
			}
			if len(d.elems) != len(d.ids) {
				t.Errorf("%d elements for %d ids", len(d.elems), len(d.ids))
			}
		})
	}
}

func TestAdapterLongListDedup(t *testing.T) {
	ids := append(skus("seed", 100), "seed-07", "seed-99")
	var d listDoc
	if err := mustAdapter(t, "/items", "/sku").parse(&d, []byte(listBody("i", ids...))); err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(d.ids, skus("seed", 100)) {
		t.Errorf("a %d-element list (map dedup) kept %d ids, want the first 100", len(ids), len(d.ids))
	}
}

func TestAdapterErrors(t *testing.T) {
	a := mustAdapter(t, "/items", "/sku")
	for _, doc := range []string{``, `{"items":[{"sku":"a"}`, `{"results":[]}`, `{"items":{}}`, `{"items":[1,]}`, `{"items":[],"items":[]}`, `[]`} {
		var d listDoc
		if err := a.parse(&d, []byte(doc)); !errors.Is(err, ErrBody) {
			t.Errorf("parse(%q) error = %v, want ErrBody", doc, err)
		}
	}
}

// TestRewriteGolden splices a merged list of two formatted documents into
// the incumbent's and compares with testdata/rewrite.golden: each element
// comes whole from the team that supplied it (pot-12 from the
// challenger's copy), the document around the list is the incumbent's.
func TestRewriteGolden(t *testing.T) {
	inc := []byte("{\n  \"model\": \"popularity-v3\",\n  \"items\": [\n    {\"sku\": \"rake-01\", \"name\": \"Leaf rake\"},\n" +
		"    {\"sku\": \"hose-25\", \"name\": \"Hose, 25 m\"},\n    {\"sku\": \"pot-12\", \"name\": \"Terracotta pot\"},\n" +
		"    {\"name\": \"no identity\"}\n  ],\n  \"took_ms\": 4\n}\n")
	chal := []byte(`{"model":"affinity-v1","items":[{"sku":"twine-50","name":"Jute twine"},` +
		`{"sku":"pot-12","name":"Terracotta pot (affinity copy)"},{"sku":"gloves-m","name":"Gloves, M"}],"took_ms":6}`)
	a := mustAdapter(t, "/items", "/sku")
	var di, dc listDoc
	if err := a.parse(&di, inc); err != nil {
		t.Fatal(err)
	}
	if err := a.parse(&dc, chal); err != nil {
		t.Fatal(err)
	}
	// Fixed provenance, so that the golden file tests the splice alone.
	slots := []merge.Slot{
		{Item: "twine-50", Team: merge.Challenger, RankB: 1},
		{Item: "rake-01", Team: merge.Incumbent, RankA: 1},
		{Item: "hose-25", Team: merge.Fixed, RankA: 2},
		{Item: "pot-12", Team: merge.Challenger, RankA: 3, RankB: 2},
		{Item: "gloves-m", Team: merge.Challenger, RankB: 3},
	}
	out, err := rewrite(nil, &di, &dc, slots)
	if err != nil {
		t.Fatal(err)
	}
	if !json.Valid(out) {
		t.Fatalf("rewritten document is not JSON: %s", out)
	}
	golden := filepath.Join("testdata", "rewrite.golden")
	if *update {
		if err := os.WriteFile(golden, out, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	if !bytes.Equal(out, want) {
		t.Errorf("rewrite =\n%s\nwant (%s)\n%s", out, golden, want)
	}
}

func TestRewriteRejectsBadRank(t *testing.T) {
	var d listDoc
	mustAdapter(t, "/items", "/sku").parse(&d, []byte(`{"items":[{"sku":"a"}]}`))
	if _, err := rewrite(nil, &d, &d, []merge.Slot{{Item: "z", Team: merge.Incumbent, RankA: 2}}); err == nil {
		t.Errorf("rewrite accepted a slot whose rank is past the list")
	}
}

// FuzzAdapter feeds arbitrary backend bytes to the adapter: it never
// panics, and whenever both documents have lists, the merged document is
// valid JSON whose list holds exactly the merged items.
func FuzzAdapter(f *testing.F) {
	f.Add([]byte(listBody("i", "a", "b", "c")), []byte(listBody("c", "c", "d")))
	f.Add([]byte(`{"items":[{"sku":1},{"sku":"1"},{"sku":1}]}`), []byte(`{"items":[{"sku":"\u0031"}]}`))
	f.Add([]byte(`{"items":[{"sku":"a"}]`), []byte(`[]`))
	f.Add([]byte(`{"items":[{"sku":"é"},{"sku":"\ud83c"}]} `), []byte("\x00garbage"))
	a := mustAdapter(f, "/items", "/sku")
	f.Fuzz(func(t *testing.T, inc, chal []byte) {
		var di, dc listDoc
		errI, errC := a.parse(&di, inc), a.parse(&dc, chal)
		if errI != nil || errC != nil {
			return
		}
		slots := merge.TeamDraft{}.Interleave(nil, di.ids, dc.ids, len(di.ids)+len(dc.ids), 7)
		out, err := rewrite(nil, &di, &dc, slots)
		if err != nil {
			t.Fatalf("rewrite: %v", err)
		}
		if !json.Valid(out) {
			t.Fatalf("merged document is not JSON: %q", out)
		}
		var dm listDoc
		if err := a.parse(&dm, out); err != nil {
			t.Fatalf("merged document has no list: %v", err)
		}
		want := make([]string, len(slots))
		for i, s := range slots {
			want[i] = s.Item
		}
		if !slices.Equal(dm.ids, want) {
			t.Fatalf("merged list ids %q, want %q", dm.ids, want)
		}
	})
}
