package config

import (
	"fmt"
	"net"
	"net/http"
	"net/netip"
	"net/url"
	"os"
	"strconv"
	"strings"
	"time"

	"github.com/go-chi/chi/v5"
)

// Validate checks every field of a config whose defaults are already filled
// (see ApplyDefaults) and returns an *Error listing every problem, or nil.
// It reads admin_token_file, when set, to check that it holds a token.
func (c *Config) Validate() error {
	if ps := c.problems(); len(ps) > 0 {
		return &Error{Problems: ps}
	}
	return nil
}

// AdminToken reads the bearer token from admin_token_file, trimming
// surrounding white space; it returns "" and no error when no file is
// configured. It reads the file on every call so that a rotated token takes
// effect without a reload.
func (c *Config) AdminToken() (string, error) {
	if c.AdminTokenFile == "" {
		return "", nil
	}
	data, err := os.ReadFile(c.AdminTokenFile)
	if err != nil {
		return "", fmt.Errorf("config: admin token: %w", err)
	}
	tok := strings.TrimSpace(string(data))
	if tok == "" {
		return "", fmt.Errorf("config: admin token: %s is empty", c.AdminTokenFile)
	}
	return tok, nil
}

// StorePassword reads the database password from store_password_file,
// trimming surrounding white space; "" and no error when none is set.
func (c *Config) StorePassword() (string, error) {
	if c.StorePasswordFile == "" {
		return "", nil
	}
	data, err := os.ReadFile(c.StorePasswordFile)
	if err != nil {
		return "", fmt.Errorf("config: store password: %w", err)
	}
	pw := strings.TrimSpace(string(data))
	if pw == "" {
		return "", fmt.Errorf("config: store password: %s is empty", c.StorePasswordFile)
	}
	return pw, nil
}

// IsStoreURL reports whether a store setting names a database.
func IsStoreURL(s string) bool {
	l := strings.ToLower(s)
	return strings.HasPrefix(l, "postgres://") || strings.HasPrefix(l, "postgresql://")
}

// RedactedStore returns a store setting fit to show: a URL's password
// masked, a path unchanged.
func RedactedStore(s string) string {
	if !IsStoreURL(s) {
		return s
	}
	u, err := url.Parse(s)
	if err != nil {
		return "postgres://(a URL that does not parse)"
	}
	if q := u.Query(); q.Has("password") {
		q.Set("password", "xxxxx") // libpq takes the password as a parameter too
		u.RawQuery = q.Encode()
	}
	return u.Redacted()
}

// checker collects problems.
type checker struct{ ps []Problem }

func (k *checker) add(path, format string, args ...any) {
	k.ps = append(k.ps, Problem{Path: path, Message: fmt.Sprintf(format, args...)})
}

func (c *Config) problems() []Problem {
	k := &checker{}
	k.addr("listen", c.Listen)
	k.addr("admin", c.Admin)
	if sameListener(c.Listen, c.Admin) {
		k.add("admin", "%q is the same address as listen; the admin listener needs its own", c.Admin)
	}
	k.process(c)
	k.backend("incumbent", c.Incumbent, c.Listen)
	k.backend("challenger", c.Challenger, c.Listen)
	k.routes(c.Routes)
	k.user(c.User)
	k.experiment(&c.Experiment, c)
	return k.ps
}

// process checks the settings of the process as a whole.
func (k *checker) process(c *Config) {
	if c.AdminTokenFile != "" {
		if _, err := c.AdminToken(); err != nil {
			k.add("admin_token_file", "cannot be used: %v", strings.TrimPrefix(err.Error(), "config: admin token: "))
		}
	}
	k.store(c)
	k.nonNegative("store_retention", c.StoreRetention)
	k.positive("queue.size", int64(c.Queue.Size))
	k.positive("queue.batch", int64(c.Queue.Batch))
	if c.Queue.Batch > c.Queue.Size && c.Queue.Size > 0 {
		k.add("queue.batch", "%d is larger than queue.size (%d)", c.Queue.Batch, c.Queue.Size)
	}
	k.positiveDuration("queue.interval", c.Queue.Interval)
	k.positive("max_body_bytes", c.MaxBodyBytes)
	k.oneOf("on_incumbent_failure", c.OnIncumbentFailure, "fail", "serve-challenger")
	k.positiveDuration("shutdown_grace", c.ShutdownGrace)
	k.positive("max_backend_bytes", c.MaxBackendBytes)
	k.positive("backend_bytes_in_flight", c.BackendBytesInFlight)
	if c.BackendBytesInFlight < c.MaxBackendBytes && c.MaxBackendBytes > 0 {
		k.add("backend_bytes_in_flight", "%d is less than max_backend_bytes (%d): no challenger answer of the largest size could be read",
			c.BackendBytesInFlight, c.MaxBackendBytes)
	}
	k.positiveDuration("read_header_timeout", c.ReadHeaderTimeout)
	k.positiveDuration("read_body_timeout", c.ReadBodyTimeout)
	k.nonNegative("feedback.clock_skew", c.Feedback.ClockSkew)
	k.positiveDuration("feedback.store_wait", c.Feedback.StoreWait)
}

