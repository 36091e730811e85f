package store

import (
	"encoding/binary"
	"fmt"
	"math"
	"time"

	"riffle/merge"
)

// Impression record layout (value under the impression's 16-byte id):
//
//	flags       1 byte: bit 0 final, bit 1 seed is ID.Seed() (not stored),
//	            bit 2 slots carry PA/PB, bits 4-5 the merge.Outcome
//	time        zigzag varint: Time minus the id's time, in nanoseconds
//	experiment  uvarint length + bytes
//	user        8 bytes big-endian
//	policy      uvarint length + bytes
//	seed        8 bytes big-endian, only without bit 1
//	fallback    uvarint length + bytes
//	slots       uvarint count, then per slot: uvarint length + item,
//	            1 byte team, uvarint RankA, uvarint RankB,
//	            and with bit 2: PA, PB as 4-byte IEEE 754 each
//	score       only when final: Incumbent, Challenger as 8-byte IEEE 754
//	request     only with bit 3: route, method, path, query (uvarint length
//	            + bytes each), uvarint header count and per header name and
//	            value (uvarint length + bytes), body (uvarint length +
//	            bytes), uvarint incumbent and challenger list lengths
//
// A 10-slot team-draft impression with 9-byte item ids and a 14-byte
// experiment name takes 168 bytes (see TestImpressionSize).
const (
	flagFinal    = 1 << 0
	flagSeedID   = 1 << 1
	flagProbs    = 1 << 2
	flagRequest  = 1 << 3
	outcomeShift = 4
)

// record is an impression with its finalisation state.
type record struct {
	Impression
	Final   bool
	Outcome merge.Outcome
	Score   merge.Score
}

func appendString(b []byte, s string) []byte {
	b = binary.AppendUvarint(b, uint64(len(s)))
	return append(b, s...)
}

// encodeRecord appends the record's encoding to b.
func encodeRecord(b []byte, r *record) []byte {
	im := &r.Impression
	var flags byte
	if r.Final {
		flags |= flagFinal | byte(r.Outcome&3)<<outcomeShift
	}
	if im.Seed == im.ID.Seed() {
		flags |= flagSeedID
	}
	for _, s := range im.Slots {
		if s.PA != 0 || s.PB != 0 {
			flags |= flagProbs
			break
		}
	}
	if im.Request != nil {
		flags |= flagRequest
	}
	b = append(b, flags)
	b = binary.AppendVarint(b, im.Time.UnixNano()-idNanos(im.ID[:]))
	b = appendString(b, im.Experiment)
	b = binary.BigEndian.AppendUint64(b, im.User)
	b = appendString(b, im.Policy)
	if flags&flagSeedID == 0 {
		b = binary.BigEndian.AppendUint64(b, im.Seed)
	}
	b = appendString(b, im.Fallback)
	b = binary.AppendUvarint(b, uint64(len(im.Slots)))
	for _, s := range im.Slots {
		b = appendString(b, s.Item)
		b = append(b, byte(s.Team))
		b = binary.AppendUvarint(b, uint64(uint32(s.RankA)))
		b = binary.AppendUvarint(b, uint64(uint32(s.RankB)))
		if flags&flagProbs != 0 {
			b = binary.BigEndian.AppendUint32(b, math.Float32bits(s.PA))
			b = binary.BigEndian.AppendUint32(b, math.Float32bits(s.PB))
		}
	}
	if r.Final {
		b = binary.BigEndian.AppendUint64(b, math.Float64bits(r.Score.Incumbent))
		b = binary.BigEndian.AppendUint64(b, math.Float64bits(r.Score.Challenger))
	}
	if q := im.Request; q != nil {
		b = AppendRequest(b, q)
	}
	return b
}

// AppendRequest appends a kept request's encoding (the record's request
// part) to b; DecodeRequest reads it back. The PostgreSQL store keeps it
// in a column as is.
func AppendRequest(b []byte, q *Request) []byte {
	for _, s := range []string{q.Route, q.Method, q.Path, q.Query} {
		b = appendString(b, s)
	}
	b = binary.AppendUvarint(b, uint64(len(q.Header)))
	for _, h := range q.Header {
		b = appendString(appendString(b, h[0]), h[1])
	}
	b = binary.AppendUvarint(b, uint64(len(q.Body)))
	b = append(b, q.Body...)
	b = binary.AppendUvarint(b, uint64(uint32(q.Lengths[0])))
	return binary.AppendUvarint(b, uint64(uint32(q.Lengths[1])))
}

// DecodeRequest decodes what AppendRequest wrote; a damaged value gives an
// error wrapping ErrCorrupt.
func DecodeRequest(v []byte) (*Request, error) {
	d := decoder{b: v}
	q := d.request()
	if d.err == nil && len(d.b) != 0 {
		d.fail("request length")
	}
	if d.err != nil {
		return nil, fmt.Errorf("request: %w", d.err)
	}
	return q, nil
}

