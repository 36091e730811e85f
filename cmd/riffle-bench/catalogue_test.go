package main

import (
	"bytes"
	"encoding/json"
	"hash/fnv"
	"testing"
)

func TestBodies(t *testing.T) {
	inc, chal, err := bodies(1)
	if err != nil {
		t.Fatal(err)
	}
	if len(inc) != variants || len(chal) != variants {
		t.Fatalf("got %d and %d variants, want %d each", len(inc), len(chal), variants)
	}
	again, _, err := bodies(1)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(inc[5], again[5]) {
		t.Errorf("bodies(1) twice: variant 5 differs, want the same bytes for the same seed")
	}
	for i := range inc {
		a, b := decodeAnswer(t, inc[i]), decodeAnswer(t, chal[i])
		if a.Model != "incumbent" || b.Model != "challenger" {
			t.Errorf("variant %d: models %q and %q, want incumbent and challenger", i, a.Model, b.Model)
		}
		if len(a.Items) != listLen || len(b.Items) != listLen {
			t.Fatalf("variant %d: got %d and %d items, want %d", i, len(a.Items), len(b.Items), listLen)
		}
		shared := overlap(t, a.Items, b.Items)
		if shared < 6 || shared > 14 {
			t.Errorf("variant %d: lists share %d items, want 6 to 14 (partial overlap)", i, shared)
		}
	}
}

// TestItemSize checks the answers' items are "about 200 bytes" each, as
// issue 6 asks, measured as each item's own JSON encoding.
func TestItemSize(t *testing.T) {
	inc, _, err := bodies(1)
	if err != nil {
		t.Fatal(err)
	}
	total, n := 0, 0
	for _, body := range inc {
		var raw struct{ Items []json.RawMessage }
		if err := json.Unmarshal(body, &raw); err != nil {
			t.Fatal(err)
		}
		for _, it := range raw.Items {
			total += len(it)
			n++
		}
	}
	if mean := total / n; mean < 170 || mean > 250 {
		t.Errorf("mean item size: got %d bytes, want about 200 (170 to 250)", mean)
	}
}

func TestCatalogueSKUsUnique(t *testing.T) {
	seen := map[string]bool{}
	for _, it := range catalogue() {
		if seen[it.SKU] {
			t.Errorf("SKU %s appears twice", it.SKU)
		}
		seen[it.SKU] = true
	}
	if len(seen) < 2*listLen {
		t.Errorf("catalogue: got %d items, want at least %d so two lists can differ", len(seen), 2*listLen)
	}
}

// TestVariant checks the inline FNV-1a against the standard library's
// hash/fnv, the reference implementation.
func TestVariant(t *testing.T) {
	for _, s := range []string{"", "a", "shopper-0001", "shopper-4095", "Ünïcode"} {
		h := fnv.New32a()
		h.Write([]byte(s))
		want := int(h.Sum32() % variants)
		if got := variant(s, variants); got != want {
			t.Errorf("variant(%q): got %d, want %d (hash/fnv)", s, got, want)
		}
	}
}

func decodeAnswer(t *testing.T, b []byte) answer {
	t.Helper()
	var a answer
	if err := json.Unmarshal(b, &a); err != nil {
		t.Fatalf("decode answer: %v", err)
	}
	return a
}

// overlap counts the SKUs both lists hold, failing on a duplicate within
// one list (a ranked list holds distinct items).
func overlap(t *testing.T, a, b []item) int {
	t.Helper()
	in := map[string]bool{}
	for _, it := range a {
		if in[it.SKU] {
			t.Fatalf("duplicate SKU %s in one list", it.SKU)
		}
		in[it.SKU] = true
	}
	n, seen := 0, map[string]bool{}
	for _, it := range b {
		if seen[it.SKU] {
			t.Fatalf("duplicate SKU %s in one list", it.SKU)
		}
		seen[it.SKU] = true
		if in[it.SKU] {
			n++
		}
	}
	return n
}
