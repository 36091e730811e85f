package proxy

import (
	"fmt"
	"unsafe"

	"riffle/merge"
	"riffle/proxy/jsonptr"
)

// adapter locates a route's ranked list in a backend's JSON document and
// each element's identity inside the element, without decoding the
// document: it works on byte spans, so elements are served exactly as the
// backend wrote them.
type adapter struct {
	list, id jsonptr.Pointer
}

// listDoc is one backend document as the adapter read it. Its slices are
// scratch space reused from request to request; ids is the exception, as
// its strings outlive the request in the impression record.
type listDoc struct {
	doc  []byte
	span jsonptr.Span // the list's array in doc
	// elems are the spans (in doc) of the elements kept, parallel to ids:
	// elements without an identity are dropped, and a repeated identity
	// keeps its first element only.
	elems []jsonptr.Span
	ids   []string
	// dropped counts elements without an identity.
	dropped int
	all     []jsonptr.Element // every element of the array
}

// linearDedupMax is the list length up to which duplicates are found by
// scanning the kept ids rather than with a map: for short lists the scan is
// cheaper than hashing and allocates nothing (common practice).
const linearDedupMax = 64

// parse reads doc's list and identities into d in one pass over doc. It
// fails, wrapping ErrBody, when doc is not JSON or has no array at the
// list pointer. An element whose id pointer finds nothing, or something
// other than a string or a number, has no identity.
func (a *adapter) parse(d *listDoc, doc []byte) error {
	d.doc, d.dropped = doc, 0
	d.elems, d.ids = d.elems[:0], d.ids[:0]
	span, all, err := a.list.FindArray(d.all, doc, a.id)
	d.all = all
	if err != nil {
		return fmt.Errorf("%w: list %q: %w", ErrBody, a.list.String(), err)
	}
	d.span = span
	size := 0
	for i, e := range all {
		if e.ID.Start >= 0 && !isIdentity(doc[e.ID.Start]) {
			all[i].ID.Start = -1
		}
		if all[i].ID.Start < 0 {
			d.dropped++
			continue
		}
		size += e.ID.End - e.ID.Start
	}
	// One allocation holds every identity of the list; the strings point
	// into it and it is never reused, so they stay valid for as long as the
	// impression record that holds them. Decoding never lengthens a value,
	// so the arena never grows.
	arena := make([]byte, 0, size)
	var seen map[string]struct{}
	if len(all) > linearDedupMax {
		seen = make(map[string]struct{}, len(all))
	}
	for _, e := range all {
		if e.ID.Start < 0 {
			continue
		}
		start := len(arena)
		arena = appendIdentity(arena, doc[e.ID.Start:e.ID.End])
		id := arenaString(arena, start)
		if duplicate(d.ids, seen, id) {
			arena = arena[:start]
			continue
		}
		d.ids = append(d.ids, id)
		d.elems = append(d.elems, e.Span)
	}
	return nil
}

// isIdentity reports whether a JSON value starting with c can be an
// identity: a string or a number.
func isIdentity(c byte) bool {
	return c == '"' || c == '-' || (c >= '0' && c <= '9')
}

// appendIdentity appends the identity a JSON value stands for: a string's
// decoded text, or a number's JSON text as written.
func appendIdentity(dst, v []byte) []byte {
	if v[0] != '"' {
		return append(dst, v...)
	}
	out, err := jsonptr.AppendUnquote(dst, v)
	if err != nil { // cannot happen: Find validated the value
		return append(dst, v...)
	}
	return out
}

// arenaString returns arena[start:] as a string without copying. The caller
// guarantees arena's capacity never grows past what it was allocated with,
// so the bytes never move, and they are never written again once a string
// covers them.
func arenaString(arena []byte, start int) string {
	n := len(arena) - start
	if n == 0 {
		return ""
	}
	return unsafe.String(&arena[start], n)
}

func duplicate(ids []string, seen map[string]struct{}, id string) bool {
	if seen != nil {
		if _, dup := seen[id]; dup {
			return true
		}
		seen[id] = struct{}{}
		return false
	}
	// Identities of one list tend to share a prefix (rake-01, rake-02):
	// comparing the last byte first rejects most pairs without a memory
	// comparison.
	n := len(id)
	for _, s := range ids {
		if len(s) == n && (n == 0 || s[n-1] == id[n-1]) && s == id {
			return true
		}
	}
	return false
}

// rewrite appends to dst the incumbent's document with its list replaced
// by the merged slots, each element copied whole from the list that
// supplied it.
func rewrite(dst []byte, inc, chal *listDoc, slots []merge.Slot) ([]byte, error) {
	dst = append(dst, inc.doc[:inc.span.Start]...)
	dst = append(dst, '[')
	for i, s := range slots {
		src, rank := inc, s.RankA
		if s.Team == merge.Challenger || (s.Team == merge.Fixed && s.RankA == 0) {
			src, rank = chal, s.RankB
		}
		if rank < 1 || int(rank) > len(src.elems) {
			return dst, fmt.Errorf("proxy: merged slot %d (%q) has no element at rank %d of the %s list", i, s.Item, rank, s.Team)
		}
		if i > 0 {
			dst = append(dst, ',')
		}
		e := src.elems[rank-1]
		dst = append(dst, src.doc[e.Start:e.End]...)
	}
	dst = append(dst, ']')
	return append(dst, inc.doc[inc.span.End:]...), nil
}

// soloSlots returns the provenance of a list served alone: every kept
// element in order, credited to team.
func soloSlots(d *listDoc, team merge.Team) []merge.Slot {
	if len(d.ids) == 0 {
		return nil
	}
	slots := make([]merge.Slot, len(d.ids))
	for i, id := range d.ids {
		slots[i] = merge.Slot{Item: id, Team: team}
		if team == merge.Challenger {
			slots[i].RankB = int32(i + 1)
		} else {
			slots[i].RankA = int32(i + 1)
		}
	}
	return slots
}
