package main

import (
	"context"
	"errors"
	"io"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"time"
)

func TestPreflight(t *testing.T) {
	inc, chal, err := bodies(1)
	if err != nil {
		t.Fatal(err)
	}
	bi := httptest.NewServer(backend(inc, 0))
	defer bi.Close()
	bc := httptest.NewServer(backend(chal, 0))
	defer bc.Close()
	// An interleaving stand-in: the challenger's list under the header.
	mixed := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Riffle-Impression", "abc")
		backend(chal, 0).ServeHTTP(w, r)
	}))
	defer mixed.Close()
	status := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		http.Error(w, "overloaded", http.StatusServiceUnavailable)
	}))
	defer status.Close()
	short := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		io.WriteString(w, `{"model":"incumbent","items":[{"sku":"GS-0100"}]}`)
	}))
	defer short.Close()
	tests := []struct {
		name, mode, base string
		wantErr          error
		wantNote         string
	}{
		{"direct", "direct", bi.URL, nil, ""},
		{"riffle interleaving", "riffle", mixed.URL, nil, ""},
		{"riffle that only forwards", "riffle", newFanoutServer(t, bi.URL, bc.URL),
			nil, "answer lacks the Riffle-Impression header; pre-flight answer held the incumbent's items only"},
		{"503", "fanout", status.URL, errAnswer, ""},
		{"one item", "fanout", short.URL, errAnswer, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m := &mode{name: tt.mode, load: newLoader(tt.base, 1)}
			err := preflight(context.Background(), m, bi.URL, 300*time.Millisecond)
			if !errors.Is(err, tt.wantErr) || m.note != tt.wantNote {
				t.Errorf("got error %v, note %q; want %v, %q", err, m.note, tt.wantErr, tt.wantNote)
			}
			if err != nil && !strings.Contains(err.Error(), tt.mode+" pre-flight") {
				t.Errorf("error %q does not name the mode's pre-flight", err)
			}
		})
	}
}

func newFanoutServer(t *testing.T, incumbent, challenger string) string {
	srv := httptest.NewServer(newFanout(incumbent, challenger))
	t.Cleanup(srv.Close)
	return srv.URL
}
