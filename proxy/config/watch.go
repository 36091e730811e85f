package config

import (
	"context"
	"crypto/sha256"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"time"

	"github.com/fsnotify/fsnotify"
)

// Watch reloads the config whenever the content of its file changes, until
// ctx ends; it then returns nil. It watches directories rather than the
// file, so that it sees editors that write a new file and rename it over
// the old one, and Kubernetes ConfigMap volumes, where the file is a
// symbolic link through a "..data" link that is swapped atomically. After
// each burst of events (see ReloaderOptions.Debounce) it resolves the links
// again, watches the directories they now lead through, and reloads only
// when the bytes differ from those Reload last read. A missing file is
// waited for, not counted as a failure. It returns an error only when the
// watch cannot be set up or the watcher breaks.
func (r *Reloader) Watch(ctx context.Context) error {
	w, err := fsnotify.NewWatcher()
	if err != nil {
		return fmt.Errorf("config: watch %s: %w", r.path, err)
	}
	defer w.Close()
	watched := map[string]bool{}
	if err := r.rewatch(w, watched); err != nil {
		return err
	}
	r.noteInitial()

	debounce := time.NewTimer(r.debounce)
	debounce.Stop()
	defer debounce.Stop()
	var poll <-chan time.Time
	if r.poll > 0 {
		t := time.NewTicker(r.poll)
		defer t.Stop()
		poll = t.C
	}
	for {
		select {
		case <-ctx.Done():
			return nil
		case ev, ok := <-w.Events:
			if !ok {
				return fmt.Errorf("config: watch %s: watcher closed", r.path)
			}
			if ev.Op != fsnotify.Chmod {
				debounce.Reset(r.debounce)
			}
		case err, ok := <-w.Errors:
			if !ok {
				return fmt.Errorf("config: watch %s: watcher closed", r.path)
			}
			r.log.Warn("config watch error", "file", r.path, "error", err)
		case <-debounce.C:
			if err := r.rewatch(w, watched); err != nil {
				r.log.Warn("config watch", "file", r.path, "error", err)
			}
			r.reloadIfChanged()
		case <-poll:
			r.reloadIfChanged()
		}
	}
}

// ReloadOnSignal calls Reload for every value received on ch (for example
// SIGHUP from signal.Notify) until ctx ends or ch is closed. Failures are
// logged and counted by Reload itself.
func (r *Reloader) ReloadOnSignal(ctx context.Context, ch <-chan os.Signal) {
	for {
		select {
		case <-ctx.Done():
			return
		case _, ok := <-ch:
			if !ok {
				return
			}
			_ = r.Reload()
		}
	}
}

// noteInitial takes the file's current bytes as the ones the initial config
// came from, when no Reload has read the file yet.
func (r *Reloader) noteInitial() {
	data, err := os.ReadFile(r.path)
	if err != nil {
		return
	}
	sum := sha256.Sum256(data)
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.seen == nil && r.cur.Load() != nil {
		r.seen = &sum
	}
}

func (r *Reloader) reloadIfChanged() {
	data, err := os.ReadFile(r.path)
	if err != nil {
		r.log.Debug("config watch: file not readable yet", "file", r.path, "error", err)
		return
	}
	sum := sha256.Sum256(data)
	r.mu.Lock()
	same := r.seen != nil && *r.seen == sum
	r.mu.Unlock()
	if !same {
		_ = r.Reload()
	}
}

// rewatch makes the watched set the directories the config path now leads
// through, adding new ones and dropping stale ones.
func (r *Reloader) rewatch(w *fsnotify.Watcher, watched map[string]bool) error {
	want := watchDirs(r.path)
	var first error
	for _, d := range want {
		if watched[d] {
			continue
		}
		if err := w.Add(d); err != nil {
			if first == nil {
				first = fmt.Errorf("config: watch %s: %w", d, err)
			}
			continue
		}
		watched[d] = true
	}
	for d := range watched {
		if !slices.Contains(want, d) {
			_ = w.Remove(d) // the directory may be gone already
			delete(watched, d)
		}
	}
	if len(watched) == 0 && first == nil {
		first = fmt.Errorf("config: watch %s: %w", r.path, errors.ErrUnsupported)
	}
	return first
}

// watchDirs returns the directory holding path and the directory of every
// symbolic link target on the way to the file itself.
func watchDirs(path string) []string {
	abs, err := filepath.Abs(path)
	if err != nil {
		abs = path
	}
	dirs := []string{filepath.Dir(abs)}
	add := func(d string) {
		if d = filepath.Clean(d); !slices.Contains(dirs, d) {
			dirs = append(dirs, d)
		}
	}
	p := abs
	for range 40 { // Linux's MAXSYMLINKS (recalled from memory)
		fi, err := os.Lstat(p)
		if err != nil || fi.Mode()&os.ModeSymlink == 0 {
			break
		}
		t, err := os.Readlink(p)
		if err != nil {
			break
		}
		if !filepath.IsAbs(t) {
			t = filepath.Join(filepath.Dir(p), t)
		}
		add(filepath.Dir(t))
		p = t
	}
	if real, err := filepath.EvalSymlinks(abs); err == nil {
		add(filepath.Dir(real))
	}
	return dirs
}
