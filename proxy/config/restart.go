package config

import (
	"fmt"
	"strconv"
	"time"
)

// RestartOnly lists the changes from old to next that a running process
// cannot take live, one Problem per changed key, each saying
// `listen: changed from "127.0.0.1:8080" to "0.0.0.0:8080"; this needs a
// restart`. An empty result means next may be swapped in.
//
// Restart-only keys are those bound to resources opened once at start:
// listen and admin (the listeners), store, store_password_file and
// store_retention (the open store: its file or its connections, and its
// pruner), queue.size, queue.batch and queue.interval (the group-commit
// writer), pprof (handlers mounted on the admin mux) and
// read_header_timeout (set on the listeners' servers).
// Everything else is live: backends' URLs and timeouts, routes, user,
// policy, tau, credit, ramp, start, schedule, hedges, window, events,
// debias, alpha, power, mde, margin, guardrails, on_incumbent_failure,
// max_body_bytes, max_backend_bytes, backend_bytes_in_flight,
// read_body_timeout, feedback.*, shutdown_grace and admin_token_file (read on every
// mutating admin request).
func RestartOnly(old, next *Config) []Problem {
	var ps []Problem
	str := func(path, a, b string) {
		if a != b {
			ps = append(ps, restartProblem(path, strconv.Quote(a), strconv.Quote(b)))
		}
	}
	num := func(path string, a, b any) {
		if a != b {
			ps = append(ps, restartProblem(path, fmt.Sprint(a), fmt.Sprint(b)))
		}
	}
	span := func(path string, a, b time.Duration) {
		if a != b {
			ps = append(ps, restartProblem(path, dur(a), dur(b)))
		}
	}
	str("listen", old.Listen, next.Listen)
	str("admin", old.Admin, next.Admin)
	str("store", RedactedStore(old.Store), RedactedStore(next.Store))
	str("store_password_file", old.StorePasswordFile, next.StorePasswordFile)
	span("store_retention", old.StoreRetention, next.StoreRetention)
	num("queue.size", old.Queue.Size, next.Queue.Size)
	num("queue.batch", old.Queue.Batch, next.Queue.Batch)
	span("queue.interval", old.Queue.Interval, next.Queue.Interval)
	num("pprof", old.Pprof, next.Pprof)
	span("read_header_timeout", old.ReadHeaderTimeout, next.ReadHeaderTimeout)
	return ps
}

func restartProblem(path, from, to string) Problem {
	return Problem{Path: path, Message: fmt.Sprintf("changed from %s to %s; this needs a restart", from, to)}
}
