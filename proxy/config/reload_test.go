package config

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
	"github.com/prometheus/client_golang/prometheus/testutil/promlint"
)

var t0 = time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC)

// fixture is a config file, a Reloader over it and what it recorded.
type fixture struct {
	path    string
	r       *Reloader
	reg     *prometheus.Registry
	log     *syncBuffer
	applied atomic.Int32
	refuse  atomic.Pointer[error] // apply's answer
	ticks   atomic.Int64
}

type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// newFixture writes the minimal config (with ramp 1) to a temporary file and
// starts a Reloader on it; see newFixtureAt.
func newFixture(t *testing.T, o ReloaderOptions) *fixture {
	t.Helper()
	path := filepath.Join(t.TempDir(), "riffle.yaml")
	writeFile(t, path, withRamp(t, "1"))
	return newFixtureAt(t, path, o)
}

// newFixtureAt starts a Reloader on the config file at path, with a fresh
// registry and a log buffer; each call of its clock advances one second.
func newFixtureAt(t *testing.T, path string, o ReloaderOptions) *fixture {
	t.Helper()
	f := &fixture{path: path, reg: prometheus.NewPedanticRegistry(), log: &syncBuffer{}}
	initial, err := Load(f.path)
	if err != nil {
		t.Fatal(err)
	}
	o.Registerer, o.Logger = f.reg, slog.New(slog.NewTextHandler(f.log, &slog.HandlerOptions{Level: slog.LevelDebug}))
	o.Now = func() time.Time { return t0.Add(time.Duration(f.ticks.Add(1)) * time.Second) }
	f.r = NewReloader(f.path, initial, f.apply, o)
	return f
}

func (f *fixture) apply(*Config) error {
	if e := f.refuse.Load(); e != nil {
		return *e
	}
	f.applied.Add(1)
	return nil
}

func withRamp(t testing.TB, ramp string) string {
	return strings.Replace(string(minimal(t)), "{name: spring-refresh}", "{name: spring-refresh, ramp: "+ramp+"}", 1)
}

func (f *fixture) ramp() float64 { return *f.r.Current().Experiment.Ramp }

func (f *fixture) reloads(result string) float64 {
	return testutil.ToFloat64(f.r.metrics.reloads.WithLabelValues(result))
}

func TestReloadSwapsValidChange(t *testing.T) {
	f := newFixture(t, ReloaderOptions{})
	oldHash := f.r.Status().Hash
	writeFile(t, f.path, withRamp(t, "0.25"))
	if err := f.r.Reload(); err != nil {
		t.Fatalf("Reload: %v", err)
	}
	if got := f.ramp(); got != 0.25 {
		t.Errorf("ramp after reload: got %v, want 0.25", got)
	}
	st := f.r.Status()
	want := ReloadStatus{Hash: f.r.Current().Hash(), LoadedAt: t0.Add(2 * time.Second), LastAttempt: t0.Add(2 * time.Second)}
	if fmt.Sprint(st) != fmt.Sprint(want) {
		t.Errorf("Status: got %+v, want %+v", st, want)
	}
	if st.Hash == oldHash {
		t.Errorf("hash did not change on reload: %s", st.Hash)
	}
	if f.applied.Load() != 1 {
		t.Errorf("apply calls: got %d, want 1", f.applied.Load())
	}
	expected := fmt.Sprintf(`
# HELP riffle_config_info Always 1, labelled with the hash of the config in force.
# TYPE riffle_config_info gauge
riffle_config_info{hash=%q} 1
# HELP riffle_config_last_reload_success_timestamp_seconds Unix time at which the config in force was loaded.
# TYPE riffle_config_last_reload_success_timestamp_seconds gauge
riffle_config_last_reload_success_timestamp_seconds %d
# HELP riffle_config_reloads_total Config reload attempts by result (success or failure).
# TYPE riffle_config_reloads_total counter
riffle_config_reloads_total{result="failure"} 0
riffle_config_reloads_total{result="success"} 1
`, st.Hash, t0.Add(2*time.Second).Unix())
	if err := testutil.GatherAndCompare(f.reg, strings.NewReader(expected)); err != nil {
		t.Error(err)
	}
}

