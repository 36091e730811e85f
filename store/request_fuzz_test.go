package store

import (
	"errors"
	"reflect"
	"testing"
)

// FuzzDecodeRequest checks that any bytes decode to a request or an
// ErrCorrupt error without a fault, and that what decodes re-encodes to
// a request that decodes the same.
func FuzzDecodeRequest(f *testing.F) {
	f.Add(AppendRequest(nil, &Request{Route: "/r", Method: "POST", Path: "/r", Query: "n=1",
		Header: [][2]string{{"Accept-Language", "en"}}, Body: []byte(`{"a":1}`), Lengths: [2]int32{5, 4}}))
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, b []byte) {
		q, err := DecodeRequest(b)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error %v does not wrap ErrCorrupt", err)
			}
			return
		}
		again, err := DecodeRequest(AppendRequest(nil, q))
		if err != nil || !reflect.DeepEqual(again, q) {
			t.Fatalf("round trip: %+v, %v; want %+v", again, err, q)
		}
	})
}
