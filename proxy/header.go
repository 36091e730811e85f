package proxy

import (
	"net"
	"net/http"
	"net/textproto"
	"strings"
)

// hopByHop reports whether a canonical header name is a hop-by-hop field
// that a proxy must not forward: Connection itself and the fields RFC 9110
// section 7.6.1 lists as known to require removal (Proxy-Connection,
// Keep-Alive, TE, Transfer-Encoding, Upgrade), plus the other hop-by-hop
// fields of RFC 2616 section 13.5.1 (Proxy-Authenticate,
// Proxy-Authorization, Trailer).
func hopByHop(name string) bool {
	switch name {
	case "Connection", "Proxy-Connection", "Keep-Alive", "Te", "Transfer-Encoding",
		"Upgrade", "Proxy-Authenticate", "Proxy-Authorization", "Trailer":
		return true
	}
	return false
}

// connectionNamed returns the canonical names that the Connection fields
// of h list as connection options: RFC 9110 section 7.6.1 makes each of
// them hop-by-hop for this message.
func connectionNamed(h http.Header) []string {
	var named []string
	for _, v := range h["Connection"] {
		for opt := range strings.SplitSeq(v, ",") {
			if opt = textproto.TrimString(opt); opt != "" {
				named = append(named, textproto.CanonicalMIMEHeaderKey(opt))
			}
		}
	}
	return named
}

// forwardable copies src's fields into dst except hop-by-hop ones and
// those in skip. Values are shared, not copied: neither side is modified
// afterwards except by replacing whole entries.
func forwardable(dst, src http.Header, skip func(string) bool) {
	named := connectionNamed(src)
	for k, v := range src {
		if hopByHop(k) || (skip != nil && skip(k)) || contains(named, k) {
			continue
		}
		dst[k] = v
	}
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}

// outboundHeader returns the header riffle sends to both backends for
// request in: the client's fields minus hop-by-hop ones, gzip as the only
// content coding riffle will accept (it must read the list), and the
// forwarding fields of this hop.
func outboundHeader(in *http.Request, pseudonym string) http.Header {
	h := make(http.Header, len(in.Header)+5)
	forwardable(h, in.Header, nil)
	h["Accept-Encoding"] = []string{"gzip"}
	addForwarded(h, in)
	addVia(h, in, pseudonym)
	return h
}

// addForwarded records this hop in dst the way a reverse proxy does: the
// client's address appended to X-Forwarded-For and, as an RFC 7239
// element, to Forwarded; X-Forwarded-Host and X-Forwarded-Proto set to
// what this hop received (as net/http/httputil's SetXForwarded does).
// Prior values are read from in, so dst may have had them removed.
func addForwarded(dst http.Header, in *http.Request) {
	proto := "http"
	if in.TLS != nil {
		proto = "https"
	}
	ip, _, err := net.SplitHostPort(in.RemoteAddr)
	if err == nil && ip != "" {
		if prior := in.Header["X-Forwarded-For"]; len(prior) > 0 {
			dst["X-Forwarded-For"] = []string{strings.Join(prior, ", ") + ", " + ip}
		} else {
			dst["X-Forwarded-For"] = []string{ip}
		}
	} else {
		delete(dst, "X-Forwarded-For")
	}
	dst["X-Forwarded-Host"] = []string{in.Host}
	dst["X-Forwarded-Proto"] = []string{proto}
	elem := forwardedElement(ip, in.Host, proto)
	if prior := in.Header["Forwarded"]; len(prior) > 0 {
		elem = strings.Join(prior, ", ") + ", " + elem
	}
	dst["Forwarded"] = []string{elem}
}

// forwardedElement renders one forwarded-element of RFC 7239 section 4.
// An unknown client is "unknown" (section 6.3); an IPv6 address is
// bracketed and quoted (section 6); a value that is not a token is quoted.
// It runs on every request, so it sizes its one allocation up front.
func forwardedElement(ip, host, proto string) string {
	node := "unknown"
	bracket := false
	if ip != "" {
		node = ip
		bracket = strings.IndexByte(ip, ':') >= 0
	}
	var b strings.Builder
	b.Grow(len(`for="[]";host="";proto=`) + len(node) + 2*len(host) + len(proto))
	b.WriteString("for=")
	if bracket {
		b.WriteString(`"[`)
		b.WriteString(node)
		b.WriteString(`]"`)
	} else {
		b.WriteString(node)
	}
	if host != "" {
		b.WriteString(";host=")
		writeTokenOrQuoted(&b, host)
	}
	b.WriteString(";proto=")
	b.WriteString(proto)
	return b.String()
}

// writeTokenOrQuoted writes s as an RFC 9110 token if it is one, else as a
// quoted-string (section 5.6.4) with '"' and '\' escaped.
func writeTokenOrQuoted(b *strings.Builder, s string) {
	i := 0
	for i < len(s) && isTokenChar(s[i]) {
		i++
	}
	if i == len(s) {
		b.WriteString(s)
		return
	}
	b.WriteByte('"')
	for j := 0; j < len(s); j++ {
		if c := s[j]; c == '"' || c == '\\' {
			b.WriteByte('\\')
		}
		b.WriteByte(s[j])
	}
	b.WriteByte('"')
}

// isTokenChar reports whether c is a tchar of RFC 9110 section 5.6.2.
func isTokenChar(c byte) bool {
	switch {
	case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9':
		return true
	}
	return strings.IndexByte("!#$%&'*+-.^_`|~", c) >= 0
}

// responseHeader copies a backend's response fields into the client's
// header, minus hop-by-hop fields and the framing riffle replaces: it
// serves a decoded body of its own length, and stamps its own impression.
func responseHeader(dst, src http.Header) {
	forwardable(dst, src, func(k string) bool {
		return k == "Content-Length" || k == "Content-Encoding" || k == ImpressionHeader
	})
}
