package jsonptr

import (
	"encoding/binary"
	"fmt"
	"math/bits"
	"unicode/utf16"
	"unicode/utf8"
)

// skipWS returns the offset of the first byte at or after i that is not
// RFC 8259 white space (space, tab, line feed, carriage return).
func skipWS(b []byte, i int) int {
	if i < len(b) && b[i] > ' ' { // the common case: no white space at all
		return i
	}
	for i < len(b) {
		switch b[i] {
		case ' ', '\t', '\n', '\r':
			i++
		default:
			return i
		}
	}
	return i
}

// special8 returns, for eight bytes of a string read little-endian, a
// mask whose lowest set bit is the top bit of the first byte that cannot
// stand for itself in a JSON string (RFC 8259 section 7): a quote, a
// backslash or a control character below 0x20. It applies the word-wise
// "has a zero byte" and "has a byte less than n" tests (Warren, Hacker's
// Delight, 2nd ed., section 6-1; recalled from memory) to x xor '"',
// x xor '\\' and x; a borrow can only mark bytes above a true match, so
// the lowest mark is exact (TestSpecial8 checks it byte by byte).
func special8(x uint64) uint64 {
	const lo, hi = 0x0101010101010101, 0x8080808080808080
	q := x ^ (lo * '"')
	e := x ^ (lo * '\\')
	return ((q-lo)&^q | (e-lo)&^e | (x-lo*0x20)&^x) & hi
}

// skipString scans the string literal that starts at b[i] == '"' and
// returns the offset past its closing quote and whether it holds escapes.
func skipString(b []byte, i int) (int, bool, error) {
	esc := false
	j := i + 1
	for {
		// The common case first: a run of plain characters, eight at a
		// time while they last.
		for j+8 <= len(b) {
			m := special8(binary.LittleEndian.Uint64(b[j:]))
			if m != 0 {
				j += bits.TrailingZeros64(m) / 8
				break
			}
			j += 8
		}
		for j < len(b) && b[j] >= 0x20 && b[j] != '"' && b[j] != '\\' {
			j++
		}
		if j >= len(b) {
			return len(b), esc, invalid(i, "unterminated string")
		}
		switch c := b[j]; {
		case c == '"':
			return j + 1, esc, nil
		case c < 0x20:
			return j, esc, invalid(j, "control character in string")
		}
		esc = true
		if j+1 >= len(b) {
			return j, esc, invalid(j, "unterminated escape")
		}
		switch b[j+1] {
		case '"', '\\', '/', 'b', 'f', 'n', 'r', 't':
			j += 2
		case 'u':
			if j+5 >= len(b) || !isHex4(b[j+2:j+6]) {
				return j, esc, invalid(j, `want 4 hex digits after \u`)
			}
			j += 6
		default:
			return j, esc, invalid(j, fmt.Sprintf("bad escape \\%c", b[j+1]))
		}
	}
}

func isHex4(b []byte) bool {
	for _, c := range b[:4] {
		if hexVal(c) < 0 {
			return false
		}
	}
	return true
}

func hexVal(c byte) rune {
	switch {
	case c >= '0' && c <= '9':
		return rune(c - '0')
	case c >= 'a' && c <= 'f':
		return rune(c - 'a' + 10)
	case c >= 'A' && c <= 'F':
		return rune(c - 'A' + 10)
	}
	return -1
}

// skipNumber scans RFC 8259 section 6's number production:
// [ "-" ] ( "0" / 1-9 *DIGIT ) [ "." 1*DIGIT ] [ ( "e" / "E" ) [ "-" / "+" ] 1*DIGIT ].
func skipNumber(b []byte, i int) (int, error) {
	j := i
	if j < len(b) && b[j] == '-' {
		j++
	}
	switch {
	case j < len(b) && b[j] == '0':
		j++
	case j < len(b) && b[j] >= '1' && b[j] <= '9':
		j = digits(b, j)
	default:
		return j, invalid(j, "want a digit in number")
	}
	if j < len(b) && b[j] == '.' {
		k := digits(b, j+1)
		if k == j+1 {
			return k, invalid(k, "want a digit after the decimal point")
		}
		j = k
	}
	if j < len(b) && (b[j] == 'e' || b[j] == 'E') {
		j++
		if j < len(b) && (b[j] == '+' || b[j] == '-') {
			j++
		}
		k := digits(b, j)
		if k == j {
			return k, invalid(k, "want a digit in the exponent")
		}
		j = k
	}
	return j, nil
}

func digits(b []byte, j int) int {
	for j < len(b) && b[j] >= '0' && b[j] <= '9' {
		j++
	}
	return j
}

func skipLiteral(b []byte, i int, lit string) (int, error) {
	if len(b)-i < len(lit) || string(b[i:i+len(lit)]) != lit {
		return i, invalid(i, "want "+lit)
	}
	return i + len(lit), nil
}

// keyEquals reports whether the raw contents of a member name (between the
// quotes) decode to name. RFC 6901 section 4 compares code points with no
// Unicode normalisation, so decoded bytes are compared exactly.
func keyEquals(raw []byte, esc bool, name string) bool {
	if !esc {
		return string(raw) == name
	}
	if len(raw) < len(name) {
		return false // an escape never decodes to more bytes than it takes
	}
	var buf [64]byte
	return string(appendUnescaped(buf[:0], raw)) == name
}

// AppendUnquote appends the decoded contents of the JSON string literal s
// (quotes included) to dst. Invalid UTF-16 surrogates decode to U+FFFD, as
// in encoding/json.
func AppendUnquote(dst, s []byte) ([]byte, error) {
	end, esc, err := skipString(s, 0)
	if len(s) == 0 || s[0] != '"' {
		err = invalid(0, "want a string")
	}
	if err == nil && end != len(s) {
		err = invalid(end, "data after the string")
	}
	if err != nil {
		return dst, fmt.Errorf("jsonptr: %w", err)
	}
	if !esc {
		return append(dst, s[1:len(s)-1]...), nil
	}
	return appendUnescaped(dst, s[1:len(s)-1]), nil
}

// appendUnescaped decodes raw string contents already checked by
// skipString.
func appendUnescaped(dst, raw []byte) []byte {
	for i := 0; i < len(raw); i++ {
		c := raw[i]
		if c != '\\' {
			dst = append(dst, c)
			continue
		}
		i++
		switch raw[i] {
		case 'b':
			dst = append(dst, '\b')
		case 'f':
			dst = append(dst, '\f')
		case 'n':
			dst = append(dst, '\n')
		case 'r':
			dst = append(dst, '\r')
		case 't':
			dst = append(dst, '\t')
		case 'u':
			r := hex4(raw[i+1:])
			i += 4
			if utf16.IsSurrogate(r) {
				r2 := utf8.RuneError
				if i+6 < len(raw) && raw[i+1] == '\\' && raw[i+2] == 'u' {
					r2 = hex4(raw[i+3:])
				}
				if dec := utf16.DecodeRune(r, r2); dec != utf8.RuneError {
					r = dec
					i += 6
				} else {
					r = utf8.RuneError
				}
			}
			dst = utf8.AppendRune(dst, r)
		default: // '"', '\\', '/'
			dst = append(dst, raw[i])
		}
	}
	return dst
}

func hex4(b []byte) rune {
	return hexVal(b[0])<<12 | hexVal(b[1])<<8 | hexVal(b[2])<<4 | hexVal(b[3])
}
