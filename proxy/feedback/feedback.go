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
	"io"
	"log/slog"
	"net/http"
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

// DefaultMaxBodyBytes is the body limit when Options.MaxBodyBytes is 0.
const DefaultMaxBodyBytes = 1 << 20

// Options configures the handler.
type Options struct {
	// MaxBodyBytes limits the request body; a larger body gets 413.
	// Zero means DefaultMaxBodyBytes (1 MiB).
	MaxBodyBytes int64
	// Now stamps events sent without a time. Default time.Now.
	Now func() time.Time
	// Registerer receives riffle_feedback_events_accepted_total and
	// riffle_feedback_events_rejected_total. Nil registers none; a second
	// handler on the same registry shares the first one's counters.
	Registerer prometheus.Registerer
	// Logger receives store failures. Default slog.Default().
	Logger *slog.Logger
}

// Response is the JSON answer.
type Response struct {
	// Accepted counts events recorded by this request.
	Accepted int `json:"accepted"`
	// Duplicates counts events already recorded before: acknowledged, not
	// recorded again.
	Duplicates int `json:"duplicates"`
	// Rejected lists the lines that were not recorded and why.
	Rejected []Rejection `json:"rejected"`
	// Error says why the request as a whole failed (400, 413, 503).
	Error string `json:"error,omitempty"`
}

// Rejection is one refused line.
type Rejection struct {
	// Line is the 1-based line number in the request body.
	Line int `json:"line"`
	// Error says what is wrong with it.
	Error string `json:"error"`
}

type handler struct {
	st  EventStore
	max int64
	now func() time.Time
	log *slog.Logger
	m   *metrics
}

// New returns the POST /feedback handler over st. It panics if st is nil,
// which is a programming error.
func New(st EventStore, o Options) http.Handler {
	if st == nil {
		panic("feedback.New: nil EventStore")
	}
	h := &handler{st: st, max: o.MaxBodyBytes, now: o.Now, log: o.Logger}
	if h.max <= 0 {
		h.max = DefaultMaxBodyBytes
	}
	if h.now == nil {
		h.now = time.Now
	}
	if h.log == nil {
		h.log = slog.Default()
	}
	h.m = newMetrics(o.Registerer, h.log)
	return h
}

// ServeHTTP reads, parses, records, and answers.
func (h *handler) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	if r.Method != http.MethodPost {
		w.Header().Set("Allow", http.MethodPost)
		answer(w, http.StatusMethodNotAllowed, &Response{Error: "use POST"})
		return
	}
	body, err := io.ReadAll(http.MaxBytesReader(w, r.Body, h.max))
	if err != nil {
		var tooBig *http.MaxBytesError
		if errors.As(err, &tooBig) {
			h.m.rejected(reasonTooLarge, 1)
			answer(w, http.StatusRequestEntityTooLarge, &Response{Error: fmt.Sprintf("body over the %d-byte limit", h.max)})
			return
		}
		answer(w, http.StatusBadRequest, &Response{Error: fmt.Sprintf("read body: %v", err)})
		return
	}
	lines := parseBody(body, h.now())
	resp, status := h.record(r.Context(), lines)
	answer(w, status, resp)
}

// record sends the parsed lines to the store and builds the answer.
func (h *handler) record(ctx context.Context, lines []line) (*Response, int) {
	resp := &Response{Rejected: []Rejection{}}
	evs := make([]store.Event, 0, len(lines))
	at := make([]int, 0, len(lines)) // index into lines of each event
	for i, l := range lines {
		if l.err != nil {
			var pe *parseError
			errors.As(l.err, &pe)
			h.m.rejected(pe.reason, 1)
			resp.Rejected = append(resp.Rejected, Rejection{Line: l.n, Error: l.err.Error()})
			continue
		}
		evs = append(evs, l.ev)
		at = append(at, i)
	}
	if len(evs) == 0 {
		resp.Error = "no event could be read"
		if len(lines) == 0 {
			resp.Error = "empty body: send one JSON event or NDJSON lines"
		}
		return resp, http.StatusBadRequest
	}
	errs := h.st.AddEvents(ctx, evs)
	logged := false
	for j, err := range errs {
		reason := reasonOf(err)
		switch reason {
		case "":
			resp.Accepted++
			h.m.accepted(evs[j].Type)
		case reasonDuplicate:
			resp.Duplicates++
			h.m.rejected(reason, 1)
		case reasonStore:
			h.m.rejected(reason, 1)
			switch {
			case logged:
			case ctx.Err() != nil:
				// The client hung up first; it got no 202, so it retries.
				h.log.Info("feedback: client went away before its events were acknowledged", "err", err)
			default:
				h.log.Error("feedback: store failed; events not recorded", "err", err)
			}
			logged = true
			resp.Error = "events could not be stored; retry: " + err.Error()
			if errors.Is(err, store.ErrUnavailable) {
				resp.Error = "store unavailable: no event of this request was recorded; retry after the Retry-After delay: " + err.Error()
			}
			resp.Rejected = append(resp.Rejected, Rejection{Line: lines[at[j]].n, Error: err.Error()})
		default:
			h.m.rejected(reason, 1)
			resp.Rejected = append(resp.Rejected, Rejection{Line: lines[at[j]].n, Error: err.Error()})
		}
	}
	sortRejections(resp.Rejected)
	if resp.Error != "" {
		return resp, http.StatusServiceUnavailable
	}
	return resp, http.StatusAccepted
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
