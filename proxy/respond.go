package proxy

import (
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"sync"
)

// readRequest reads the client's body once, up to limit bytes, into x.req.
func readRequest(r *http.Request, x *exchange, limit int64) ([]byte, reason) {
	if r.ContentLength > limit {
		return nil, reasonRequestTooLarge
	}
	x.lim = io.LimitedReader{R: r.Body, N: limit + 1}
	n, err := x.req.ReadFrom(&x.lim)
	x.lim.R = nil
	switch {
	case isReadTimeout(err):
		return nil, reasonRequestTimeout
	case err != nil:
		return nil, reasonRequestBody
	case n > limit:
		return nil, reasonRequestTooLarge
	}
	return x.req.Bytes(), reasonNone
}

// writeBody answers with body under status, carrying src's end-to-end
// fields (Content-Type among them) and a Content-Length of its own.
func writeBody(w http.ResponseWriter, status int, src http.Header, body []byte) {
	h := w.Header()
	responseHeader(h, src)
	h["Content-Length"] = []string{strconv.Itoa(len(body))}
	w.WriteHeader(status)
	_, _ = w.Write(body) // a client that has gone away is no error of ours
}

// errorBody is the JSON riffle answers with when it fails a request.
type errorBody struct {
	Error   string `json:"error"`
	Backend string `json:"backend,omitempty"`
	Reason  string `json:"reason"`
}

func writeError(w http.ResponseWriter, status int, backend, why, msg string) {
	b, _ := json.Marshal(errorBody{Error: msg, Backend: backend, Reason: why})
	b = append(b, '\n')
	h := w.Header()
	h["Content-Type"] = []string{"application/json"}
	h["Content-Length"] = []string{strconv.Itoa(len(b))}
	h["X-Content-Type-Options"] = []string{"nosniff"}
	w.WriteHeader(status)
	_, _ = w.Write(b)
}

func writeRequestError(w http.ResponseWriter, why reason, limit int64) {
	if why == reasonRequestTooLarge {
		writeError(w, http.StatusRequestEntityTooLarge, "", why.String(),
			fmt.Sprintf("request body too large: the limit is %d bytes (max_body_bytes)", limit))
		return
	}
	if why == reasonRequestTimeout {
		writeError(w, http.StatusRequestTimeout, "", why.String(), "the request body did not arrive within read_body_timeout")
		return
	}
	writeError(w, http.StatusBadRequest, "", why.String(), "the request body could not be read")
}

// maxPooledBuffer is the largest buffer an exchange keeps when it goes
// back to the pool; one grown by a rare huge body is left to the garbage
// collector instead of pinning memory (common practice).
const maxPooledBuffer = 1 << 20

func (s *Server) getExchange() *exchange {
	return s.exchanges.Get().(*exchange)
}

func (s *Server) putExchange(x *exchange) {
	s.bodies.release(x.inc.held + x.chal.held)
	x.inc.held, x.chal.held = 0, 0
	if x.req.Cap() > maxPooledBuffer || x.inc.body.Cap() > maxPooledBuffer ||
		x.chal.body.Cap() > maxPooledBuffer || cap(x.out) > maxPooledBuffer {
		return
	}
	x.req.Reset()
	x.inc.reset()
	x.chal.reset()
	x.inc.list.doc, x.chal.list.doc = nil, nil
	x.seedDone = false
	x.kept = nil
	s.exchanges.Put(x)
}

// bufferPool lends httputil.ReverseProxy its copy buffers.
type bufferPool struct{ p sync.Pool }

func (b *bufferPool) Get() []byte {
	if v, ok := b.p.Get().(*[]byte); ok {
		return *v
	}
	return make([]byte, 32<<10)
}

func (b *bufferPool) Put(buf []byte) { b.p.Put(&buf) }
