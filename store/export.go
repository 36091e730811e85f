package store

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"time"

	bolt "go.etcd.io/bbolt"

	"riffle/merge"
)

// exportLine is one impression in Export's NDJSON.
type exportLine struct {
	Impression string        `json:"impression"`
	Time       string        `json:"time"`
	Experiment string        `json:"experiment"`
	User       string        `json:"user,omitempty"` // 16 hex digits; absent without a user key
	Policy     string        `json:"policy,omitempty"`
	Seed       string        `json:"seed"` // 16 hex digits, so no tool rounds it
	Fallback   string        `json:"fallback,omitempty"`
	Slots      []exportSlot  `json:"slots"`
	Events     []exportEvent `json:"events"`
	Outcome    string        `json:"outcome"` // "open" until final
	Score      *exportScore  `json:"score,omitempty"`
	// Request is the kept request (experiment.keep_requests) of an
	// interleaved impression; absent when none was kept.
	Request *ExportRequest `json:"request,omitempty"`
}

// ExportRequest is a kept request in Export's NDJSON, as riffle replay
// reads it back. Body is base64 (encoding/json's form of bytes), so any
// body survives the round trip.
type ExportRequest struct {
	Route   string      `json:"route"`
	Method  string      `json:"method"`
	Path    string      `json:"path"`
	Query   string      `json:"query,omitempty"`
	Header  [][2]string `json:"header,omitempty"`
	Body    []byte      `json:"body,omitempty"`
	Lengths [2]int32    `json:"list_lengths"` // incumbent's, challenger's distinct items
}

type exportSlot struct {
	Item           string  `json:"item"`
	Team           string  `json:"team"`
	RankIncumbent  int32   `json:"rank_incumbent,omitempty"`
	RankChallenger int32   `json:"rank_challenger,omitempty"`
	PIncumbent     float32 `json:"p_incumbent,omitempty"`
	PChallenger    float32 `json:"p_challenger,omitempty"`
}

type exportEvent struct {
	Item  string `json:"item"`
	Event string `json:"event"`
	Time  string `json:"time"`
	Key   string `json:"key,omitempty"`
	Slot  int    `json:"slot"` // 1-based position of the item
}

type exportScore struct {
	Incumbent  float64 `json:"incumbent"`
	Challenger float64 `json:"challenger"`
}

// Export writes every impression served at or after since (zero: all) to
// w as NDJSON, oldest first, one line per impression with its slots, its
// events and its outcome ("challenger", "incumbent", "tie", "none", or
// "open" while its window is open). It reads one consistent snapshot;
// a cancelled ctx stops it between lines.
func (s *Store) Export(ctx context.Context, w io.Writer, since time.Time) error {
	bw := bufio.NewWriter(w)
	err := s.view(func(tx *bolt.Tx) error {
		c := tx.Bucket(bucketImp).Cursor()
		k, v := c.First()
		if !since.IsZero() {
			from := make([]byte, 8)
			putNanos(from, since)
			k, v = c.Seek(from)
		}
		for ; k != nil; k, v = c.Next() {
			if err := ctx.Err(); err != nil {
				return err
			}
			rec, err := decodeRecord(k, v)
			if err != nil {
				return err
			}
			if rec.Time.Before(since) {
				continue
			}
			line, err := exportOf(tx, &rec)
			if err != nil {
				return err
			}
			b, err := json.Marshal(line)
			if err != nil {
				return fmt.Errorf("impression %s: %w", rec.ID, err)
			}
			if _, err := bw.Write(append(b, '\n')); err != nil {
				return err
			}
		}
		return nil
	})
	if err == nil {
		err = bw.Flush()
	}
	if err != nil {
		return fmt.Errorf("store %s: export: %w", s.path, err)
	}
	return nil
}

func exportOf(tx *bolt.Tx, rec *record) (*exportLine, error) {
	var evs []Event
	err := eachEvent(tx, rec.ID, func(_ []byte, ev Event) error {
		evs = append(evs, ev)
		return nil
	})
	if err != nil {
		return nil, err
	}
	var fin *Final
	if rec.Final {
		fin = &Final{Outcome: rec.Outcome, Score: rec.Score}
	}
	return exportLineOf(&rec.Impression, evs, fin), nil
}

// Final is a finalised impression's result.
type Final struct {
	Outcome merge.Outcome
	Score   merge.Score
}

// AppendExportLine appends Export's NDJSON line for im (with its events,
// in the order received, and its result; nil fin means still open) and a
// newline to b. Every store's Export writes through it, so the format is
// one.
func AppendExportLine(b []byte, im *Impression, evs []Event, fin *Final) ([]byte, error) {
	line, err := json.Marshal(exportLineOf(im, evs, fin))
	if err != nil {
		return b, fmt.Errorf("impression %s: %w", im.ID, err)
	}
	return append(append(b, line...), '\n'), nil
}

func exportLineOf(im *Impression, evs []Event, fin *Final) *exportLine {
	l := &exportLine{
		Impression: im.ID.String(),
		Time:       im.Time.Format(time.RFC3339Nano),
		Experiment: im.Experiment,
		Policy:     im.Policy,
		Seed:       hex16(im.Seed),
		Fallback:   im.Fallback,
		Slots:      make([]exportSlot, len(im.Slots)),
		Events:     make([]exportEvent, 0, len(evs)),
		Outcome:    "open",
	}
	if im.User != 0 {
		l.User = hex16(im.User)
	}
	if q := im.Request; q != nil {
		l.Request = &ExportRequest{Route: q.Route, Method: q.Method, Path: q.Path, Query: q.Query,
			Header: q.Header, Body: q.Body, Lengths: q.Lengths}
	}
	for i, s := range im.Slots {
		l.Slots[i] = exportSlot{Item: s.Item, Team: s.Team.String(), RankIncumbent: s.RankA,
			RankChallenger: s.RankB, PIncumbent: s.PA, PChallenger: s.PB}
	}
	for _, ev := range evs {
		l.Events = append(l.Events, exportEvent{Item: ev.Item, Event: ev.Type,
			Time: ev.Time.Format(time.RFC3339Nano), Key: ev.Key, Slot: slotOf(im.Slots, ev.Item) + 1})
	}
	if fin != nil {
		l.Outcome = fin.Outcome.String()
		if im.Interleaved() {
			l.Score = &exportScore{Incumbent: fin.Score.Incumbent, Challenger: fin.Score.Challenger}
		}
	}
	return l
}

func hex16(v uint64) string { return fmt.Sprintf("%016x", v) }
