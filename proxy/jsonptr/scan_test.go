package jsonptr

import (
	"encoding/binary"
	"math/bits"
	"math/rand/v2"
	"testing"
)

// firstSpecial is the byte-at-a-time reference for special8: the index of
// the first byte that RFC 8259 section 7 does not let stand for itself in a
// string (quote, backslash, U+0000 to U+001F), or 8 when there is none.
func firstSpecial(b []byte) int {
	for i, c := range b {
		if c < 0x20 || c == '"' || c == '\\' {
			return i
		}
	}
	return len(b)
}

func special8Index(b []byte) int {
	m := special8(binary.LittleEndian.Uint64(b))
	if m == 0 {
		return 8
	}
	return bits.TrailingZeros64(m) / 8
}

// TestSpecial8 checks the word-at-a-time scan against the reference: every
// byte value at every position among plain bytes, and random words, where
// bytes that borrow (0x00, 0x80, 0xff, ...) sit beside each other.
func TestSpecial8(t *testing.T) {
	for pos := range 8 {
		for c := range 256 {
			b := []byte("abcdefgh")
			b[pos] = byte(c)
			if got, want := special8Index(b), firstSpecial(b); got != want {
				t.Fatalf("special8(%q): first special byte at %d, want %d", b, got, want)
			}
		}
	}
	r := rand.New(rand.NewPCG(1, 2))
	alphabet := []byte{0x00, 0x01, 0x1f, 0x20, 0x21, '"', '#', '\\', ']', 0x7f, 0x80, 0xa0, 0xa2, 0xdc, 0xff, 'a'}
	b := make([]byte, 8)
	for range 200000 {
		for i := range b {
			b[i] = alphabet[r.IntN(len(alphabet))]
		}
		if got, want := special8Index(b), firstSpecial(b); got != want {
			t.Fatalf("special8(% x): first special byte at %d, want %d", b, got, want)
		}
	}
}

// TestSkipStringLong checks skipString on strings longer than one word,
// with the stop byte at every offset, against the reference scan.
func TestSkipStringLong(t *testing.T) {
	for n := range 40 {
		for _, stop := range []byte{'"', '\\', 0x01} {
			s := []byte{'"'}
			for i := range n {
				s = append(s, 'a'+byte(i%26))
			}
			s = append(s, stop, 'n', '"')
			end, esc, err := skipString(s, 0)
			switch stop {
			case '"':
				if err != nil || end != n+2 || esc {
					t.Errorf("n=%d quote: got end %d esc %v err %v, want end %d esc false", n, end, esc, err, n+2)
				}
			case '\\':
				if err != nil || end != len(s) || !esc {
					t.Errorf("n=%d escape: got end %d esc %v err %v, want end %d esc true", n, end, esc, err, len(s))
				}
			default:
				if err == nil || end != n+1 {
					t.Errorf("n=%d control: got end %d err %v, want an error at %d", n, end, err, n+1)
				}
			}
		}
	}
}
