package proxy

import (
	"fmt"
	"log/slog"
	"net/http"
	"net/http/httputil"
	"net/url"
	"strings"
	"time"

	"github.com/go-chi/chi/v5"

	"riffle/merge"
	"riffle/proxy/config"
	"riffle/proxy/jsonptr"
)

// runtime is everything a request needs from one configuration, built by
// Apply and never modified afterwards.
type runtime struct {
	srv             *Server
	router          http.Handler
	inc, chal       *backend
	routes          []*route
	experiment      string
	policy          merge.Policy
	hedge           merge.Hedge
	ramp            float64 // experiment.ramp, used when there is no Gate
	maxBody         int64
	inFlight        int64         // backend_bytes_in_flight, set on the server's budget by Apply
	readBody        time.Duration // read_body_timeout
	serveChallenger bool
	user            userSource
	keep            keepRequests
}

// keepRequests is experiment.keep_requests: whether and what of a request
// is stored with its interleaved impression.
type keepRequests struct {
	on      bool
	headers []string // canonical field names
	bytes   int64
}

// route is one configured, interleaved route.
type route struct {
	path    string
	adapter adapter
	slots   int
	m       *routeMetrics
}

func (rt *runtime) hasRoute(path string) bool {
	for _, ro := range rt.routes {
		if ro.path == path {
			return true
		}
	}
	return false
}

// build turns cfg into a runtime, collecting every problem it finds.
func (s *Server) build(cfg *config.Config) (*runtime, error) {
	var problems []string
	bad := func(format string, args ...any) { problems = append(problems, fmt.Sprintf(format, args...)) }
	rt := &runtime{srv: s, experiment: cfg.Experiment.Name, maxBody: cfg.MaxBodyBytes, ramp: 1}
	if rt.maxBody <= 0 {
		rt.maxBody = config.DefaultMaxBodyBytes
	}
	rt.inc = buildBackend("incumbent", cfg.Incumbent, s.incM, bad)
	rt.chal = buildBackend("challenger", cfg.Challenger, s.chalM, bad)
	rt.inc.maxBody, rt.chal.maxBody = cfg.MaxBackendBytes, cfg.MaxBackendBytes
	rt.chal.strict = true
	rt.readBody = cfg.ReadBodyTimeout
	if rt.readBody <= 0 {
		rt.readBody = config.DefaultReadBodyTimeout
	}
	rt.inFlight = cfg.BackendBytesInFlight
	if rt.inFlight <= 0 {
		rt.inFlight = config.DefaultBackendInFlight
	}
	switch cfg.OnIncumbentFailure {
	case "", "fail":
	case "serve-challenger":
		rt.serveChallenger = true
	default:
		bad("on_incumbent_failure: %q is not one of fail, serve-challenger", cfg.OnIncumbentFailure)
	}
	if r := cfg.Experiment.Ramp; r != nil {
		if !(*r >= 0 && *r <= 1) {
			bad("experiment.ramp: %v is not in [0,1]", *r)
		}
		rt.ramp = *r
	}
	name := cfg.Experiment.Policy
	if name == "" {
		name = config.DefaultPolicy
	}
	p, err := merge.New(name, merge.Options{Tau: cfg.Experiment.Tau, Credit: cfg.Experiment.Credit})
	if err != nil {
		bad("experiment.policy: %v", err)
	}
	rt.policy = p
	rt.hedge = merge.Hedge{
		MaxChallengerSlots: cfg.Experiment.MaxChallengerSlots,
		ChallengerFromSlot: cfg.Experiment.ChallengerFromSlot,
	}
	rt.keep = keepRequests{on: cfg.Experiment.KeepRequests, bytes: cfg.Experiment.KeepRequestBytes}
	for _, h := range cfg.Experiment.KeepHeaders {
		rt.keep.headers = append(rt.keep.headers, http.CanonicalHeaderKey(h))
	}
	rt.user = buildUser(cfg.User, bad)
	rt.routes = s.buildRoutes(cfg.Routes, bad)
	if len(problems) > 0 {
		return nil, configError(problems)
	}
	if rt.router, err = rt.buildRouter(); err != nil {
		return nil, err
	}
	return rt, nil
}