// store checks store and store_password_file.
func (k *checker) store(c *Config) {
	switch {
	case strings.TrimSpace(c.Store) == "":
		k.add("store", "must name a file or a postgres:// URL")
	case IsStoreURL(c.Store):
		u, err := url.Parse(c.Store)
		if err != nil || u.Host == "" || strings.Trim(u.Path, "/") == "" {
			k.add("store", "%s: want postgres://user@host:port/database[?sslmode=...]", RedactedStore(c.Store))
		}
	default:
		if fi, err := os.Stat(c.Store); err == nil && fi.IsDir() {
			k.add("store", "%q is a directory; name a file inside it", c.Store)
		}
		if c.StorePasswordFile != "" {
			k.add("store_password_file", "is for a postgres:// store; store is the file %q", c.Store)
			return
		}
	}
	if c.StorePasswordFile != "" {
		if _, err := c.StorePassword(); err != nil {
			k.add("store_password_file", "cannot be used: %v", strings.TrimPrefix(err.Error(), "config: store password: "))
		}
	}
}

// addr checks a listen address: host:port with a numeric port; the host may
// be empty (every interface), an IP address or a host name.
func (k *checker) addr(path, s string) {
	host, port, err := net.SplitHostPort(s)
	if err != nil {
		k.add(path, "%q is not host:port, e.g. \"127.0.0.1:8080\"", s)
		return
	}
	if _, err := strconv.ParseUint(port, 10, 16); err != nil {
		k.add(path, "%q has port %q; want a number from 0 to 65535", s, port)
	}
	if host != "" && !validHost(host) {
		k.add(path, "%q has host %q, which is neither an IP address nor a host name", s, host)
	}
}

// validHost accepts an IP address (with an optional IPv6 zone) or a host
// name made of letters, digits, '-' and '.' (RFC 1123 section 2.1).
func validHost(h string) bool {
	if _, err := netip.ParseAddr(h); err == nil {
		return true
	}
	if len(h) > 253 {
		return false
	}
	for _, label := range strings.Split(strings.TrimSuffix(h, "."), ".") {
		if label == "" || len(label) > 63 || label[0] == '-' || label[len(label)-1] == '-' {
			return false
		}
		for _, r := range label {
			if !(r == '-' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9') {
				return false
			}
		}
	}
	return true
}

// sameListener reports whether two listen addresses would collide: the
// same port, not 0 (any free port), on the same or a wildcard host.
func sameListener(a, b string) bool {
	ha, pa, errA := net.SplitHostPort(a)
	hb, pb, errB := net.SplitHostPort(b)
	if errA != nil || errB != nil || pa != pb || pa == "0" {
		return false
	}
	return ha == hb || wildcard(ha) || wildcard(hb)
}

func wildcard(h string) bool { return h == "" || h == "0.0.0.0" || h == "::" }

func (k *checker) backend(path string, b Backend, listen string) {
	defer k.positiveDuration(path+".timeout", b.Timeout)
	if b.URL == "" {
		k.add(path+".url", "is required (the %s model server's base URL)", path)
		return
	}
	u, err := url.Parse(b.URL)
	switch {
	case err != nil:
		k.add(path+".url", "%q is not a URL: %v", b.URL, unwrapURL(err))
	case u.Scheme != "http" && u.Scheme != "https":
		k.add(path+".url", "%q is not an absolute http or https URL", b.URL)
	case u.Host == "" || u.Hostname() == "":
		k.add(path+".url", "%q has no host", b.URL)
	case u.RawQuery != "" || u.ForceQuery || u.Fragment != "":
		k.add(path+".url", "%q has a query or fragment; the request's own path and query are appended to the base URL", b.URL)
	case u.Port() != "" && !validPort(u.Port()):
		k.add(path+".url", "%q has port %q; want a number from 1 to 65535", b.URL, u.Port())
	case pointsAt(u, listen):
		k.add(path+".url", "%q points at riffle's own listen address %q, which would loop", b.URL, listen)
	}
}

func unwrapURL(err error) error {
	if ue, ok := err.(*url.Error); ok {
		return ue.Err
	}
	return err
}

func validPort(p string) bool {
	n, err := strconv.ParseUint(p, 10, 16)
	return err == nil && n > 0
}

