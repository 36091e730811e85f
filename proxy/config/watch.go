package config

import (
	"context"
	"crypto/sha256"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
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
// when the bytes differ from those Reload last read. Only events on the
// config file, the links on the way to it, or a directory on that way
// count: other files in the same directories (the store, say, which is
// written on every commit) would otherwise keep the debounce from ever
// ending under steady traffic. A file changed between the initial load and
// the start of the watch is reloaded when the watch starts. A missing file is
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
	paths := chain(r.path) // what events must concern; renewed with the watch
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
			if ev.Op != fsnotify.Chmod && concerns(paths, ev.Name) {
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
			paths = chain(r.path)
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
// came from, when no Reload has read the file yet and they still parse to
// that config. When they do not, the file changed between the initial load
// and the start of the watch, and no event will tell of it: it reloads.
func (r *Reloader) noteInitial() {
	data, err := os.ReadFile(r.path)
	if err != nil {
		return
	}
	sum := sha256.Sum256(data)
	r.mu.Lock()
	cur := r.cur.Load()
	if r.seen != nil || cur == nil {
		r.mu.Unlock()
		return
	}
	if c, err := Parse(data, r.path); err == nil && c.Hash() == cur.Hash() {
		r.seen = &sum
		r.mu.Unlock()
		return
	}
	r.mu.Unlock()
	_ = r.Reload()
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
	var dirs []string
	for _, p := range chain(path) {
		if d := filepath.Dir(p); !slices.Contains(dirs, d) {
			dirs = append(dirs, d)
		}
	}
	return dirs
}

// chain returns the absolute path, every symbolic link target on the way
// to the file itself, and the file's real path.
func chain(path string) []string {
	abs, err := filepath.Abs(path)
	if err != nil {
		abs = path
	}
	paths := []string{filepath.Clean(abs)}
	add := func(p string) {
		if p = filepath.Clean(p); !slices.Contains(paths, p) {
			paths = append(paths, p)
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
		add(t)
		p = t
	}
	if real, err := filepath.EvalSymlinks(abs); err == nil {
		add(real)
	}
	return paths
}

// concerns reports whether an event on name can change what the config
// path reads, given the path's chain (see chain): name is on the chain, or
// is a directory on the way to a path on it (a ConfigMap's "..data" link
// swapped by a rename, a directory removed).
func concerns(paths []string, name string) bool {
	name = filepath.Clean(name)
	for _, p := range paths {
		if p == name || strings.HasPrefix(p, name+string(filepath.Separator)) {
			return true
		}
	}
	return false
}