// TestReloadKeepsOldOnBadFile checks each kind of bad file: the old config
// stays, the failure is counted, logged with the key, and in Status.
func TestReloadKeepsOldOnBadFile(t *testing.T) {
	tests := []struct {
		name    string
		content func(t *testing.T) string // nil removes the file
		is      error
		path    string // the problem's key path, "" for a whole-file problem
		msg     string // in LastError and the log
	}{
		{"bad YAML", func(t *testing.T) string { return withRamp(t, "[0.5") }, ErrInvalid, "", "invalid YAML"},
		{"bad pointer", func(t *testing.T) string {
			return strings.Replace(withRamp(t, "0.5"), "list: /items", "list: items", 1)
		},
			ErrInvalid, "routes[0].list", `routes[0].list: "items" is not a JSON pointer (RFC 6901: must be empty or start with "/")`},
		{"negative timeout", func(t *testing.T) string {
			return strings.Replace(withRamp(t, "0.5"), `{url: "http://127.0.0.1:7001"}`, `{url: "http://127.0.0.1:7001", timeout: -5s}`, 1)
		}, ErrInvalid, "incumbent.timeout", "incumbent.timeout: -5s must be positive"},
		{"unknown key", func(t *testing.T) string { return withRamp(t, "0.5") + "rampp: 1\n" }, ErrInvalid, "rampp", `rampp: unknown key "rampp"`},
		{"restart-only change", func(t *testing.T) string { return withRamp(t, "0.5") + "listen: 127.0.0.1:8081\n" },
			ErrNeedsRestart, "listen", `listen: changed from "127.0.0.1:8080" to "127.0.0.1:8081"; this needs a restart`},
		{"missing file", nil, fs.ErrNotExist, "", "no such file or directory"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			f := newFixture(t, ReloaderOptions{})
			before, beforeStatus := f.r.Current(), f.r.Status()
			if tt.content == nil {
				if err := os.Remove(f.path); err != nil {
					t.Fatal(err)
				}
			} else {
				writeFile(t, f.path, tt.content(t))
			}
			err := f.r.Reload()
			if !errors.Is(err, tt.is) {
				t.Fatalf("Reload: got %v, want an error matching %v", err, tt.is)
			}
			if f.r.Current() != before || f.ramp() != 1 {
				t.Errorf("config in force changed after a failed reload")
			}
			if got := f.reloads("failure"); got != 1 {
				t.Errorf("failures counted: got %v, want 1", got)
			}
			if got := f.reloads("success"); got != 0 {
				t.Errorf("successes counted: got %v, want 0", got)
			}
			st := f.r.Status()
			if !strings.Contains(st.LastError, tt.msg) || st.Hash != beforeStatus.Hash || !st.LoadedAt.Equal(beforeStatus.LoadedAt) {
				t.Errorf("Status: got %+v, want the old hash and loaded_at and last_error containing %q", st, tt.msg)
			}
			if !st.LastAttempt.Equal(t0.Add(2 * time.Second)) {
				t.Errorf("Status.LastAttempt: got %v, want %v", st.LastAttempt, t0.Add(2*time.Second))
			}
			if tt.path != "" && (len(st.Problems) == 0 || st.Problems[0].Path != tt.path) {
				t.Errorf("Status.Problems: got %v, want the first at %s", st.Problems, tt.path)
			}
			if logged := f.log.String(); !strings.Contains(logged, "level=WARN") || (tt.path != "" && !strings.Contains(logged, "key="+tt.path)) {
				t.Errorf("log: got\n%s\nwant a warning naming key=%s", logged, tt.path)
			}
			if f.applied.Load() != 0 {
				t.Errorf("apply was called for a rejected file")
			}
		})
	}
}

