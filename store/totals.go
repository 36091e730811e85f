package store

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"

	"riffle/merge"
)

// Each experiment has a bucket under bucketExp holding its totals under
// keyTotals, a bucket of per-user outcome counts (8-byte hashed user ->
// four uvarints) and a bucket of per-minute counts (8-byte Unix minute ->
// uvarint interleaved, uvarint finalised with feedback) for the recent rate.
var (
	keyTotals     = []byte("totals")
	bucketUsers   = []byte("users")
	bucketMinutes = []byte("minutes")
)

// recentSpan is how far back the recent counts reach, and minuteKeep how
// long per-minute counts are kept.
const (
	recentSpan = RecentSpan
	minuteKeep = MinuteKeep
)

// RecentSpan is how far back an Aggregate's recent counts reach, and
// MinuteKeep how long a store keeps the per-minute counts behind them.
const (
	RecentSpan = time.Hour
	MinuteKeep = 2 * time.Hour
)

// Minute returns the Unix minute of t's nanoseconds: the key of the
// per-minute counts.
func Minute(nanos int64) int64 { return minuteOf(nanos) }

// totals is an experiment's running sums.
type totals struct {
	Impressions, Interleaved int64
	Outcomes                 [4]int64
	Start, Last              int64 // Unix nanoseconds of the first and newest impression
	PolicyAt                 int64 // time of the impression Policy came from
	Policy                   string
}

func (t *totals) encode() []byte {
	b := binary.AppendUvarint(nil, uint64(t.Impressions))
	b = binary.AppendUvarint(b, uint64(t.Interleaved))
	for _, n := range t.Outcomes {
		b = binary.AppendUvarint(b, uint64(n))
	}
	b = binary.AppendVarint(b, t.Start)
	b = binary.AppendVarint(b, t.Last)
	b = binary.AppendVarint(b, t.PolicyAt)
	return appendString(b, t.Policy)
}

func decodeTotals(name string, v []byte) (totals, error) {
	var t totals
	d := decoder{b: v}
	t.Impressions = int64(d.uvarint("impressions"))
	t.Interleaved = int64(d.uvarint("interleaved"))
	for i := range t.Outcomes {
		t.Outcomes[i] = int64(d.uvarint("outcomes"))
	}
	t.Start = d.varint("start")
	t.Last = d.varint("last")
	t.PolicyAt = d.varint("policy time")
	t.Policy = d.str("policy")
	if d.err != nil {
		return t, fmt.Errorf("experiment %q totals: %w", name, d.err)
	}
	return t, nil
}

// served is what one commit adds to an experiment's totals.
type served struct {
	t       totals
	minutes map[int64]uint64 // interleaved impressions per Unix minute
}

func (d *served) add(im *Impression) {
	n := im.Time.UnixNano()
	if d.t.Impressions == 0 || n < d.t.Start {
		d.t.Start = n
	}
	d.t.Last = max(d.t.Last, n)
	d.t.Impressions++
	if !im.Interleaved() {
		return
	}
	d.t.Interleaved++
	if n >= d.t.PolicyAt {
		d.t.PolicyAt, d.t.Policy = n, im.Policy
	}
	if d.minutes == nil {
		d.minutes = make(map[int64]uint64)
	}
	d.minutes[minuteOf(n)]++
}

func minuteOf(nanos int64) int64 { return nanos / int64(time.Minute) }

// expBucket returns the experiment's bucket, creating it when create is
// set (and telling the caller whether it was new).
func expBucket(tx *bolt.Tx, name string, create bool) (b *bolt.Bucket, isNew bool, err error) {
	root := tx.Bucket(bucketExp)
	if b = root.Bucket([]byte(name)); b != nil || !create {
		return b, false, nil
	}
	if b, err = root.CreateBucket([]byte(name)); err != nil {
		return nil, false, fmt.Errorf("create experiment %q: %w", name, err)
	}
	for _, sub := range [][]byte{bucketUsers, bucketMinutes} {
		if _, err := b.CreateBucket(sub); err != nil {
			return nil, false, fmt.Errorf("create experiment %q: %w", name, err)
		}
	}
	return b, true, nil
}

