package config

import (
	"context"
	"os"
	"path/filepath"
	"testing"
	"time"
)

// TestWatchBesideBusyFile covers a config in the same directory as a file
// written all the time, as the store is under traffic (riffle.yaml and
// riffle.db side by side are both defaults): the busy file's events must
// not keep the debounce from ending, so the config's change is loaded
// about one debounce after it is made.
func TestWatchBesideBusyFile(t *testing.T) {
	f := newFixture(t, ReloaderOptions{Debounce: 100 * time.Millisecond})
	watching(t, f)
	busy := filepath.Join(filepath.Dir(f.path), "riffle.db")
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan struct{})
	go func() {
		defer close(done)
		for i := 0; ctx.Err() == nil; i++ {
			_ = os.WriteFile(busy, []byte{byte(i)}, 0o600)
			time.Sleep(time.Millisecond) // far inside the debounce
		}
	}()
	defer func() { cancel(); <-done }()
	tmp := f.path + ".new"
	writeFile(t, tmp, withRamp(t, "0.4"))
	must(t, os.Rename(tmp, f.path))
	deadline := time.Now().Add(2 * time.Second)
	for f.ramp() != 0.4 {
		if time.Now().After(deadline) {
			t.Fatalf("the config beside a busy file was not loaded within 2s (debounce 100ms)")
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// TestWatchSeesChangeBeforeStart covers a file replaced after the initial
// load but before Watch set up its watch: no event will come for it, so
// Watch must notice it when it starts rather than take the new bytes for
// the initial config's.
func TestWatchSeesChangeBeforeStart(t *testing.T) {
	f := newFixture(t, fastWatch())
	tmp := f.path + ".new"
	writeFile(t, tmp, withRamp(t, "0.7"))
	must(t, os.Rename(tmp, f.path))
	watching(t, f)
	waitFor(t, "the change made before the watch started to be loaded", func() bool { return f.ramp() == 0.7 })
	if got := f.reloads("success"); got != 1 {
		t.Errorf("successful reloads: got %v, want 1", got)
	}
}