func (d *decoder) request() *Request {
	q := &Request{Route: d.str("request route"), Method: d.str("request method"),
		Path: d.str("request path"), Query: d.str("request query")}
	n := d.uvarint("request header count")
	if n > uint64(len(d.b)) {
		d.fail("request header count")
		return q
	}
	for range n {
		q.Header = append(q.Header, [2]string{d.str("request header"), d.str("request header")})
	}
	if body := d.str("request body"); body != "" {
		q.Body = []byte(body)
	}
	q.Lengths[0] = int32(uint32(d.uvarint("request lengths")))
	q.Lengths[1] = int32(uint32(d.uvarint("request lengths")))
	return q
}

// idNanos returns the time stored in the first 8 bytes of an id key.
func idNanos(k []byte) int64 { return int64(binary.BigEndian.Uint64(k[:8])) }

// decoder reads the primitives of a record and remembers the first error.
type decoder struct {
	b   []byte
	err error
}

func (d *decoder) fail(what string) {
	if d.err == nil {
		d.err = fmt.Errorf("%w: truncated or bad %s", ErrCorrupt, what)
	}
	d.b = nil
}

func (d *decoder) uvarint(what string) uint64 {
	v, n := binary.Uvarint(d.b)
	if n <= 0 {
		d.fail(what)
		return 0
	}
	d.b = d.b[n:]
	return v
}

func (d *decoder) varint(what string) int64 {
	v, n := binary.Varint(d.b)
	if n <= 0 {
		d.fail(what)
		return 0
	}
	d.b = d.b[n:]
	return v
}

func (d *decoder) fixed(n int, what string) []byte {
	if len(d.b) < n {
		d.fail(what)
		return make([]byte, n)
	}
	v := d.b[:n]
	d.b = d.b[n:]
	return v
}

func (d *decoder) u64(what string) uint64 { return binary.BigEndian.Uint64(d.fixed(8, what)) }
func (d *decoder) u32(what string) uint32 { return binary.BigEndian.Uint32(d.fixed(4, what)) }

func (d *decoder) str(what string) string {
	n := d.uvarint(what)
	if n > uint64(len(d.b)) {
		d.fail(what)
		return ""
	}
	return string(d.fixed(int(n), what))
}

// decodeRecord decodes the record stored under key (an id) from v.
func decodeRecord(key, v []byte) (record, error) {
	var r record
	if len(key) != len(r.ID) || len(v) == 0 {
		return r, fmt.Errorf("%w: impression key %x", ErrCorrupt, key)
	}
	copy(r.ID[:], key)
	d := decoder{b: v[1:]}
	flags := v[0]
	r.Final = flags&flagFinal != 0
	r.Outcome = merge.Outcome(flags >> outcomeShift & 3)
	r.Time = time.Unix(0, idNanos(key)+d.varint("time")).UTC()
	r.Experiment = d.str("experiment")
	r.User = d.u64("user")
	r.Policy = d.str("policy")
	r.Seed = r.ID.Seed()
	if flags&flagSeedID == 0 {
		r.Seed = d.u64("seed")
	}
	r.Fallback = d.str("fallback")
	n := d.uvarint("slot count")
	if n > uint64(len(d.b)) { // every slot takes several bytes: bounds the allocation
		d.fail("slot count")
	} else if n > 0 {
		r.Slots = make([]merge.Slot, n)
	}
	for i := range r.Slots {
		s := &r.Slots[i]
		s.Item = d.str("slot item")
		s.Team = merge.Team(d.fixed(1, "slot team")[0])
		s.RankA = int32(uint32(d.uvarint("slot rank")))
		s.RankB = int32(uint32(d.uvarint("slot rank")))
		if flags&flagProbs != 0 {
			s.PA = math.Float32frombits(d.u32("slot probability"))
			s.PB = math.Float32frombits(d.u32("slot probability"))
		}
	}
	if r.Final {
		r.Score.Incumbent = math.Float64frombits(d.u64("score"))
		r.Score.Challenger = math.Float64frombits(d.u64("score"))
	}
	if flags&flagRequest != 0 {
		r.Request = d.request()
	}
	if d.err == nil && len(d.b) != 0 {
		d.fail("record length")
	}
	if d.err != nil {
		return r, fmt.Errorf("impression %s: %w", r.ID, d.err)
	}
	return r, nil
}

// Event record layout (value under impression id + 8-byte sequence):
// uvarint length + item, uvarint length + type, zigzag varint time minus
// the impression id's time in nanoseconds, uvarint length + key.
func encodeEvent(b []byte, ev *Event) []byte {
	b = appendString(b, ev.Item)
	b = appendString(b, ev.Type)
	b = binary.AppendVarint(b, ev.Time.UnixNano()-idNanos(ev.Impression[:]))
	return appendString(b, ev.Key)
}

// decodeEvent decodes the event stored under key from v.
func decodeEvent(key, v []byte) (Event, error) {
	var ev Event
	if len(key) != eventKeyLen {
		return ev, fmt.Errorf("%w: event key %x", ErrCorrupt, key)
	}
	copy(ev.Impression[:], key)
	d := decoder{b: v}
	ev.Item = d.str("event item")
	ev.Type = d.str("event type")
	ev.Time = time.Unix(0, idNanos(key)+d.varint("event time")).UTC()
	ev.Key = d.str("event key")
	if d.err == nil && len(d.b) != 0 {
		d.fail("event length")
	}
	if d.err != nil {
		return ev, fmt.Errorf("event %x: %w", key, d.err)
	}
	return ev, nil
}
