package proxy

import (
	"log/slog"
	"net/http"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"riffle/proxy/config"
	"riffle/store"
)

// ImpressionHeader is the response header that carries the impression id
// on every response of a configured route. It has no "X-" prefix, as
// RFC 6648 recommends.
const ImpressionHeader = "Riffle-Impression"

// Sink receives the provenance record of every served impression. Record
// must not block: it returns false when it had to drop the record (for
// example because its queue is full). *store.Store implements it.
type Sink interface {
	Record(im *store.Impression) bool
}

// Gate gives the effective ramp at a time: the share of users, in [0,1],
// who get interleaved lists, after the staged schedule and any tripped
// guardrail. *guard.Guard implements it; a Gate that also has guard's
// Tripped method lets the proxy record users left out by a tripped
// guardrail as "guardrail" rather than "ramp".
type Gate interface {
	Ramp(now time.Time) float64
}

// Observer is told the outcome of every challenger call, for guardrails.
// err is nil for a usable answer and otherwise wraps ErrTimeout,
// ErrConnect, ErrStatus or ErrBody. An empty list is a valid answer and is
// observed with a nil error. *guard.Guard implements it.
type Observer interface {
	ObserveChallenger(d time.Duration, err error)
}

// Options configures a Server. Only Config is required.
type Options struct {
	// Config is the initial configuration; New applies it (see Apply).
	Config *config.Config
	// Sink receives impression records. If nil, they are discarded.
	Sink Sink
	// Gate gives the effective ramp. If nil, Config's experiment.ramp is
	// used (1 when unset).
	Gate Gate
	// Observer is told of every challenger call. If nil, no one is.
	Observer Observer
	// Feedback, when set, is mounted at POST /feedback on the data plane.
	Feedback http.Handler
	// Registerer receives the data-plane metrics. If nil they are kept but
	// not registered.
	Registerer prometheus.Registerer
	// Logger receives failures worth an operator's attention. If nil,
	// nothing is logged.
	Logger *slog.Logger
	// Now reads the clock for impression ids, times and latencies. If nil,
	// time.Now.
	Now func() time.Time
	// Transport carries every backend request, fan-out and pass-through
	// alike. If nil, NewTransport's.
	Transport http.RoundTripper
	// MaxResponseBytes limits how much of one backend response body is
	// read on a configured route, after decoding, when the config's
	// max_backend_bytes is unset; a larger body is a body failure. If zero
	// or negative, config.DefaultMaxBackendBytes (4 MiB).
	MaxResponseBytes int64
}

const defaultMaxResponseBytes = config.DefaultMaxBackendBytes

// NewTransport returns the http.Transport riffle uses for backends. Its
// pool keeps up to 256 idle connections per backend: net/http's default of
// 2 (DefaultMaxIdleConnsPerHost) means that under concurrency every request
// beyond the second finds no idle connection, dials a new one and closes it
// after use, so a busy proxy spends its time in TCP handshakes and piles up
// sockets in TIME_WAIT. Compression is left to riffle (it asks for gzip on
// configured routes and decodes it itself) so that pass-through responses
// stay byte for byte what the incumbent sent.
func NewTransport() *http.Transport {
	t := http.DefaultTransport.(*http.Transport).Clone()
	t.MaxIdleConns = 1024
	t.MaxIdleConnsPerHost = 256
	t.IdleConnTimeout = 90 * time.Second
	t.DisableCompression = true
	return t
}
