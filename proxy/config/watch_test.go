package config

import (
	"context"
	"os"
	"path/filepath"
	"testing"
	"time"
)

// watching starts Watch on the fixture and stops it when the test ends,
// checking that it returns nil once its context is cancelled.
func watching(t *testing.T, f *fixture) {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- f.r.Watch(ctx) }()
	t.Cleanup(func() {
		cancel()
		select {
		case err := <-done:
			if err != nil {
				t.Errorf("Watch returned %v after cancel, want nil", err)
			}
		case <-time.After(2 * time.Second):
			t.Error("Watch did not return after its context was cancelled")
		}
	})
	// Watch has its directories once it has read the file; give it that
	// long, no more, before the test changes anything.
	waitFor(t, "the watch to start", func() bool {
		f.r.mu.Lock()
		defer f.r.mu.Unlock()
		return f.r.seen != nil
	})
}

// waitFor polls cond until it holds or a deadline passes.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(5 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

func fastWatch() ReloaderOptions { return ReloaderOptions{Debounce: 20 * time.Millisecond} }

func TestWatchAtomicRename(t *testing.T) {
	f := newFixture(t, fastWatch())
	watching(t, f)
	// An editor's save: write a temporary file beside the config, rename it over.
	tmp := f.path + ".swp"
	writeFile(t, tmp, withRamp(t, "0.5"))
	if err := os.Rename(tmp, f.path); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "the renamed file to be loaded", func() bool { return f.ramp() == 0.5 })
	if got := f.reloads("success") + f.reloads("failure"); got != 1 {
		t.Errorf("reload attempts: got %v, want 1", got)
	}
}

func TestWatchWriteInPlace(t *testing.T) {
	f := newFixture(t, fastWatch())
	watching(t, f)
	writeFile(t, filepath.Join(filepath.Dir(f.path), "unrelated.txt"), "not the config")
	writeFile(t, f.path, withRamp(t, "0.3"))
	waitFor(t, "the rewritten file to be loaded", func() bool { return f.ramp() == 0.3 })
	// The unrelated file's event must not have caused a reload of its own.
	if got := f.reloads("success") + f.reloads("failure"); got != 1 {
		t.Errorf("reload attempts: got %v, want 1", got)
	}
}

func TestWatchBadFileThenFix(t *testing.T) {
	f := newFixture(t, fastWatch())
	watching(t, f)
	writeFile(t, f.path, withRamp(t, "7"))
	waitFor(t, "the bad file to be rejected", func() bool { return f.reloads("failure") == 1 })
	if f.ramp() != 1 || f.r.Status().LastError == "" {
		t.Errorf("after a bad file: ramp %v, last error %q; want 1 and an error", f.ramp(), f.r.Status().LastError)
	}
	writeFile(t, f.path, withRamp(t, "0.4"))
	waitFor(t, "the fixed file to be loaded", func() bool { return f.ramp() == 0.4 })
	if f.r.Status().LastError != "" {
		t.Errorf("last error after the fix: got %q, want empty", f.r.Status().LastError)
	}
}

// TestWatchConfigMapSwap mimics a Kubernetes ConfigMap volume: the file is
// a link through "..data", itself a link to a timestamped directory, and an
// update writes a new directory and renames a new "..data" link over the old.
func TestWatchConfigMapSwap(t *testing.T) {
	dir := t.TempDir()
	write := func(stamp, ramp string) {
		d := filepath.Join(dir, stamp)
		if err := os.Mkdir(d, 0o755); err != nil {
			t.Fatal(err)
		}
		writeFile(t, filepath.Join(d, "riffle.yaml"), withRamp(t, ramp))
	}
	write("..2026_04_01_06_00_00.1", "1")
	must(t, os.Symlink("..2026_04_01_06_00_00.1", filepath.Join(dir, "..data")))
	must(t, os.Symlink(filepath.Join("..data", "riffle.yaml"), filepath.Join(dir, "riffle.yaml")))

	f := newFixtureAt(t, filepath.Join(dir, "riffle.yaml"), fastWatch())
	watching(t, f)
	for i, ramp := range []string{"0.2", "0.6"} {
		old, _ := os.Readlink(filepath.Join(dir, "..data"))
		stamp := "..2026_04_01_07_00_00." + ramp
		write(stamp, ramp)
		must(t, os.Symlink(stamp, filepath.Join(dir, "..data_tmp")))
		must(t, os.Rename(filepath.Join(dir, "..data_tmp"), filepath.Join(dir, "..data")))
		must(t, os.RemoveAll(filepath.Join(dir, old)))
		want := map[int]float64{0: 0.2, 1: 0.6}[i]
		waitFor(t, "swap "+ramp+" to be loaded", func() bool { return f.ramp() == want })
	}
}

// TestWatchLinkElsewhere covers a config that is a link to a file in
// another directory, where the target is replaced by a rename.
func TestWatchLinkElsewhere(t *testing.T) {
	target := filepath.Join(t.TempDir(), "real.yaml")
	writeFile(t, target, withRamp(t, "1"))
	link := filepath.Join(t.TempDir(), "riffle.yaml")
	must(t, os.Symlink(target, link))
	f := newFixtureAt(t, link, fastWatch())
	watching(t, f)
	writeFile(t, target+".new", withRamp(t, "0.9"))
	must(t, os.Rename(target+".new", target))
	waitFor(t, "the link target's new content to be loaded", func() bool { return f.ramp() == 0.9 })
}

// TestWatchPoll checks the fallback for file systems without events: a
// change is found by polling even though events are debounced for longer
// than the test waits.
func TestWatchPoll(t *testing.T) {
	f := newFixture(t, ReloaderOptions{Debounce: time.Hour, Poll: 20 * time.Millisecond})
	watching(t, f)
	writeFile(t, f.path, withRamp(t, "0.1"))
	waitFor(t, "the polled change to be loaded", func() bool { return f.ramp() == 0.1 })
}

func TestWatchMissingDirectory(t *testing.T) {
	r := NewReloader(filepath.Join(t.TempDir(), "gone", "riffle.yaml"), nil, nil, fastWatch())
	if err := r.Watch(context.Background()); err == nil {
		t.Error("Watch on a missing directory: got nil, want an error")
	}
}

func must(t *testing.T, err error) {
	t.Helper()
	if err != nil {
		t.Fatal(err)
	}
}
