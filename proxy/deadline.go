package proxy

import (
	"errors"
	"io"
	"net/http"
	"os"
	"time"
)

// bodyDeadline puts a read deadline of d on r's body, so a client that
// sends it slowly (a byte a second) cannot hold the connection and its
// goroutine for ever, on routes, /feedback and pass-through alike. The
// deadline is lifted once the body has been read: net/http then reads the
// connection in the background to notice a client that goes away, and a
// deadline passing there would cancel a long response.
func bodyDeadline(w http.ResponseWriter, r *http.Request, d time.Duration) {
	if d <= 0 || r.Body == nil || r.Body == http.NoBody {
		return
	}
	rc := http.NewResponseController(w)
	if rc.SetReadDeadline(time.Now().Add(d)) != nil {
		return // not a connection that takes deadlines (a test recorder)
	}
	r.Body = &deadlineBody{ReadCloser: r.Body, rc: rc}
}

// deadlineBody lifts the connection's read deadline when its body has
// been read to its end.
type deadlineBody struct {
	io.ReadCloser
	rc   *http.ResponseController
	done bool
}

func (b *deadlineBody) Read(p []byte) (int, error) {
	n, err := b.ReadCloser.Read(p)
	// Only a body read to its end lifts the deadline: after a failed read
	// net/http discards what is left of the body before it answers, and
	// that must not wait on a client still trickling.
	if err == io.EOF && !b.done {
		b.done = true
		_ = b.rc.SetReadDeadline(time.Time{})
	}
	return n, err
}

// isReadTimeout reports whether err is a request body cut off by its
// read deadline.
func isReadTimeout(err error) bool {
	return errors.Is(err, os.ErrDeadlineExceeded)
}
