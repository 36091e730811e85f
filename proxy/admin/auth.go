package admin

import (
	"crypto/sha256"
	"crypto/subtle"
	"errors"
	"fmt"
	"log/slog"
	"net/http"
	"os"
	"strings"
)

// realm names the protection space in WWW-Authenticate challenges.
const realm = "riffle-admin"

// requireToken returns middleware that lets a request through only with
// "Authorization: Bearer <token>". With a nil source and an empty token it
// lets all through; with a source, the source's token of the moment counts.
func requireToken(token string, source func() (string, error), log *slog.Logger) func(http.Handler) http.Handler {
	if source == nil && token == "" {
		return func(next http.Handler) http.Handler { return next }
	}
	static := sha256.Sum256([]byte(token))
	return func(next http.Handler) http.Handler {
		return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
			want := static
			if source != nil {
				tok, err := source()
				if err != nil {
					// Fail closed: a token that cannot be read is no
					// reason to open the endpoint.
					log.Error("admin: bearer token unavailable", "error", err)
					writeError(w, http.StatusServiceUnavailable, "the admin token cannot be read: "+err.Error())
					return
				}
				if tok == "" {
					next.ServeHTTP(w, r)
					return
				}
				want = sha256.Sum256([]byte(tok))
			}
			if err := authorize(r.Header.Get("Authorization"), want); err != nil {
				unauthorized(w, err)
				return
			}
			next.ServeHTTP(w, r)
		})
	}
}

// authorize checks an Authorization header value against the token's
// SHA-256. Comparing fixed-length digests in constant time tells an
// attacker neither where a guess goes wrong nor the token's length.
func authorize(header string, want [sha256.Size]byte) error {
	tok, ok := parseBearer(header)
	if !ok {
		return ErrNoToken
	}
	got := sha256.Sum256([]byte(tok))
	if subtle.ConstantTimeCompare(got[:], want[:]) != 1 {
		return ErrWrongToken
	}
	return nil
}

// unauthorized answers 401 with the challenge RFC 6750 section 3 asks for:
// no error code when no token was sent, error="invalid_token" when a wrong
// one was.
func unauthorized(w http.ResponseWriter, err error) {
	challenge := fmt.Sprintf("Bearer realm=%q", realm)
	msg := "this endpoint needs the admin bearer token: send Authorization: Bearer <token>"
	if errors.Is(err, ErrWrongToken) {
		challenge += `, error="invalid_token"`
		msg = "the admin bearer token does not match"
	}
	w.Header().Set("WWW-Authenticate", challenge)
	writeError(w, http.StatusUnauthorized, msg)
}

// parseBearer returns the token of an RFC 6750 section 2.1 header value,
// `Bearer 1*SP b64token`. The scheme is case-insensitive (RFC 9110 section
// 11.1); b64token is 1*( ALPHA / DIGIT / "-" / "." / "_" / "~" / "+" / "/" )
// *"=".
func parseBearer(h string) (string, bool) {
	scheme, rest, ok := strings.Cut(h, " ")
	if !ok || !strings.EqualFold(scheme, "Bearer") {
		return "", false
	}
	tok := strings.TrimLeft(rest, " ")
	if !isB64Token(tok) {
		return "", false
	}
	return tok, true
}

func isB64Token(s string) bool {
	body := strings.TrimRight(s, "=")
	if body == "" {
		return false
	}
	for i := 0; i < len(body); i++ {
		c := body[i]
		switch {
		case 'a' <= c && c <= 'z', 'A' <= c && c <= 'Z', '0' <= c && c <= '9':
		case strings.IndexByte("-._~+/", c) >= 0:
		default:
			return false
		}
	}
	return true
}

// ReadToken reads a bearer token from a file such as the one that
// admin_token_file names, trimming surrounding white space (a trailing
// newline, as editors and Kubernetes Secrets leave). The token must be an
// RFC 6750 b64token.
func ReadToken(path string) (string, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return "", fmt.Errorf("admin: read token file: %w", err)
	}
	tok := strings.TrimSpace(string(b))
	if tok == "" {
		return "", fmt.Errorf("admin: token file %s: %w", path, ErrEmptyToken)
	}
	if !isB64Token(tok) {
		return "", fmt.Errorf("admin: token file %s: the token may hold only letters, digits and -._~+/ (then = padding), as RFC 6750 section 2.1 says", path)
	}
	return tok, nil
}