func TestReloadApplyErrorKeepsOld(t *testing.T) {
	f := newFixture(t, ReloaderOptions{})
	before := f.r.Current()
	refusal := errors.New("cannot rebuild routes")
	f.refuse.Store(&refusal)
	writeFile(t, f.path, withRamp(t, "0.5"))
	err := f.r.Reload()
	if !errors.Is(err, refusal) {
		t.Fatalf("Reload: got %v, want it to wrap the apply error", err)
	}
	if f.r.Current() != before || f.reloads("failure") != 1 {
		t.Errorf("after a refused apply: config changed=%v, failures=%v; want unchanged, 1", f.r.Current() != before, f.reloads("failure"))
	}
	if st := f.r.Status(); !strings.Contains(st.LastError, "cannot rebuild routes") || st.Problems != nil {
		t.Errorf("Status: got %+v, want last_error with the apply error and no problems", st)
	}
	// Once apply accepts, the same file goes in and the error clears.
	f.refuse.Store(nil)
	if err := f.r.Reload(); err != nil || f.ramp() != 0.5 || f.r.Status().LastError != "" {
		t.Errorf("second Reload: got %v, ramp %v, last error %q", err, f.ramp(), f.r.Status().LastError)
	}
}

func TestReloaderWithoutInitial(t *testing.T) {
	path := filepath.Join(t.TempDir(), "riffle.yaml")
	writeFile(t, path, withRamp(t, "0.75"))
	r := NewReloader(path, nil, nil, ReloaderOptions{Logger: slog.New(slog.DiscardHandler)})
	if r.Current() != nil {
		t.Fatal("Current before the first Reload: want nil")
	}
	if err := r.Reload(); err != nil || *r.Current().Experiment.Ramp != 0.75 {
		t.Fatalf("first Reload: got %v", err)
	}
}

func TestReloaderMetricsLint(t *testing.T) {
	f := newFixture(t, ReloaderOptions{})
	writeFile(t, f.path, "bad: [")
	_ = f.r.Reload()
	mfs, err := f.reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	if len(mfs) != 3 {
		t.Errorf("metric families: got %d, want 3", len(mfs))
	}
	problems, err := promlint.NewWithMetricFamilies(mfs).Lint()
	if err != nil || len(problems) != 0 {
		t.Errorf("promlint: got %v, %v; want no problems", problems, err)
	}
}

func TestNewReloaderTwiceOnOneRegistryPanics(t *testing.T) {
	reg := prometheus.NewRegistry()
	o := ReloaderOptions{Registerer: reg, Logger: slog.New(slog.DiscardHandler)}
	NewReloader("a.yaml", nil, nil, o)
	defer func() {
		if r := recover(); r == nil || !strings.Contains(fmt.Sprint(r), "config: register reload metrics") {
			t.Errorf("got panic %v, want one naming the reload metrics", r)
		}
	}()
	NewReloader("b.yaml", nil, nil, o)
}

// TestReloadUnderConcurrentReaders runs readers beside reloads; with -race
// it checks that the swap is safe, and each reader sees a whole config.
func TestReloadUnderConcurrentReaders(t *testing.T) {
	f := newFixture(t, ReloaderOptions{})
	ctx, cancel := context.WithCancel(context.Background())
	var wg sync.WaitGroup
	var bad atomic.Int32
	for range 4 {
		wg.Go(func() {
			for ctx.Err() == nil {
				c := f.r.Current()
				if r := *c.Experiment.Ramp; r != 1 && r != 0.5 {
					bad.Add(1)
				}
				_ = f.r.Status()
			}
		})
	}
	for i := range 20 {
		writeFile(t, f.path, withRamp(t, []string{"0.5", "1"}[i%2]))
		if err := f.r.Reload(); err != nil {
			t.Error(err)
		}
	}
	cancel()
	wg.Wait()
	if bad.Load() != 0 || f.reloads("success") != 20 {
		t.Errorf("got %d torn reads and %v successes, want 0 and 20", bad.Load(), f.reloads("success"))
	}
}

func TestReloadOnSignal(t *testing.T) {
	f := newFixture(t, ReloaderOptions{})
	ctx, cancel := context.WithCancel(context.Background())
	ch := make(chan os.Signal)
	done := make(chan struct{})
	go func() { f.r.ReloadOnSignal(ctx, ch); close(done) }()
	writeFile(t, f.path, withRamp(t, "0.5"))
	ch <- os.Interrupt
	ch <- os.Interrupt // the first has been handled once the second is taken
	if got := f.ramp(); got != 0.5 {
		t.Errorf("ramp after a signal: got %v, want 0.5", got)
	}
	cancel()
	<-done
}
