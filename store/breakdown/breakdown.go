// Package breakdown counts, from a store's export stream (the NDJSON of
// store.Export, which every store provides), what the store's aggregates do
// not keep: clicks and purchases by slot position for each model's slots,
// outcomes per day, events by type, impressions still inside their
// attribution window, and the order in which outcomes arrived, from which
// Timeline computes Delta over time.
//
// Read is a pure function of its input; a Breakdown is not safe for
// concurrent mutation.
package breakdown

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"slices"
	"strconv"
	"strings"
	"time"

	"riffle/merge"
	"riffle/store"
)

// Teams whose slots are counted by position, as the export names them.
const (
	Incumbent  = "incumbent"
	Challenger = "challenger"
)

// Position counts one model's slots at one position of interleaved lists.
type Position struct {
	// Shown counts the slots this model supplied at this position.
	Shown int64 `json:"shown"`
	// Events counts feedback events on those slots by event type.
	Events map[string]int64 `json:"events"`
}

// Day counts the impressions served on one UTC day by outcome.
type Day struct {
	// Date is the day, as 2006-01-02 in UTC.
	Date string `json:"date"`
	// Outcomes counts interleaved impressions by outcome: "challenger",
	// "incumbent", "tie", "none" (no feedback) and "open" (window still open).
	Outcomes map[string]int64 `json:"outcomes"`
}

// Final is one finalised interleaved impression, for Timeline.
type Final struct {
	// ID is the impression's id; ids sort by the time they were made.
	ID store.ID
	// Time is when the impression was served.
	Time time.Time
	// User is the hashed user key; 0 when the impression had none.
	User uint64
	// Outcome is the impression's outcome.
	Outcome merge.Outcome
}

// Breakdown is what Read counts.
type Breakdown struct {
	// Experiment is the experiment counted.
	Experiment string `json:"experiment"`
	// Impressions and Interleaved count the impressions read.
	Impressions int64 `json:"impressions"`
	Interleaved int64 `json:"interleaved"`
	// Open counts interleaved impressions still inside their window.
	Open int64 `json:"open"`
	// Positions holds, for Incumbent and Challenger, one entry per slot
	// position (index 0 is the first slot).
	Positions map[string][]Position `json:"positions"`
	// Days are the UTC days with impressions, oldest first.
	Days []Day `json:"days"`
	// Events counts every feedback event read by type.
	Events map[string]int64 `json:"events"`
	// Finals are the finalised interleaved impressions, oldest first.
	Finals []Final `json:"-"`
}

// line is the part of an export line Read needs.
type line struct {
	Impression string `json:"impression"`
	Time       string `json:"time"`
	Experiment string `json:"experiment"`
	User       string `json:"user"`
	Fallback   string `json:"fallback"`
	Slots      []struct {
		Team string `json:"team"`
	} `json:"slots"`
	Events []struct {
		Event string `json:"event"`
		Slot  int    `json:"slot"`
	} `json:"events"`
	Outcome string `json:"outcome"`
}

// ErrLine is wrapped by Read's errors for a line it cannot use.
var ErrLine = errors.New("bad export line")

// Read counts the export lines of experiment read from r (lines of other
// experiments are skipped). A line that is not an export line gives an
// error wrapping ErrLine that names its line number.
func Read(r io.Reader, experiment string) (*Breakdown, error) {
	b := &Breakdown{Experiment: experiment, Events: map[string]int64{},
		Positions: map[string][]Position{Incumbent: nil, Challenger: nil}}
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 64<<10), 16<<20)
	for n := 1; sc.Scan(); n++ {
		if len(bytes.TrimSpace(sc.Bytes())) == 0 {
			continue
		}
		var l line
		if err := json.Unmarshal(sc.Bytes(), &l); err != nil {
			return nil, fmt.Errorf("breakdown: line %d: %w: %v", n, ErrLine, err)
		}
		if l.Experiment != experiment {
			continue
		}
		if err := b.add(&l); err != nil {
			return nil, fmt.Errorf("breakdown: line %d: %w: %v", n, ErrLine, err)
		}
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("breakdown: read export: %w", err)
	}
	return b, nil
}

