package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"strings"
	"sync"
	"time"

	"riffle/proxy"
)

// maxBody bounds a request or backend body the fan-out proxy reads, as
// riffle's max_body_bytes default does (1 MiB).
const maxBody = 1 << 20

// newTransport returns the http.Transport of riffle's data plane
// (proxy.NewTransport: up to 256 idle connections per backend instead of
// net/http's 2, 1024 in total, 90s idle timeout, no transparent gzip), so
// that the fan-out proxy differs from riffle only in what riffle does on
// top, and so that the load generator never throttles itself by dialling.
func newTransport() *http.Transport { return proxy.NewTransport() }

// fanout is the bare fan-out proxy: the floor for any sidecar that must
// call both models. Each request goes to both backends concurrently, each
// under its own deadline; once both have answered (or failed) it returns
// the incumbent's status, headers and body verbatim. It is safe for
// concurrent use.
type fanout struct {
	incumbent, challenger string // base URLs
	client                *http.Client
	timeout               time.Duration
	bufs                  sync.Pool // *bytes.Buffer
}

// leg is one backend's answer.
type leg struct {
	status int
	header http.Header
	body   *bytes.Buffer
	err    error
}

// serveFanout runs the fan-out proxy on a loopback port until ctx ends.
func serveFanout(ctx context.Context, incumbent, challenger string, timeout time.Duration, ready func(...string)) error {
	if err := checkBackends(incumbent, challenger); err != nil {
		return err
	}
	ln, u, err := listenLoopback()
	if err != nil {
		return err
	}
	ready(u)
	f := &fanout{incumbent: incumbent, challenger: challenger, timeout: timeout,
		client: &http.Client{Transport: newTransport()}}
	return serve(ctx, ln, f)
}

// checkBackends accepts only the bench's own loopback backends.
func checkBackends(urls ...string) error {
	for _, u := range urls {
		if err := checkLoopbackURL(u); err != nil {
			return fmt.Errorf("bench: backend: %w: %w", errUsage, err)
		}
	}
	return nil
}

// ServeHTTP implements http.Handler.
func (f *fanout) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	body, err := io.ReadAll(io.LimitReader(r.Body, maxBody))
	if err != nil {
		http.Error(w, `{"error":"read request body"}`, http.StatusBadRequest)
		return
	}
	header := endToEnd(r.Header)
	legs := make(chan leg, 1)
	go func() { legs <- f.call(r, f.challenger, header, body) }()
	inc := f.call(r, f.incumbent, header, body)
	chal := <-legs
	f.release(chal)
	defer f.release(inc)
	if inc.err != nil {
		http.Error(w, `{"error":"incumbent failed"}`, http.StatusBadGateway)
		return
	}
	h := w.Header()
	for k, vs := range endToEnd(inc.header) {
		h[k] = vs
	}
	h.Set("Content-Length", strconv.Itoa(inc.body.Len()))
	w.WriteHeader(inc.status)
	_, _ = w.Write(inc.body.Bytes())
}

// call sends r's method, path, query, end-to-end headers and body to one
// backend and reads the whole answer into a pooled buffer.
func (f *fanout) call(r *http.Request, base string, header http.Header, body []byte) leg {
	ctx, cancel := context.WithTimeout(r.Context(), f.timeout)
	defer cancel()
	var rd io.Reader
	if len(body) > 0 {
		rd = bytes.NewReader(body)
	}
	req, err := http.NewRequestWithContext(ctx, r.Method, base+r.URL.RequestURI(), rd)
	if err != nil {
		return leg{err: err}
	}
	req.Header = header // read-only in RoundTrip, so both legs may share it
	resp, err := f.client.Do(req)
	if err != nil {
		return leg{err: err}
	}
	defer resp.Body.Close()
	buf, _ := f.bufs.Get().(*bytes.Buffer)
	if buf == nil {
		buf = new(bytes.Buffer)
	}
	buf.Reset()
	if _, err := buf.ReadFrom(io.LimitReader(resp.Body, maxBody)); err != nil {
		f.bufs.Put(buf)
		return leg{err: err}
	}
	return leg{status: resp.StatusCode, header: resp.Header, body: buf}
}

// release returns a leg's buffer to the pool.
func (f *fanout) release(l leg) {
	if l.body != nil {
		f.bufs.Put(l.body)
	}
}

// endToEnd returns a copy of h without its hop-by-hop fields: those RFC
// 9110 section 7.6.1 names (Connection, Proxy-Connection, Keep-Alive, TE,
// Transfer-Encoding, Upgrade), the fields that Connection lists, and
// Content-Length, which the proxy sets itself.
func endToEnd(h http.Header) http.Header {
	out := h.Clone()
	for _, v := range h["Connection"] {
		for _, name := range strings.Split(v, ",") {
			out.Del(strings.TrimSpace(name))
		}
	}
	for _, name := range []string{"Connection", "Proxy-Connection", "Keep-Alive", "Te", "Transfer-Encoding", "Upgrade", "Content-Length"} {
		out.Del(name)
	}
	return out
}
