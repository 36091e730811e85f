package store

import (
	"errors"
	"reflect"
	"testing"

	"riffle/merge"
)

func TestSlotsRoundTrip(t *testing.T) {
	cases := map[string][]merge.Slot{
		"none":         nil,
		"team draft":   {{Item: "rake", Team: merge.Incumbent, RankA: 1, RankB: 2}, {Item: "hoe", Team: merge.Challenger, RankB: 1}},
		"probability":  {{Item: "trowel", Team: merge.Challenger, RankA: 3, RankB: 1, PA: 0.25, PB: 0.75}},
		"third ranker": {{Item: "shears", Team: merge.Team(2), RankA: 1}},
	}
	for name, slots := range cases {
		got, err := DecodeSlots(AppendSlots(nil, slots))
		if err != nil || !reflect.DeepEqual(got, slots) {
			t.Errorf("%s: round trip = %+v, %v; want %+v", name, got, err, slots)
		}
	}
	var ten []merge.Slot
	for i := range 10 {
		ten = append(ten, merge.Slot{Item: "sku-1000" + string(rune('0'+i)), Team: merge.Team(i % 2), RankA: int32(i/2 + 1), RankB: int32(i/2 + 1)})
	}
	// From the layout: flags 1 + count 1, then per slot item 1+9, team 1,
	// two ranks 1+1.
	if got, want := len(AppendSlots(nil, ten)), 1+1+10*13; got != want {
		t.Errorf("10 slots encode to %d bytes, want %d", got, want)
	}
}

func TestDecodeSlotsDamaged(t *testing.T) {
	for name, v := range map[string][]byte{
		"empty":     nil,
		"truncated": AppendSlots(nil, []merge.Slot{{Item: "rake"}})[:4],
		"trailing":  append(AppendSlots(nil, []merge.Slot{{Item: "rake"}}), 0),
		"huge":      {0, 0xff, 0xff, 0x03},
		"team 300":  {0, 1, 1, 'x', 0xac, 0x02, 0, 0},
	} {
		if _, err := DecodeSlots(v); !errors.Is(err, ErrCorrupt) {
			t.Errorf("%s: DecodeSlots(%x) = %v, want ErrCorrupt", name, v, err)
		}
	}
}

func FuzzDecodeSlots(f *testing.F) {
	f.Add(AppendSlots(nil, []merge.Slot{{Item: "rake", Team: merge.Challenger, RankA: 2, PA: 0.5}}))
	f.Add([]byte{0, 0})
	f.Fuzz(func(t *testing.T, v []byte) {
		slots, err := DecodeSlots(v)
		if err != nil {
			return
		}
		again, err := DecodeSlots(AppendSlots(nil, slots))
		if err != nil || !reflect.DeepEqual(again, slots) {
			t.Fatalf("re-encoding %+v: %+v, %v", slots, again, err)
		}
	})
}
