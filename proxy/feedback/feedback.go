// Package feedback is riffle's POST /feedback handler: it reads one JSON
// event or NDJSON events, checks every line, hands the good ones to the
// store in one call (durable before the answer), and answers 202 with what
// was accepted, what was a duplicate and why each rejected line was
// rejected. The handler is safe for concurrent use.
package feedback

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"net/http"
	"os"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"riffle/store"
)

// EventStore is what the handler needs of the store.
type EventStore interface {
	// AddEvents records evs durably and returns one error (or nil) per
	// event; see store.(*Store).AddEvents.
	AddEvents(ctx context.Context, evs []store.Event) []error
}

var _ EventStore = (*store.Store)(nil)

// Defaults for the zero Options fields.
const (
	// DefaultMaxBodyBytes is the body limit when Options.MaxBodyBytes is 0.
	DefaultMaxBodyBytes = 1 << 20
	// DefaultClockSkew is the clock skew allowed when Options.ClockSkew
	// is 0.
	DefaultClockSkew = 30 * time.Second
	// DefaultStoreWait bounds the wait for the store when
	// Options.StoreWait is 0.
	DefaultStoreWait = 5 * time.Second
	// MaxListed is how many rejections an answer lists one by one; the
	// counts by reason cover them all.
	MaxListed = 100
)

// Options configures the handler.
type Options struct {
	// MaxBodyBytes limits the request body; a larger body gets 413.
	// Zero means DefaultMaxBodyBytes (1 MiB).
	MaxBodyBytes int64
	// ClockSkew is how far before its impression an event may be stamped
	// and still count, as at the impression's time. Zero means
	// DefaultClockSkew (30s); negative allows none.
	ClockSkew time.Duration
	// StoreWait bounds the wait for the store to make a request's events
	// durable; past it the answer is 503 with Retry-After. Zero means
	// DefaultStoreWait (5s).
	StoreWait time.Duration
	// Live, when set, is called on every request for the three settings
	// above (a config reload changes them); its zero fields get the
	// defaults as above. When nil the fields above apply.
	Live func() Options
	// Now stamps events sent without a time. Default time.Now.
	Now func() time.Time
	// Registerer receives riffle_feedback_events_accepted_total and
	// riffle_feedback_events_rejected_total. Nil registers none; a second
	// handler on the same registry shares the first one's counters.
	Registerer prometheus.Registerer
	// Logger receives store failures. Default slog.Default().
	Logger *slog.Logger
}

// Response is the JSON answer. Rejected lists at most MaxListed
// rejections (the earliest lines of those found); RejectedTotal and
// RejectedByReason count every one, and Truncated says the list is short
// of them.
type Response struct {
	// Accepted counts events recorded by this request.
	Accepted int `json:"accepted"`
	// Duplicates counts events already recorded before: acknowledged, not
	// recorded again.
	Duplicates int `json:"duplicates"`
	// Rejected lists the lines that were not recorded and why.
	Rejected []Rejection `json:"rejected"`
	// RejectedTotal counts every rejected line.
	RejectedTotal int `json:"rejected_total"`
	// RejectedByReason counts the rejected lines by reason, the reason
	// label values of riffle_feedback_events_rejected_total.
	RejectedByReason map[string]int `json:"rejected_by_reason"`
	// Truncated is true when Rejected lists fewer than RejectedTotal.
	Truncated bool `json:"truncated"`
	// Error says why the request as a whole failed (400, 408, 413, 503).
	Error string `json:"error,omitempty"`
}

// Rejection is one refused line.
type Rejection struct {
	// Line is the 1-based line number in the request body.
	Line int `json:"line"`
	// Error says what is wrong with it.
	Error string `json:"error"`
}

// reject counts one rejected line with its reason and lists it while the
// list has room.
func (r *Response) reject(line int, reason, msg string) {
	r.RejectedTotal++
	if r.RejectedByReason == nil {
		r.RejectedByReason = map[string]int{}
	}
	r.RejectedByReason[reason]++
	if len(r.Rejected) < MaxListed {
		r.Rejected = append(r.Rejected, Rejection{Line: line, Error: msg})
	}
	r.Truncated = r.RejectedTotal > len(r.Rejected)
}

type handler struct {
	st   EventStore
	opts Options
	now  func() time.Time
	log  *slog.Logger
	m    *metrics
}

// New returns the POST /feedback handler over st. It panics if st is nil,
// which is a programming error.
func New(st EventStore, o Options) http.Handler {
	if st == nil {
		panic("feedback.New: nil EventStore")
	}
	h := &handler{st: st, opts: o, now: o.Now, log: o.Logger}
	if h.now == nil {
		h.now = time.Now
	}
	if h.log == nil {
		h.log = slog.Default()
	}
	h.m = newMetrics(o.Registerer, h.log)
	return h
}

// settings returns the limits in force, defaults filled in.
func (h *handler) settings() Options {
	o := h.opts
	if o.Live != nil {
		o = o.Live()
	}
	if o.MaxBodyBytes <= 0 {
		o.MaxBodyBytes = DefaultMaxBodyBytes
	}
	if o.ClockSkew == 0 {
		o.ClockSkew = DefaultClockSkew
	}
	o.ClockSkew = max(o.ClockSkew, 0)
	if o.StoreWait <= 0 {
		o.StoreWait = DefaultStoreWait
	}
	return o
}