func buildBackend(key string, b config.Backend, m backendMetrics, bad func(string, ...any)) *backend {
	be := &backend{name: key, timeout: b.Timeout, m: m}
	if be.timeout <= 0 {
		be.timeout = config.DefaultTimeout
	}
	u, err := url.Parse(b.URL)
	switch {
	case err != nil:
		bad("%s.url: %q: %v", key, b.URL, err)
	case u.Scheme != "http" && u.Scheme != "https":
		bad("%s.url: %q: want an http or https URL", key, b.URL)
	case u.Host == "":
		bad("%s.url: %q: no host", key, b.URL)
	default:
		be.base = u
	}
	return be
}

func buildUser(u config.User, bad func(string, ...any)) userSource {
	us := userSource{header: u.Header, query: u.Query}
	set := 0
	for _, v := range []string{u.Header, u.Query, u.Body} {
		if v != "" {
			set++
		}
	}
	if set > 1 {
		bad("user: set one of header, query, body (have %d)", set)
	}
	if u.Body != "" {
		p, err := jsonptr.Parse(u.Body)
		if err != nil {
			bad("user.body: %v", err)
		}
		us.body, us.inBody = p, true
	}
	return us
}

func (s *Server) buildRoutes(routes []config.Route, bad func(string, ...any)) []*route {
	var out []*route
	for i, r := range routes {
		at := fmt.Sprintf("routes[%d]", i)
		ro := &route{path: r.Path, slots: r.Slots}
		if !strings.HasPrefix(r.Path, "/") {
			bad("%s.path: %q must start with \"/\"", at, r.Path)
		}
		if r.Path == "/feedback" && s.feedback != nil {
			bad("%s.path: %q is where POST /feedback is served", at, r.Path)
		}
		for _, prev := range out {
			if prev.path == r.Path {
				bad("%s.path: %q is configured twice", at, r.Path)
			}
		}
		if r.Slots < 0 {
			bad("%s.slots: %d is negative", at, r.Slots)
		}
		var err error
		if ro.adapter.list, err = jsonptr.Parse(r.List); err != nil {
			bad("%s.list: %v", at, err)
		}
		if ro.adapter.id, err = jsonptr.Parse(r.ID); err != nil {
			bad("%s.id: %v", at, err)
		}
		ro.m = s.m.route(r.Path)
		out = append(out, ro)
	}
	return out
}

// buildRouter mounts the routes, /feedback and the pass-through. chi
// panics on a malformed pattern; that becomes an error here.
func (rt *runtime) buildRouter() (h http.Handler, err error) {
	defer func() {
		if p := recover(); p != nil {
			err = fmt.Errorf("proxy: %w: routes: %v", ErrConfig, p)
		}
	}()
	pass := rt.passThrough()
	r := chi.NewRouter()
	r.NotFound(pass.ServeHTTP)
	r.MethodNotAllowed(pass.ServeHTTP)
	if rt.srv.feedback != nil {
		r.Method(http.MethodPost, "/feedback", rt.srv.feedback)
	}
	for _, ro := range rt.routes {
		r.HandleFunc(ro.path, func(w http.ResponseWriter, req *http.Request) { rt.serveRoute(w, req, ro) })
	}
	return r, nil
}

// passThrough proxies every other path to the incumbent untouched but for
// the hop-by-hop fields and this hop's forwarding fields. It has no
// deadline of its own: such paths may stream.
func (rt *runtime) passThrough() *httputil.ReverseProxy {
	base, s := rt.inc.base, rt.srv
	return &httputil.ReverseProxy{
		Rewrite: func(pr *httputil.ProxyRequest) {
			pr.SetURL(base)
			// httputil re-adds "TE: trailers" when the client sent it; TE
			// is hop-by-hop (RFC 9110 section 7.6.1) and riffle does not
			// offer it on its own behalf.
			delete(pr.Out.Header, "Te")
			addForwarded(pr.Out.Header, pr.In)
			addVia(pr.Out.Header, pr.In, s.pseudonym)
		},
		Transport:  s.transport,
		BufferPool: &s.copyBufs,
		ErrorLog:   slog.NewLogLogger(s.log.Handler(), slog.LevelWarn),
		ErrorHandler: func(w http.ResponseWriter, r *http.Request, err error) {
			if isReadTimeout(err) {
				writeError(w, http.StatusRequestTimeout, "", reasonRequestBody.String(),
					"the request body did not arrive within read_body_timeout")
				return
			}
			s.log.Warn("pass-through to the incumbent failed", "path", r.URL.Path, "err", err)
			writeError(w, http.StatusBadGateway, "incumbent", "incumbent-connect", "incumbent unreachable: "+err.Error())
		},
	}
}
