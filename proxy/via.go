package proxy

import (
	"crypto/rand"
	"encoding/hex"
	"net/http"
	"strconv"
	"strings"
)

// newPseudonym returns this server's name in Via fields: "riffle-" and 8
// random hex digits, fresh for each Server, so that two riffles in a chain
// tell their marks apart and a request that comes back to the one that
// sent it is recognised (RFC 9110 section 7.6.3 lets a proxy name itself
// by a pseudonym).
func newPseudonym() string {
	var b [4]byte
	_, _ = rand.Read(b[:])
	return "riffle-" + hex.EncodeToString(b[:])
}

// addVia appends this hop to dst's Via (RFC 9110 section 7.6.3): the
// protocol the request was received with, then the pseudonym. Prior
// values are read from in.
func addVia(dst http.Header, in *http.Request, pseudonym string) {
	proto := strconv.Itoa(in.ProtoMajor)
	if in.ProtoMajor < 2 {
		proto += "." + strconv.Itoa(in.ProtoMinor)
	}
	hop := proto + " " + pseudonym
	if prior := in.Header["Via"]; len(prior) > 0 {
		hop = strings.Join(prior, ", ") + ", " + hop
	}
	dst["Via"] = []string{hop}
}

// looped reports whether h's Via already holds pseudonym: the request
// went through this riffle before, so forwarding it again would loop.
func looped(h http.Header, pseudonym string) bool {
	for _, v := range h["Via"] {
		for _, hop := range strings.Split(v, ",") {
			f := strings.Fields(hop)
			if len(f) >= 2 && f[1] == pseudonym {
				return true
			}
		}
	}
	return false
}

// writeLoop answers a request that came back to this riffle with 508 Loop
// Detected (RFC 5842 section 7.2) instead of forwarding it again.
func writeLoop(w http.ResponseWriter) {
	writeError(w, http.StatusLoopDetected, "", "loop",
		"this request already went through this riffle (its Via field holds riffle's mark): a backend URL points back at riffle")
}
