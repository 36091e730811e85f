package admin

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"io"
	"mime"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil/promlint"
	bolt "go.etcd.io/bbolt"

	"riffle/proxy/guard"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

const testToken = "s3cr3t-t0ken_for.tests~"

// t0 is the fixed time of every test clock.
var t0 = time.Date(2026, 4, 1, 9, 0, 0, 0, time.UTC)

// boltStore is a real bbolt file whose snapshot the admin API streams.
type boltStore struct{ db *bolt.DB }

func (s boltStore) Snapshot(w io.Writer) (n int64, err error) {
	err = s.db.View(func(tx *bolt.Tx) error {
		n, err = tx.WriteTo(w)
		return err
	})
	return n, err
}

// openBolt creates a bbolt file holding one bucket with the given records.
func openBolt(t *testing.T, records map[string]string) *bolt.DB {
	t.Helper()
	db, err := bolt.Open(filepath.Join(t.TempDir(), "live.db"), 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if err := db.Close(); err != nil {
			t.Errorf("close store: %v", err)
		}
	})
	err = db.Update(func(tx *bolt.Tx) error {
		b, err := tx.CreateBucketIfNotExists([]byte("impressions"))
		if err != nil {
			return err
		}
		for k, v := range records {
			if err := b.Put([]byte(k), []byte(v)); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return db
}

// fileReloader reloads a "config" from a file: its content becomes the hash,
// and a file starting with "bad" is rejected, as a config that fails
// validation would be.
type fileReloader struct {
	path string
	mu   sync.Mutex
	hash string
	err  string
	n    int
}

func (f *fileReloader) Reload() error {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.n++
	b, err := os.ReadFile(f.path)
	if err != nil {
		f.err = err.Error()
		return err
	}
	if strings.HasPrefix(string(b), "bad") {
		f.err = "experiment.ramp: 1.5 is not in [0,1]"
		return errors.New(f.err)
	}
	f.hash, f.err = strings.TrimSpace(string(b)), ""
	return nil
}

func (f *fileReloader) status() ConfigStatus {
	f.mu.Lock()
	defer f.mu.Unlock()
	cs := ConfigStatus{Hash: f.hash, LoadedAt: t0, LastError: f.err}
	if f.err != "" {
		cs.Problems = []map[string]string{{"path": "experiment.ramp", "message": "1.5 is not in [0,1]"}}
	}
	return cs
}

// fixture is a running admin listener over real parts.
type fixture struct {
	srv    *httptest.Server
	reg    *prometheus.Registry
	guard  *guard.Guard
	reload *fileReloader
}

func newFixture(t *testing.T, edit func(*Options)) *fixture {
	t.Helper()
	reg := prometheus.NewPedanticRegistry()
	losing := true
	g := guard.New(guard.Options{Registerer: reg, Now: func() time.Time { return t0 },
		Losing: func() (bool, string) { return losing, "challenger significantly worse" }})
	cfgPath := filepath.Join(t.TempDir(), "riffle.yaml")
	if err := os.WriteFile(cfgPath, []byte("abc123"), 0o600); err != nil {
		t.Fatal(err)
	}
	rl := &fileReloader{path: cfgPath, hash: "first"}
	o := Options{
		Metrics: reg,
		Token:   testToken,
		Pprof:   true,
		Experiment: func(ctx context.Context) (any, error) {
			return map[string]any{"experiment": "spring-refresh", "delta": 0.031}, nil
		},
		Config:     rl.status,
		Reloader:   rl,
		Guardrails: g,
		Snapshot:   boltStore{openBolt(t, map[string]string{"imp-1": "rake", "imp-2": "trowel"})},
		Now:        func() time.Time { return t0 },
	}
	if edit != nil {
		edit(&o)
	}
	srv := httptest.NewServer(New(o))
	t.Cleanup(srv.Close)
	return &fixture{srv: srv, reg: reg, guard: g, reload: rl}
}

// do sends a request, with the bearer token when tok is non-empty, and
// returns the response with its body read.
func (f *fixture) do(t *testing.T, method, path, tok string) (*http.Response, []byte) {
	t.Helper()
	req, err := http.NewRequestWithContext(t.Context(), method, f.srv.URL+path, nil)
	if err != nil {
		t.Fatal(err)
	}
	if tok != "" {
		req.Header.Set("Authorization", "Bearer "+tok)
	}
	resp, err := f.srv.Client().Do(req)
	if err != nil {
		t.Fatalf("%s %s: %v", method, path, err)
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatalf("%s %s: read body: %v", method, path, err)
	}
	return resp, body
}

func TestTokenRequiredOnProtectedEndpoints(t *testing.T) {
	f := newFixture(t, nil)
	for _, ep := range []struct{ method, path string }{
		{http.MethodPost, "/api/v1/reload"},
		{http.MethodPost, "/api/v1/guardrails/reset"},
		{http.MethodGet, "/api/v1/snapshot"},
		{http.MethodGet, "/debug/pprof/cmdline"},
	} {
		for _, tt := range []struct {
			name, tok string
			want      int
			challenge string // RFC 6750 section 3
		}{
			{name: "no token", want: http.StatusUnauthorized, challenge: `Bearer realm="riffle-admin"`},
			{name: "wrong token", tok: "guess", want: http.StatusUnauthorized, challenge: `Bearer realm="riffle-admin", error="invalid_token"`},
			{name: "right token", tok: testToken, want: http.StatusOK},
		} {
			t.Run(ep.path+"/"+tt.name, func(t *testing.T) {
				resp, body := f.do(t, ep.method, ep.path, tt.tok)
				if resp.StatusCode != tt.want {
					t.Fatalf("status %d, want %d; body %s", resp.StatusCode, tt.want, body)
				}
				if got := resp.Header.Get("WWW-Authenticate"); got != tt.challenge {
					t.Errorf("WWW-Authenticate %q, want %q", got, tt.challenge)
				}
				if tt.want == http.StatusUnauthorized {
					var e errorBody
					if err := json.Unmarshal(body, &e); err != nil || e.Error == "" {
						t.Errorf("401 body %q is not a JSON error (%v)", body, err)
					}
				}
			})
		}
	}
}

func TestOpenEndpointsNeedNoToken(t *testing.T) {
	f := newFixture(t, nil)
	tests := []struct {
		path, wantType, wantBody string
	}{
		{"/healthz", "text/plain; charset=utf-8", "ok\n"},
		{"/readyz", "application/json", `"ready": true`},
		{"/api/v1/experiment", "application/json", `"experiment": "spring-refresh"`},
		{"/api/v1/config", "application/json", `"hash": "first"`},
		{"/api/v1/guardrails", "application/json", `"tripped": false`},
		{"/metrics", "text/plain; version=0.0.4; charset=utf-8; escaping=underscores", "riffle_guardrail_tripped{guardrail=\"losing\"} 0"},
	}
	for _, tt := range tests {
		t.Run(tt.path, func(t *testing.T) {
			resp, body := f.do(t, http.MethodGet, tt.path, "")
			if resp.StatusCode != http.StatusOK {
				t.Fatalf("status %d, want 200; body %s", resp.StatusCode, body)
			}
			if got := resp.Header.Get("Content-Type"); got != tt.wantType {
				t.Errorf("Content-Type %q, want %q", got, tt.wantType)
			}
			if !strings.Contains(string(body), tt.wantBody) {
				t.Errorf("body %s does not contain %s", body, tt.wantBody)
			}
		})
	}
}

func TestNoTokenConfiguredLetsAllThrough(t *testing.T) {
	f := newFixture(t, func(o *Options) { o.Token = "" })
	if resp, body := f.do(t, http.MethodPost, "/api/v1/guardrails/reset", ""); resp.StatusCode != http.StatusOK {
		t.Errorf("status %d, want 200 without a configured token; body %s", resp.StatusCode, body)
	}
}

func TestReloadEndpoint(t *testing.T) {
	f := newFixture(t, nil)
	resp, body := f.do(t, http.MethodPost, "/api/v1/reload", testToken)
	if resp.StatusCode != 200 || !strings.Contains(string(body), `"hash": "abc123"`) {
		t.Fatalf("good reload: %d %s, want 200 with the new hash", resp.StatusCode, body)
	}
	if err := os.WriteFile(f.reload.path, []byte("bad: yaml"), 0o600); err != nil {
		t.Fatal(err)
	}
	resp, body = f.do(t, http.MethodPost, "/api/v1/reload", testToken)
	if resp.StatusCode != http.StatusUnprocessableEntity {
		t.Fatalf("bad reload: status %d, want 422; body %s", resp.StatusCode, body)
	}
	var e errorBody
	if err := json.Unmarshal(body, &e); err != nil || !strings.Contains(e.Error, "old config stays in force") ||
		!strings.Contains(e.Error, "experiment.ramp") {
		t.Errorf("bad reload body %s (%v): want the reason and that the old config stays", body, err)
	}
	_, body = f.do(t, http.MethodGet, "/api/v1/config", "")
	var cfg configBody
	if err := json.Unmarshal(body, &cfg); err != nil {
		t.Fatal(err)
	}
	if cfg.Hash != "abc123" || cfg.LastError == "" || !strings.Contains(string(body), `"path": "experiment.ramp"`) {
		t.Errorf("config after a bad reload: %s; want the old hash, the error and its key path", body)
	}
	if f.reload.n != 2 {
		t.Errorf("Reload called %d times, want 2", f.reload.n)
	}
}

func TestGuardrailReset(t *testing.T) {
	f := newFixture(t, nil)
	f.guard.Check() // the fixture's Losing says true
	_, body := f.do(t, http.MethodGet, "/api/v1/guardrails", "")
	var gs guardrailsBody
	if err := json.Unmarshal(body, &gs); err != nil {
		t.Fatal(err)
	}
	if !gs.Tripped || gs.Trip == nil || gs.Trip.Guardrail != guard.LosingGuardrail || !gs.Trip.At.Equal(t0) {
		t.Fatalf("guardrails %s, want the losing trip at %v", body, t0)
	}
	resp, body := f.do(t, http.MethodPost, "/api/v1/guardrails/reset", testToken)
	var rb resetBody
	if err := json.Unmarshal(body, &rb); err != nil || resp.StatusCode != 200 {
		t.Fatalf("reset: %d %s (%v)", resp.StatusCode, body, err)
	}
	if rb.Cleared == nil || rb.Cleared.Reason != "challenger significantly worse" {
		t.Errorf("reset body %s, want the cleared trip", body)
	}
	if tripped, _ := f.guard.Tripped(); tripped {
		t.Error("guard still tripped after the reset endpoint")
	}
	if got := f.guard.Ramp(t0); got != 1 {
		t.Errorf("Ramp after reset = %v, want 1", got)
	}
	_, body = f.do(t, http.MethodPost, "/api/v1/guardrails/reset", testToken)
	if !strings.Contains(string(body), `"cleared": null`) {
		t.Errorf("second reset body %s, want cleared null", body)
	}
}

func TestMetricsEndpointIsLintClean(t *testing.T) {
	f := newFixture(t, nil)
	f.guard.Check()
	resp, body := f.do(t, http.MethodGet, "/metrics", "")
	if resp.StatusCode != 200 {
		t.Fatalf("status %d", resp.StatusCode)
	}
	for _, want := range []string{
		`riffle_guardrail_tripped{guardrail="losing"} 1`,
		`riffle_guardrail_trips_total{guardrail="losing"} 1`,
	} {
		if !strings.Contains(string(body), want) {
			t.Errorf("/metrics lacks %s", want)
		}
	}
	problems, err := promlint.New(strings.NewReader(string(body))).Lint()
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("promlint: %s: %s", p.Metric, p.Text)
	}
}

func TestSnapshotStreamsAConsistentCopy(t *testing.T) {
	f := newFixture(t, nil)
	resp, body := f.do(t, http.MethodGet, "/api/v1/snapshot", testToken)
	if resp.StatusCode != 200 {
		t.Fatalf("status %d; body %s", resp.StatusCode, body)
	}
	if got := resp.Header.Get("Content-Type"); got != "application/octet-stream" {
		t.Errorf("Content-Type %q", got)
	}
	// RFC 6266: attachment with a filename parameter.
	disp, params, err := mime.ParseMediaType(resp.Header.Get("Content-Disposition"))
	if err != nil || disp != "attachment" || params["filename"] != "riffle-20260401T090000Z.db" {
		t.Errorf("Content-Disposition %q: %s %v (%v)", resp.Header.Get("Content-Disposition"), disp, params, err)
	}
	copyPath := filepath.Join(t.TempDir(), "copy.db")
	if err := os.WriteFile(copyPath, body, 0o600); err != nil {
		t.Fatal(err)
	}
	db, err := bolt.Open(copyPath, 0o600, &bolt.Options{ReadOnly: true, Timeout: time.Second})
	if err != nil {
		t.Fatalf("snapshot is not a bbolt file: %v", err)
	}
	defer db.Close()
	err = db.View(func(tx *bolt.Tx) error {
		b := tx.Bucket([]byte("impressions"))
		if b == nil {
			return errors.New("no impressions bucket")
		}
		for k, want := range map[string]string{"imp-1": "rake", "imp-2": "trowel"} {
			if got := string(b.Get([]byte(k))); got != want {
				t.Errorf("%s = %q, want %q", k, got, want)
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}