// ServeHTTP reads, parses, records, and answers.
func (h *handler) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	if r.Method != http.MethodPost {
		w.Header().Set("Allow", http.MethodPost)
		answer(w, http.StatusMethodNotAllowed, &Response{Error: "use POST"})
		return
	}
	o := h.settings()
	resp := &Response{Rejected: []Rejection{}}
	var evs []store.Event
	var at []int // line number of each event
	now := h.now()
	err := scanBody(http.MaxBytesReader(w, r.Body, o.MaxBodyBytes), now, func(l line) {
		if l.err == nil {
			l.err = clampSkew(&l.ev, o.ClockSkew)
		}
		if l.err != nil {
			var pe *parseError
			errors.As(l.err, &pe)
			resp.reject(l.n, pe.reason, l.err.Error())
			return
		}
		evs, at = append(evs, l.ev), append(at, l.n)
	})
	if status, msg := h.readFailure(err, o.MaxBodyBytes); status != 0 {
		answer(w, status, &Response{Error: msg})
		return
	}
	status := h.record(r.Context(), o.StoreWait, evs, at, resp)
	answer(w, status, resp)
}

// readFailure turns the body reader's error into the answer for the whole
// request; status 0 means the body was read.
func (h *handler) readFailure(err error, limit int64) (int, string) {
	var tooBig *http.MaxBytesError
	switch {
	case err == nil:
		return 0, ""
	case errors.As(err, &tooBig):
		h.m.rejected(reasonTooLarge, 1)
		return http.StatusRequestEntityTooLarge, fmt.Sprintf("body over the %d-byte limit", limit)
	case errors.Is(err, os.ErrDeadlineExceeded):
		return http.StatusRequestTimeout, "the body did not arrive within read_body_timeout; nothing was recorded"
	}
	return http.StatusBadRequest, fmt.Sprintf("read body: %v", err)
}

// record sends the events to the store, waiting at most wait, and fills
// in the answer; it returns its status.
func (h *handler) record(ctx context.Context, wait time.Duration, evs []store.Event, at []int, resp *Response) int {
	for reason, n := range resp.RejectedByReason {
		h.m.rejected(reason, n)
	}
	if len(evs) == 0 {
		resp.Error = "no event could be read"
		if resp.RejectedTotal == 0 {
			resp.Error = "empty body: send one JSON event or NDJSON lines"
		}
		return http.StatusBadRequest
	}
	sctx, cancel := context.WithTimeout(ctx, wait)
	errs := h.st.AddEvents(sctx, evs)
	cancel()
	logged := false
	for j, err := range errs {
		reason := reasonOf(err)
		switch {
		case reason == "":
			resp.Accepted++
			h.m.accepted(evs[j].Type)
		case reason == reasonDuplicate:
			resp.Duplicates++
			h.m.rejected(reason, 1)
		case reason == reasonStore && ctx.Err() != nil:
			// The client hung up first; it got no 202, so it retries.
			h.m.rejected(reasonClientGone, 1)
			if !logged {
				h.log.Info("feedback: client went away before its events were acknowledged", "err", err)
			}
			logged = true
		case reason == reasonStore:
			err = h.storeFailure(err, wait, !logged)
			logged = true
			resp.Error = "events could not be stored; retry: " + err.Error()
			if errors.Is(err, store.ErrUnavailable) {
				resp.Error = "store unavailable: no event of this request was recorded; retry after the Retry-After delay: " + err.Error()
			}
			resp.reject(at[j], reason, err.Error())
			h.m.rejected(reason, 1)
		default:
			resp.reject(at[j], reason, err.Error())
			h.m.rejected(reason, 1)
		}
	}
	sortRejections(resp.Rejected)
	if resp.Error != "" {
		return http.StatusServiceUnavailable
	}
	return http.StatusAccepted
}

// storeFailure logs a store failure once per request and names a wait
// that ran out as the store being unavailable.
func (h *handler) storeFailure(err error, wait time.Duration, log bool) error {
	if errors.Is(err, context.DeadlineExceeded) && !errors.Is(err, store.ErrUnavailable) {
		err = fmt.Errorf("%w: no answer within feedback.store_wait (%v): %w", store.ErrUnavailable, wait, err)
	}
	if log {
		h.log.Error("feedback: store failed; events not recorded", "err", err)
	}
	return err
}

// answer writes resp as JSON with status.
func answer(w http.ResponseWriter, status int, resp *Response) {
	if resp.Rejected == nil {
		resp.Rejected = []Rejection{}
	}
	b, _ := json.Marshal(resp) // a Response always marshals
	w.Header().Set("Content-Type", "application/json")
	if status == http.StatusServiceUnavailable {
		w.Header().Set("Retry-After", "1")
	}
	w.WriteHeader(status)
	_, _ = w.Write(append(b, '\n'))
}
