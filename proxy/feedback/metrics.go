package feedback

import (
	"errors"
	"log/slog"
	"slices"

	"github.com/prometheus/client_golang/prometheus"

	"riffle/store"
)

// Rejection reasons, the values of the reason label.
const (
	reasonMalformed         = "malformed"          // not one JSON object
	reasonInvalid           = "invalid"            // a field missing or wrong
	reasonUnknownImpression = "unknown-impression" // store.ErrUnknownImpression
	reasonItemNotShown      = "item-not-shown"     // store.ErrItemNotShown
	reasonUnknownEvent      = "unknown-event"      // store.ErrUnknownEvent
	reasonTooEarly          = "too-early"          // store.ErrTooEarly
	reasonTooLate           = "too-late"           // store.ErrTooLate
	reasonDuplicate         = "duplicate"          // store.ErrDuplicate (acknowledged)
	reasonTooLarge          = "too-large"          // a body over the limit (counted once)
	reasonStore             = "store"              // the store failed: not durable
	reasonClientGone        = "client-gone"        // the client hung up before the answer
)

// reasonOf classifies one AddEvents result; "" means recorded.
func reasonOf(err error) string {
	if err == nil {
		return ""
	}
	for _, r := range []struct {
		err    error
		reason string
	}{
		{store.ErrBadEvent, reasonInvalid},
		{store.ErrUnknownImpression, reasonUnknownImpression},
		{store.ErrItemNotShown, reasonItemNotShown},
		{store.ErrUnknownEvent, reasonUnknownEvent},
		{store.ErrTooEarly, reasonTooEarly},
		{store.ErrTooLate, reasonTooLate},
		{store.ErrDuplicate, reasonDuplicate},
	} {
		if errors.Is(err, r.err) {
			return r.reason
		}
	}
	return reasonStore
}

type metrics struct {
	acceptedVec, rejectedVec *prometheus.CounterVec
}

func newMetrics(reg prometheus.Registerer, log *slog.Logger) *metrics {
	m := &metrics{
		acceptedVec: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "riffle_feedback_events_accepted_total",
			Help: "Feedback events recorded, by event type.",
		}, []string{"event"}),
		rejectedVec: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "riffle_feedback_events_rejected_total",
			Help: "Feedback events not recorded, by reason; duplicates are acknowledged to the client but counted here.",
		}, []string{"reason"}),
	}
	for _, r := range []string{reasonMalformed, reasonInvalid, reasonUnknownImpression, reasonItemNotShown,
		reasonUnknownEvent, reasonTooEarly, reasonTooLate, reasonDuplicate, reasonTooLarge, reasonStore, reasonClientGone} {
		m.rejectedVec.WithLabelValues(r)
	}
	if reg != nil {
		m.acceptedVec = register(reg, m.acceptedVec, log)
		m.rejectedVec = register(reg, m.rejectedVec, log)
	}
	return m
}

// register registers c, or returns the collector already registered under
// its name so that a rebuilt handler keeps counting on the same series.
// Any other registration failure is logged and leaves c unregistered.
func register(reg prometheus.Registerer, c *prometheus.CounterVec, log *slog.Logger) *prometheus.CounterVec {
	err := reg.Register(c)
	if err == nil {
		return c
	}
	var are prometheus.AlreadyRegisteredError
	if errors.As(err, &are) {
		if old, ok := are.ExistingCollector.(*prometheus.CounterVec); ok {
			return old
		}
	}
	log.Error("feedback: metrics not registered", "err", err)
	return c
}

func (m *metrics) accepted(event string) { m.acceptedVec.WithLabelValues(event).Inc() }
func (m *metrics) rejected(reason string, n int) {
	m.rejectedVec.WithLabelValues(reason).Add(float64(n))
}

// sortRejections orders rejections by line.
func sortRejections(rs []Rejection) {
	slices.SortStableFunc(rs, func(a, b Rejection) int { return a.Line - b.Line })
}