// add counts one impression.
func (b *Breakdown) add(l *line) error {
	t, err := time.Parse(time.RFC3339Nano, l.Time)
	if err != nil {
		return fmt.Errorf("time %q: %v", l.Time, err)
	}
	b.Impressions++
	for _, ev := range l.Events {
		b.Events[ev.Event]++
	}
	if l.Fallback != "" {
		return nil
	}
	b.Interleaved++
	b.day(t.UTC().Format(time.DateOnly))[l.Outcome]++
	for i, s := range l.Slots {
		if s.Team == Incumbent || s.Team == Challenger {
			b.position(s.Team, i).Shown++
		}
	}
	for _, ev := range l.Events {
		if ev.Slot >= 1 && ev.Slot <= len(l.Slots) {
			if team := l.Slots[ev.Slot-1].Team; team == Incumbent || team == Challenger {
				b.position(team, ev.Slot-1).Events[ev.Event]++
			}
		}
	}
	return b.final(l, t)
}

// final notes the outcome of a finalised impression, or counts it open.
func (b *Breakdown) final(l *line, t time.Time) error {
	o, ok := outcomes[l.Outcome]
	if !ok {
		if l.Outcome != "open" {
			return fmt.Errorf("outcome %q: want challenger, incumbent, tie, none or open", l.Outcome)
		}
		b.Open++
		return nil
	}
	var user uint64
	if l.User != "" {
		u, err := strconv.ParseUint(l.User, 16, 64)
		if err != nil {
			return fmt.Errorf("user %q: want 16 hex digits", l.User)
		}
		user = u
	}
	id, err := store.ParseID(l.Impression)
	if err != nil {
		return fmt.Errorf("impression %q: %v", l.Impression, err)
	}
	b.Finals = append(b.Finals, Final{ID: id, Time: t, User: user, Outcome: o})
	return nil
}

var outcomes = map[string]merge.Outcome{
	"none": merge.NoFeedback, "incumbent": merge.IncumbentWin, "challenger": merge.ChallengerWin, "tie": merge.Tie,
}

// day returns the outcome counts of date, adding the day when it is new.
// Export lines come oldest first, so a new day is the last one.
func (b *Breakdown) day(date string) map[string]int64 {
	if n := len(b.Days); n > 0 && b.Days[n-1].Date == date {
		return b.Days[n-1].Outcomes
	}
	for i := range b.Days {
		if b.Days[i].Date == date {
			return b.Days[i].Outcomes
		}
	}
	b.Days = append(b.Days, Day{Date: date, Outcomes: map[string]int64{}})
	return b.Days[len(b.Days)-1].Outcomes
}

// position returns team's counts at slot index i, growing the list.
func (b *Breakdown) position(team string, i int) *Position {
	ps := b.Positions[team]
	for len(ps) <= i {
		ps = append(ps, Position{Events: map[string]int64{}})
	}
	b.Positions[team] = ps
	return &ps[i]
}

// Rate is the share of a model's slots at a position that got an event of
// the type; 0 when none were shown.
func (p Position) Rate(event string) float64 {
	if p.Shown == 0 {
		return 0
	}
	return float64(p.Events[event]) / float64(p.Shown)
}

// Add folds o into b, as when reading the stores of several sidecars; the
// finals stay in the order one store holding all the impressions would
// export them (by id).
func (b *Breakdown) Add(o *Breakdown) {
	b.Impressions += o.Impressions
	b.Interleaved += o.Interleaved
	b.Open += o.Open
	for t, n := range o.Events {
		b.Events[t] += n
	}
	for team, ps := range o.Positions {
		for i, p := range ps {
			mine := b.position(team, i)
			mine.Shown += p.Shown
			for t, n := range p.Events {
				mine.Events[t] += n
			}
		}
	}
	for _, d := range o.Days {
		for k, n := range d.Outcomes {
			b.day(d.Date)[k] += n
		}
	}
	slices.SortFunc(b.Days, func(x, y Day) int { return strings.Compare(x.Date, y.Date) })
	b.Finals = append(b.Finals, o.Finals...)
	slices.SortFunc(b.Finals, func(x, y Final) int { return bytes.Compare(x.ID[:], y.ID[:]) })
}