// pointsAt reports whether u would reach the listen address itself: the
// same port on the same host, or on a loopback host when listen is on every
// interface.
func pointsAt(u *url.URL, listen string) bool {
	port := u.Port()
	if port == "" {
		port = map[string]string{"http": "80", "https": "443"}[u.Scheme]
	}
	lh, lp, err := net.SplitHostPort(listen)
	if err != nil || lp != port {
		return false
	}
	h := u.Hostname()
	if strings.EqualFold(lh, h) {
		return true
	}
	if lip, err := netip.ParseAddr(lh); err == nil && lip.IsLoopback() {
		// localhost names resolve to the loopback address (RFC 6761
		// section 6.3): http://localhost:8080 reaches 127.0.0.1:8080 and [::1]:8080.
		return loopbackName(h)
	}
	ip, err := netip.ParseAddr(h)
	return wildcard(lh) && (loopbackName(h) || err == nil && ip.IsLoopback())
}

// loopbackName reports whether h is "localhost" or a name under it, which
// RFC 6761 section 6.3 reserves for the loopback address.
func loopbackName(h string) bool {
	h = strings.TrimSuffix(strings.ToLower(h), ".")
	return h == "localhost" || strings.HasSuffix(h, ".localhost")
}

func (k *checker) routes(routes []Route) {
	if len(routes) == 0 {
		k.add("routes", "needs at least one route; without one every request passes through and nothing is compared")
		return
	}
	mux := chi.NewRouter()
	seen := map[string]int{}
	for i, r := range routes {
		p := fmt.Sprintf("routes[%d]", i)
		k.routePath(mux, p+".path", r.Path)
		if j, dup := seen[r.Path]; dup && r.Path != "" {
			k.add(p+".path", "%q is already the path of routes[%d]", r.Path, j)
		} else {
			seen[r.Path] = i
		}
		k.pointer(p+".list", r.List)
		k.pointer(p+".id", r.ID)
		if r.Slots < 0 {
			k.add(p+".slots", "%d is negative; use 0 for the incumbent list's length", r.Slots)
		}
	}
}

// routePath checks a chi pattern by registering it on a real chi router,
// which panics on patterns it cannot route.
func (k *checker) routePath(mux chi.Router, path, pattern string) {
	switch {
	case pattern == "":
		k.add(path, "is required, e.g. \"/v1/recommend\"")
		return
	case pattern[0] != '/':
		k.add(path, "%q must start with \"/\"", pattern)
		return
	case strings.ContainsAny(pattern, "?# \t\r\n"):
		k.add(path, "%q may not contain a query, fragment or white space", pattern)
		return
	case pattern == "/feedback":
		k.add(path, "%q is where riffle takes feedback events", pattern)
		return
	}
	defer func() {
		if r := recover(); r != nil {
			k.add(path, "%q is not a chi route pattern: %v", pattern, r)
		}
	}()
	mux.Handle(pattern, http.NotFoundHandler())
}

func (k *checker) pointer(path, s string) {
	if msg := pointerProblem(s); msg != "" {
		k.add(path, "%s", msg)
	}
}

func (k *checker) user(u User) {
	set := 0
	for _, s := range []string{u.Header, u.Query, u.Body} {
		if s != "" {
			set++
		}
	}
	if set != 1 {
		k.add("user", "set exactly one of header, query or body (found %d)", set)
	}
	if u.Header != "" && !validToken(u.Header) {
		k.add("user.header", "%q is not a header field name (RFC 9110 section 5.1: a token)", u.Header)
	}
	if u.Body != "" {
		k.pointer("user.body", u.Body)
	}
}

// validToken reports whether s is a token as RFC 9110 section 5.6.2
// defines it: one or more tchar.
func validToken(s string) bool {
	if s == "" {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		ok := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' ||
			strings.IndexByte("!#$%&'*+-.^_`|~", c) >= 0
		if !ok {
			return false
		}
	}
	return true
}

func (k *checker) oneOf(path, v string, allowed ...string) {
	for _, a := range allowed {
		if v == a {
			return
		}
	}
	k.add(path, "%q is not one of %s", v, strings.Join(quoteAll(allowed), ", "))
}

func quoteAll(ss []string) []string {
	out := make([]string, len(ss))
	for i, s := range ss {
		out[i] = strconv.Quote(s)
	}
	return out
}

func (k *checker) positive(path string, n int64) {
	if n <= 0 {
		k.add(path, "%d must be positive", n)
	}
}

func (k *checker) positiveDuration(path string, d time.Duration) {
	if d <= 0 {
		k.add(path, "%s must be positive", dur(d))
	}
}

func (k *checker) nonNegative(path string, d time.Duration) {
	if d < 0 {
		k.add(path, "%s is negative; use 0 to turn it off", dur(d))
	}
}

// dur formats a duration as it would be written in the file, without
// trailing zero units: 24h rather than 24h0m0s.
func dur(d time.Duration) string {
	s := d.String()
	if strings.HasSuffix(s, "m0s") {
		s = strings.TrimSuffix(s, "0s")
	}
	if strings.HasSuffix(s, "h0m") {
		s = strings.TrimSuffix(s, "0m")
	}
	return s
}
