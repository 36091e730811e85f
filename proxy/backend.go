package proxy

import (
	"bytes"
	"compress/gzip"
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/url"
	"strings"
	"time"
)

// backend is one model server as a runtime sees it.
type backend struct {
	name    string // "incumbent" or "challenger": the metrics' backend label
	base    *url.URL
	timeout time.Duration
	maxBody int64 // max_backend_bytes: most bytes of one answer after decoding
	strict  bool  // answers are refused past the in-flight budget (challenger)
	m       backendMetrics
}

// failKind classifies a failed backend call, as the errors metric's kind.
type failKind uint8

const (
	kindNone failKind = iota
	kindTimeout
	kindConnect
	kindStatus
	kindBody
	// kindCanceled: the client went away, or riffle stopped waiting on
	// purpose; no fault of the backend's, so it is neither counted as a
	// backend error nor reported to the Observer.
	kindCanceled
	numKinds
)

func (k failKind) String() string {
	return [numKinds]string{"", "timeout", "connect", "status", "body", "canceled"}[k]
}

// call is one backend exchange and what the adapter made of its answer.
// It lives in a pooled exchange, so its buffers are reused.
type call struct {
	status int
	header http.Header
	body   bytes.Buffer
	kind   failKind
	err    error // wraps ErrTimeout, ErrConnect, ErrStatus or ErrBody
	dur    time.Duration
	list   listDoc
	lim    io.LimitedReader
	br     bodyReader
	// held is what the body reserved of the server's in-flight budget;
	// it is returned when the exchange ends.
	held int64
	// listErr says why the answer has no usable list (wraps ErrBody); set
	// only for a 2xx answer whose body was read.
	listErr error
}

func (c *call) reset() {
	c.status, c.header, c.kind, c.err, c.dur, c.listErr = 0, nil, kindNone, nil, 0, nil
	c.body.Reset()
}

// ok reports whether the call gave a 2xx answer whose list could be read.
func (c *call) ok() bool { return c.kind == kindNone && c.listErr == nil }

// fetch sends in (with header h and body) to b under ctx, reads the answer
// into c and, for a 2xx answer, parses its list with a.
func (s *Server) fetch(ctx context.Context, b *backend, a *adapter, in *http.Request, h http.Header, body []byte, c *call) {
	c.reset()
	start := s.now()
	s.roundTrip(ctx, b, in, h, body, c)
	c.dur = s.now().Sub(start)
	b.m.duration.Observe(c.dur.Seconds())
	if c.kind != kindNone {
		if c.kind != kindCanceled {
			b.m.errors[c.kind].Inc()
		}
		return
	}
	if err := a.parse(&c.list, c.body.Bytes()); err != nil {
		c.listErr = err
		b.m.errors[kindBody].Inc()
		return
	}
	if c.list.dropped > 0 {
		b.m.dropped.Add(float64(c.list.dropped))
	}
}

// roundTrip performs the HTTP exchange and reads the whole body.
func (s *Server) roundTrip(ctx context.Context, b *backend, in *http.Request, h http.Header, body []byte, c *call) {
	u := *b.base
	u.Path, u.RawPath = joinPath(b.base, in.URL)
	u.RawQuery = joinQuery(b.base.RawQuery, in.URL.RawQuery)
	out := (&http.Request{
		Method: in.Method, URL: &u, Host: u.Host, Header: h,
		Proto: "HTTP/1.1", ProtoMajor: 1, ProtoMinor: 1,
	}).WithContext(ctx)
	if len(body) > 0 {
		out.Body = io.NopCloser(bytes.NewReader(body))
		out.ContentLength = int64(len(body))
		out.GetBody = func() (io.ReadCloser, error) { return io.NopCloser(bytes.NewReader(body)), nil }
	}
	resp, err := s.transport.RoundTrip(out)
	if err != nil {
		c.fail(ctx, b, kindConnect, err)
		return
	}
	defer resp.Body.Close()
	s.reached(b)
	c.status, c.header = resp.StatusCode, resp.Header
	if err := s.readBody(ctx, b, resp, c); err != nil {
		c.fail(ctx, b, kindBody, err)
		return
	}
	if resp.StatusCode < 200 || resp.StatusCode > 299 {
		c.kind = kindStatus
		c.err = fmt.Errorf("%w: %s answered %d", ErrStatus, b.name, resp.StatusCode)
	}
}

