// Package config defines riffle's YAML configuration, loads it strictly
// (unknown keys are errors), fills documented defaults and validates it,
// reporting every problem with its key path.
//
// A loaded *Config is treated as immutable: hot reload builds a new one and
// swaps a pointer, so values may be shared between goroutines freely. A
// Reloader's methods are safe for concurrent use.
//
// Some settings are bound to resources opened once at start and need a
// restart to change (see RestartOnly): listen, admin, store,
// store_retention, queue.* and pprof. Every other setting may be changed
// by a reload.
package config

import "time"

// Config is the whole of riffle.yaml.
type Config struct {
	// Listen is the data-plane address (recommendation routes, pass-through,
	// POST /feedback). Default 127.0.0.1:8080.
	Listen string `yaml:"listen"`
	// Admin is the admin listener's address (/metrics, /status, /healthz,
	// /readyz, /api/v1/...). Default 127.0.0.1:7464.
	Admin string `yaml:"admin"`
	// AdminTokenFile, when set, names a file holding the bearer token that
	// mutating admin endpoints require; it must be readable and non-empty.
	// Empty means those endpoints are open (keep the admin listener off
	// public networks). See AdminToken.
	AdminTokenFile string `yaml:"admin_token_file"`
	// Pprof mounts net/http/pprof on the admin listener when true.
	// Default false.
	Pprof bool `yaml:"pprof"`
	// Store is where impressions, events and outcomes are kept: a bbolt
	// file's path (one sidecar), relative to the working directory unless
	// absolute, or a postgres:// (postgresql://) URL of a database that a
	// fleet of sidecars shares. Default riffle.db. A URL's password is
	// redacted wherever the config is shown or logged; better, keep it
	// out of the config with StorePasswordFile or PGPASSWORD.
	Store string `yaml:"store"`
	// StorePasswordFile, when set, names a file holding the database
	// password for a store URL that carries none (white space trimmed);
	// without it, PGPASSWORD applies. See StorePassword.
	StorePasswordFile string `yaml:"store_password_file"`
	// StoreRetention deletes final impression and event records older than
	// this; aggregates stay. Zero keeps everything.
	StoreRetention time.Duration `yaml:"store_retention"`
	// Queue tunes the store's group-commit writer.
	Queue Queue `yaml:"queue"`
	// MaxBodyBytes limits request bodies on routes and /feedback.
	// Default 1 MiB; larger bodies get 413.
	MaxBodyBytes int64 `yaml:"max_body_bytes"`
	// OnIncumbentFailure is "fail" (default: 502 with a JSON reason) or
	// "serve-challenger".
	OnIncumbentFailure string `yaml:"on_incumbent_failure"`
	// ShutdownGrace bounds how long in-flight requests may run after
	// SIGTERM. Default 10s.
	ShutdownGrace time.Duration `yaml:"shutdown_grace"`
	// MaxBackendBytes limits one backend answer on a configured route
	// after decoding, enforced while it is read and inflated (a gzip bomb
	// stops there); a larger answer is a body failure. Default 4 MiB.
	MaxBackendBytes int64 `yaml:"max_backend_bytes"`
	// BackendBytesInFlight bounds the bytes held by challenger answers
	// being read or merged at once; a challenger answer that would pass it
	// is a body failure and the incumbent's list is served. Incumbent
	// answers are never refused for it. Default 64 MiB.
	BackendBytesInFlight int64 `yaml:"backend_bytes_in_flight"`
	// ReadHeaderTimeout bounds reading a request's header on the data
	// plane and admin listeners (restart). Default 10s.
	ReadHeaderTimeout time.Duration `yaml:"read_header_timeout"`
	// ReadBodyTimeout bounds reading a request's body on routes, POST
	// /feedback and pass-through, counted from the end of its header; a
	// body still arriving then is cut off (408). Default 10s.
	ReadBodyTimeout time.Duration `yaml:"read_body_timeout"`
	// Feedback tunes POST /feedback.
	Feedback Feedback `yaml:"feedback"`

	// Incumbent is the model serving today; it is required.
	Incumbent Backend `yaml:"incumbent"`
	// Challenger is the newly trained model; it is required.
	Challenger Backend `yaml:"challenger"`
	// Routes are the recommendation routes that are interleaved; every other
	// path passes through to the incumbent. At least one is required.
	Routes []Route `yaml:"routes"`
	// User says where the user key is read from.
	User User `yaml:"user"`
	// Experiment describes the running comparison.
	Experiment Experiment `yaml:"experiment"`
}

// Backend is one model server.
type Backend struct {
	// URL is the absolute http or https base URL, without query or
	// fragment; the request's path and query are appended. Required.
	URL string `yaml:"url"`
	// Timeout is the per-request deadline, positive. Default 200ms.
	Timeout time.Duration `yaml:"timeout"`
}

// Route is one interleaved recommendation route.
type Route struct {
	// Path is a chi route pattern starting with "/", e.g. /v1/recommend;
	// unique among routes. Required.
	Path string `yaml:"path"`
	// List is an RFC 6901 pointer to the ranked array in the response;
	// empty means the whole response is the array.
	List string `yaml:"list"`
	// ID is an RFC 6901 pointer to the identity inside one element; empty
	// means the element itself is its identity.
	ID string `yaml:"id"`
	// Slots is the merged length; 0 means the incumbent list's length.
	Slots int `yaml:"slots"`
}

// User names exactly one source of the user key; there is no default.
type User struct {
	// Header is a request header field name, e.g. Shopper-Id.
	Header string `yaml:"header"`
	// Query is a query parameter name.
	Query string `yaml:"query"`
	// Body is an RFC 6901 pointer into a JSON request body, e.g. /user/id.
	Body string `yaml:"body"`
}

