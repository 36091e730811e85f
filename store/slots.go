package store

import (
	"encoding/binary"
	"fmt"
	"math"

	"riffle/merge"
)

// Slot list layout, the compact per-slot record a shared database keeps in
// one column:
//
//	flags   1 byte: bit 0 slots carry PA/PB
//	count   uvarint
//	per slot: uvarint length + item, uvarint team (a small integer, so more
//	than two rankers fit), uvarint RankA, uvarint RankB, and with bit 0
//	PA, PB as 4-byte IEEE 754 each
//
// The 10 slots of TestImpressionSize take 1 + 1 + 10*13 = 132 bytes here.
const slotsProbs = 1 << 0

// AppendSlots appends the encoding of slots to b.
func AppendSlots(b []byte, slots []merge.Slot) []byte {
	var flags byte
	for _, s := range slots {
		if s.PA != 0 || s.PB != 0 {
			flags |= slotsProbs
			break
		}
	}
	b = append(b, flags)
	b = binary.AppendUvarint(b, uint64(len(slots)))
	for _, s := range slots {
		b = appendString(b, s.Item)
		b = binary.AppendUvarint(b, uint64(s.Team))
		b = binary.AppendUvarint(b, uint64(uint32(s.RankA)))
		b = binary.AppendUvarint(b, uint64(uint32(s.RankB)))
		if flags&slotsProbs != 0 {
			b = binary.BigEndian.AppendUint32(b, math.Float32bits(s.PA))
			b = binary.BigEndian.AppendUint32(b, math.Float32bits(s.PB))
		}
	}
	return b
}

// DecodeSlots decodes what AppendSlots wrote; a damaged value gives an
// error wrapping ErrCorrupt.
func DecodeSlots(v []byte) ([]merge.Slot, error) {
	if len(v) == 0 {
		return nil, fmt.Errorf("slots: %w: empty", ErrCorrupt)
	}
	flags := v[0]
	d := decoder{b: v[1:]}
	n := d.uvarint("slot count")
	if n > uint64(len(d.b)) { // every slot takes several bytes: bounds the allocation
		return nil, fmt.Errorf("slots: %w: %d slots in %d bytes", ErrCorrupt, n, len(d.b))
	}
	var slots []merge.Slot
	if n > 0 {
		slots = make([]merge.Slot, n)
	}
	for i := range slots {
		s := &slots[i]
		s.Item = d.str("slot item")
		team := d.uvarint("slot team")
		if team > math.MaxUint8 {
			d.fail("slot team")
		}
		s.Team = merge.Team(team)
		s.RankA = int32(uint32(d.uvarint("slot rank")))
		s.RankB = int32(uint32(d.uvarint("slot rank")))
		if flags&slotsProbs != 0 {
			s.PA = math.Float32frombits(d.u32("slot probability"))
			s.PB = math.Float32frombits(d.u32("slot probability"))
		}
	}
	if d.err == nil && len(d.b) != 0 {
		d.fail("slots length")
	}
	if d.err != nil {
		return nil, fmt.Errorf("slots: %w", d.err)
	}
	return slots, nil
}