// fail classifies err: anything that ran into the call's deadline is a
// timeout, whatever layer reported it.
func (c *call) fail(ctx context.Context, b *backend, kind failKind, err error) {
	var ne net.Error
	if errors.Is(err, context.DeadlineExceeded) || errors.Is(ctx.Err(), context.DeadlineExceeded) ||
		(errors.As(err, &ne) && ne.Timeout()) {
		c.kind = kindTimeout
		c.err = fmt.Errorf("%w: %s gave no answer within %v", ErrTimeout, b.name, b.timeout)
		return
	}
	if errors.Is(ctx.Err(), context.Canceled) {
		c.kind = kindCanceled
		c.err = fmt.Errorf("%s: request canceled: %w", b.name, err)
		return
	}
	c.kind = kind
	sentinel := ErrConnect
	if kind == kindBody {
		sentinel = ErrBody
	}
	c.err = fmt.Errorf("%w: %s: %w", sentinel, b.name, err)
}

// readBody reads resp's body into c.body, decoding gzip, up to b's limit,
// under ctx's deadline and the in-flight budget (see bodyReader).
func (s *Server) readBody(ctx context.Context, b *backend, resp *http.Response, c *call) error {
	var r io.Reader = resp.Body
	var zin *countingReader
	switch enc := strings.ToLower(strings.TrimSpace(resp.Header.Get("Content-Encoding"))); enc {
	case "", "identity":
	case "gzip", "x-gzip":
		zin = &countingReader{r: resp.Body}
		zr, err := s.gzipReader(zin)
		if err != nil {
			return fmt.Errorf("gzip body: %w", err)
		}
		defer s.gzip.Put(zr)
		r = zr
	default:
		return fmt.Errorf("content coding %q not supported (riffle asks for gzip)", enc)
	}
	limit := b.maxBody
	if limit <= 0 {
		limit = s.maxResponse
	}
	c.br = bodyReader{ctx: ctx, r: r, b: &s.bodies, strict: b.strict, held: &c.held, zin: zin}
	c.lim = io.LimitedReader{R: &c.br, N: limit + 1}
	n, err := c.body.ReadFrom(&c.lim)
	c.lim.R, c.br = nil, bodyReader{}
	if err != nil {
		return fmt.Errorf("read body: %w", err)
	}
	if n > limit {
		return fmt.Errorf("body larger than max_backend_bytes (%d bytes) after decoding", limit)
	}
	return nil
}

func (s *Server) gzipReader(r io.Reader) (*gzip.Reader, error) {
	if zr, ok := s.gzip.Get().(*gzip.Reader); ok {
		if err := zr.Reset(r); err != nil {
			s.gzip.Put(zr)
			return nil, err
		}
		return zr, nil
	}
	return gzip.NewReader(r)
}

// joinPath appends the request's path to the backend's base path, with
// exactly one slash between them, keeping an escaped form when either has
// one (as net/http/httputil's SetURL does).
func joinPath(base, in *url.URL) (path, rawPath string) {
	if base.Path == "" || base.Path == "/" {
		return in.Path, in.RawPath
	}
	path = slashJoin(base.Path, in.Path)
	if base.RawPath == "" && in.RawPath == "" {
		return path, ""
	}
	return path, slashJoin(base.EscapedPath(), in.EscapedPath())
}

func slashJoin(a, b string) string {
	switch as, bs := strings.HasSuffix(a, "/"), strings.HasPrefix(b, "/"); {
	case as && bs:
		return a + b[1:]
	case !as && !bs && b != "":
		return a + "/" + b
	}
	return a + b
}

func joinQuery(base, in string) string {
	if base == "" || in == "" {
		return base + in
	}
	return base + "&" + in
}