// addServed folds one commit's served impressions into the totals.
func (s *Store) addServed(tx *bolt.Tx, deltas map[string]*served) error {
	for name, d := range deltas {
		b, isNew, err := expBucket(tx, name, true)
		if err != nil {
			return err
		}
		if isNew {
			tx.OnCommit(func() { s.m.touchExperiment(name) })
		}
		t, err := decodeTotals(name, b.Get(keyTotals))
		if !isNew && err != nil {
			return err
		}
		if isNew || d.t.Start < t.Start {
			t.Start = d.t.Start
		}
		t.Last = max(t.Last, d.t.Last)
		t.Impressions += d.t.Impressions
		t.Interleaved += d.t.Interleaved
		if d.t.Policy != "" && d.t.PolicyAt >= t.PolicyAt {
			t.PolicyAt, t.Policy = d.t.PolicyAt, d.t.Policy
		}
		if err := b.Put(keyTotals, t.encode()); err != nil {
			return fmt.Errorf("experiment %q totals: %w", name, err)
		}
		for m, n := range d.minutes {
			if err := addMinute(b.Bucket(bucketMinutes), m, n, 0); err != nil {
				return fmt.Errorf("experiment %q: %w", name, err)
			}
		}
		if err := pruneMinutes(b.Bucket(bucketMinutes), t.Last); err != nil {
			return fmt.Errorf("experiment %q: %w", name, err)
		}
	}
	return nil
}

// pruneMinutes drops per-minute counts older than minuteKeep before last,
// the experiment's newest impression; usually there is nothing to drop.
func pruneMinutes(b *bolt.Bucket, last int64) error {
	limit := binary.BigEndian.AppendUint64(nil, uint64(minuteOf(last-int64(minuteKeep))))
	var old [][]byte
	c := b.Cursor()
	for k, _ := c.First(); k != nil && bytes.Compare(k, limit) < 0; k, _ = c.Next() {
		old = append(old, bytes.Clone(k))
	}
	for _, k := range old {
		if err := b.Delete(k); err != nil {
			return fmt.Errorf("prune minute counts: %w", err)
		}
	}
	return nil
}

// addMinute adds to the per-minute counts of minute m.
func addMinute(b *bolt.Bucket, m int64, interleaved, withFeedback uint64) error {
	k := binary.BigEndian.AppendUint64(nil, uint64(m))
	d := decoder{b: b.Get(k)}
	var cur [2]uint64
	if d.b != nil {
		cur[0], cur[1] = d.uvarint("minute"), d.uvarint("minute")
	}
	v := binary.AppendUvarint(nil, cur[0]+interleaved)
	v = binary.AppendUvarint(v, cur[1]+withFeedback)
	if err := b.Put(k, v); err != nil {
		return fmt.Errorf("minute counts: %w", err)
	}
	return nil
}

// addOutcome folds one finalised interleaved impression into its
// experiment's totals, its user's counts and its minute's counts.
func addOutcome(tx *bolt.Tx, im *Impression, o merge.Outcome) error {
	b, _, err := expBucket(tx, im.Experiment, false)
	if err != nil || b == nil {
		return fmt.Errorf("experiment %q of impression %s: %w", im.Experiment, im.ID, ErrCorrupt)
	}
	t, err := decodeTotals(im.Experiment, b.Get(keyTotals))
	if err != nil {
		return err
	}
	t.Outcomes[o]++
	if err := b.Put(keyTotals, t.encode()); err != nil {
		return fmt.Errorf("experiment %q totals: %w", im.Experiment, err)
	}
	if im.User != 0 {
		if err := addUser(b.Bucket(bucketUsers), im.User, o); err != nil {
			return fmt.Errorf("experiment %q: %w", im.Experiment, err)
		}
	}
	if o == merge.NoFeedback {
		return nil
	}
	return addMinute(b.Bucket(bucketMinutes), minuteOf(im.Time.UnixNano()), 0, 1)
}

func addUser(b *bolt.Bucket, user uint64, o merge.Outcome) error {
	k := binary.BigEndian.AppendUint64(nil, user)
	c, err := decodeUser(b.Get(k))
	if err != nil {
		return fmt.Errorf("user %016x: %w", user, err)
	}
	c[o]++
	v := make([]byte, 0, 8)
	for _, n := range c {
		v = binary.AppendUvarint(v, uint64(n))
	}
	if err := b.Put(k, v); err != nil {
		return fmt.Errorf("user %016x: %w", user, err)
	}
	return nil
}

func decodeUser(v []byte) ([4]int64, error) {
	var c [4]int64
	if v == nil {
		return c, nil
	}
	d := decoder{b: v}
	for i := range c {
		c[i] = int64(d.uvarint("user counts"))
	}
	return c, d.err
}

// putNanos writes t's Unix nanoseconds big-endian into k[:8].
func putNanos(k []byte, t time.Time) { binary.BigEndian.PutUint64(k, uint64(t.UnixNano())) }