// Feedback tunes POST /feedback.
type Feedback struct {
	// ClockSkew is how far before its impression an event may be stamped
	// and still count, as at the impression's time: clients' clocks and
	// second-precision stamps lag the server's. Default 30s; an event
	// further before is rejected, saying by how much.
	ClockSkew time.Duration `yaml:"clock_skew"`
	// StoreWait bounds how long a request waits for the store to make its
	// events durable; past it the answer is 503 with Retry-After and the
	// client retries. Default 5s.
	StoreWait time.Duration `yaml:"store_wait"`
}

// Queue tunes the store's group commit.
type Queue struct {
	// Size is the bounded queue's capacity. Default 65536.
	Size int `yaml:"size"`
	// Batch is the most records per commit, at most Size. Default 1024.
	Batch int `yaml:"batch"`
	// Interval is the longest a record waits before a commit. Default 50ms.
	Interval time.Duration `yaml:"interval"`
}

// Experiment is the comparison being run.
type Experiment struct {
	// Name identifies the experiment in the store, metrics and reports:
	// 1 to 64 letters, digits, '.', '_' or '-'. Required.
	Name string `yaml:"name"`
	// Policy is balanced, team-draft, probabilistic or optimized.
	// Default team-draft.
	Policy string `yaml:"policy"`
	// Tau is the probabilistic policy's softmax exponent. Default 3.
	Tau float64 `yaml:"tau"`
	// Credit is the optimized policy's rank-difference credit: "linear"
	// (default) or "inverse-rank".
	Credit string `yaml:"credit"`
	// Ramp is the share of users, in [0,1], who get interleaved lists
	// before the first schedule stage applies (always, without a
	// schedule). Default 1 without a schedule, 0 with one. See
	// EffectiveRamp.
	Ramp *float64 `yaml:"ramp"`
	// Start is when the experiment's schedule starts (RFC 3339). Zero means
	// the time the store first saw this experiment.
	Start time.Time `yaml:"start"`
	// Schedule stages the ramp: each stage's ramp applies from Start+After
	// until the next stage's. Stages are listed in increasing After.
	Schedule []Stage `yaml:"schedule"`
	// MaxChallengerSlots caps the challenger's slots per list; 0 = no cap.
	MaxChallengerSlots int `yaml:"max_challenger_slots"`
	// ChallengerFromSlot is the first 1-based slot the challenger may fill;
	// 0 or 1 = any slot.
	ChallengerFromSlot int `yaml:"challenger_from_slot"`
	// Window is the attribution window after an impression, positive.
	// Default 30m.
	Window time.Duration `yaml:"window"`
	// Events maps event types (names as for Name) to positive weights.
	// Empty means the default {click: 1, purchase: 3}.
	Events map[string]float64 `yaml:"events"`
	// Debias weights each event by 1/p(rank), p(rank) = (1/rank)^eta.
	Debias Debias `yaml:"debias"`
	// Alpha is the significance level, in (0,1). Default 0.05.
	Alpha float64 `yaml:"alpha"`
	// Power is the planned power for "needed", in (0,1). Default 0.8.
	Power float64 `yaml:"power"`
	// MDE is the minimum detectable Delta for "needed", in (0,0.5).
	// Default 0.02.
	MDE float64 `yaml:"mde"`
	// Margin is the non-inferiority/equivalence margin on Delta, in
	// [0,0.5). Default 0.
	Margin float64 `yaml:"margin"`
	// Guardrails halt the challenger automatically.
	Guardrails Guardrails `yaml:"guardrails"`
	// KeepRequests stores, with each interleaved impression, the request
	// that produced it (method, path, query, body and the KeepHeaders), so
	// that riffle replay can ask a candidate model the same question
	// later. It stores users' requests: see the README on privacy.
	// Default false.
	KeepRequests bool `yaml:"keep_requests"`
	// KeepHeaders names the request header fields kept with a request;
	// default none.
	KeepHeaders []string `yaml:"keep_headers"`
	// KeepRequestBytes bounds a kept request's body plus kept headers; a
	// larger request is not kept (the impression is still recorded).
	// Default 16384.
	KeepRequestBytes int64 `yaml:"keep_request_bytes"`
}

// Stage is one step of a staged ramp; both fields are required.
type Stage struct {
	// After is how long after the experiment's start the stage applies.
	After time.Duration `yaml:"after"`
	// Ramp is the share of users, in [0,1], interleaved during the stage.
	Ramp float64 `yaml:"ramp"`
}

// Debias configures position debiasing of credit.
type Debias struct {
	// Eta is the position-bias exponent, at least 0; 0 (the default)
	// disables debiasing.
	Eta float64 `yaml:"eta"`
}

// Guardrails are optional automatic halts; a zero field disables its guard.
type Guardrails struct {
	// ErrorRate trips when the challenger's error share over Window
	// exceeds it; in [0,1).
	ErrorRate float64 `yaml:"error_rate"`
	// LatencyP99 trips when the challenger's p99 latency over Window
	// exceeds it; below challenger.timeout, or it could never trip.
	LatencyP99 time.Duration `yaml:"latency_p99"`
	// Window is the sliding window for the two above. Default 1m.
	Window time.Duration `yaml:"window"`
	// MinRequests is how many challenger calls the window needs before the
	// guards above may trip. Default 100.
	MinRequests int `yaml:"min_requests"`
	// Losing trips when the sequential test says the challenger is
	// significantly worse.
	Losing bool `yaml:"losing"`
}
