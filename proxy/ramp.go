package proxy

import (
	"encoding/binary"
	"net/http"
	"net/url"
	"strings"
	"time"

	"riffle/proxy/guard"
	"riffle/proxy/jsonptr"
	"riffle/store"
)

// userSource says where a route request's user key is read from; at most
// one field is set.
type userSource struct {
	header string
	query  string
	body   jsonptr.Pointer
	inBody bool
}

// key returns the request's user key, or "" when it has none.
func (u *userSource) key(r *http.Request, body []byte) string {
	switch {
	case u.header != "":
		return r.Header.Get(u.header)
	case u.query != "":
		return queryValue(r.URL.RawQuery, u.query)
	case u.inBody:
		v, err := u.body.Get(body)
		if err != nil || len(v) == 0 {
			return ""
		}
		if v[0] == '"' {
			s, err := jsonptr.AppendUnquote(nil, v)
			if err != nil {
				return ""
			}
			return string(s)
		}
		if v[0] == '-' || (v[0] >= '0' && v[0] <= '9') {
			return string(v)
		}
	}
	return ""
}

// queryValue returns the first value of name in a raw query string, as
// url.Values.Get would, without building the whole map.
func queryValue(raw, name string) string {
	for raw != "" {
		var pair string
		pair, raw, _ = strings.Cut(raw, "&")
		k, v, _ := strings.Cut(pair, "=")
		if k != name {
			if !strings.ContainsAny(k, "%+") {
				continue
			}
			if uk, err := url.QueryUnescape(k); err != nil || uk != name {
				continue
			}
		}
		if uv, err := url.QueryUnescape(v); err == nil {
			return uv
		}
		return ""
	}
	return ""
}

// bucket maps a user to a point of [0,1) that depends only on the
// experiment's name and the user key, so a user stays in or out of the
// ramp for as long as the ramp does not move past them, and a rising ramp
// only ever adds users. The hash is 64-bit FNV-1a (Fowler, Noll, Vo) of
// name, a zero byte and key, finished with the SplitMix64 mixer (Steele,
// Lea & Flood, OOPSLA 2014) so that its top bits are evenly spread.
func bucket(experiment, key string) float64 {
	const offset, prime = 14695981039346656037, 1099511628211
	h := uint64(offset)
	for i := 0; i < len(experiment); i++ {
		h = (h ^ uint64(experiment[i])) * prime
	}
	h *= prime // the zero separator: h ^ 0 == h
	for i := 0; i < len(key); i++ {
		h = (h ^ uint64(key[i])) * prime
	}
	return unit(mix64(h))
}

// idBucket places a request without a user key by its impression id's
// random half.
func idBucket(id store.ID) float64 {
	return unit(mix64(binary.BigEndian.Uint64(id[8:])))
}

func mix64(z uint64) uint64 {
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// unit maps the top 53 bits of h to [0,1) exactly.
func unit(h uint64) float64 { return float64(h>>11) / (1 << 53) }

// tripper is what *guard.Guard offers beyond Gate: whether a guardrail has
// halted the challenger, so that a zero ramp can be told apart from a
// schedule's.
type tripper interface {
	Tripped() (bool, guard.Trip)
}

// rampAt returns the effective ramp at now and the reason to give users
// left out of it.
func (rt *runtime) rampAt(now time.Time) (float64, reason) {
	if rt.srv.gate == nil {
		return rt.ramp, reasonRamp
	}
	r := rt.srv.gate.Ramp(now)
	if !(r > 0) { // zero, negative or NaN
		if t, ok := rt.srv.gate.(tripper); ok {
			if tripped, _ := t.Tripped(); tripped {
				return 0, reasonGuardrail
			}
		}
		return 0, reasonRamp
	}
	return min(r, 1), reasonRamp
}
