package feedback

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strings"
	"time"

	"riffle/store"
)

// wireEvent is one event as clients send it.
type wireEvent struct {
	Impression *string         `json:"impression"`
	Item       json.RawMessage `json:"item"`
	Event      *string         `json:"event"`
	Time       *string         `json:"time"`
	Key        *string         `json:"key"`
}

// parseError is a line the parser refused, with its metric reason:
// "malformed" when the line is not one JSON object, "invalid" when a field
// is missing or wrong.
type parseError struct {
	reason string
	msg    string
}

func (e *parseError) Error() string { return e.msg }

func malformed(format string, a ...any) error {
	return &parseError{reason: reasonMalformed, msg: fmt.Sprintf(format, a...)}
}

func invalid(format string, a ...any) error {
	return &parseError{reason: reasonInvalid, msg: fmt.Sprintf(format, a...)}
}

// line is one parsed line of a request body.
type line struct {
	n   int // 1-based line number in the body
	ev  store.Event
	err error
}

// parseBody splits body into events as scanBody does and returns them
// all; the tests and the fuzz target use it.
func parseBody(body []byte, now time.Time) []line {
	var lines []line
	_ = scanBody(bytes.NewReader(body), now, func(l line) { lines = append(lines, l) })
	return lines
}

// parseLine parses one JSON event object. Unknown fields are refused, so
// a misspelt field name is reported rather than silently ignored.
func parseLine(b []byte, now time.Time) (store.Event, error) {
	if len(b) == 0 || b[0] != '{' {
		if len(b) == 0 {
			return store.Event{}, malformed("malformed JSON: empty line")
		}
		if !json.Valid(b) {
			var v any
			err := json.Unmarshal(b, &v)
			return store.Event{}, malformed("malformed JSON: %v", err)
		}
		return store.Event{}, malformed("malformed JSON: want an object, have %s", jsonKind(b[0]))
	}
	var w wireEvent
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&w); err != nil {
		var ute *json.UnmarshalTypeError
		if errors.As(err, &ute) {
			return store.Event{}, invalid("field %q: want a %s, have a JSON %s", ute.Field, wantType(ute.Field), ute.Value)
		}
		if msg, ok := strings.CutPrefix(err.Error(), "json: unknown field"); ok {
			return store.Event{}, invalid("unknown field%s (fields: impression, item, event, time, key)", msg)
		}
		return store.Event{}, malformed("malformed JSON: %v", err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return store.Event{}, malformed("malformed JSON: more than one value on the line")
	}
	return toEvent(&w, now)
}

// toEvent checks the fields of a decoded event.
func toEvent(w *wireEvent, now time.Time) (store.Event, error) {
	var ev store.Event
	if w.Impression == nil || *w.Impression == "" {
		return ev, invalid(`missing "impression"`)
	}
	id, err := store.ParseID(*w.Impression)
	if err != nil {
		return ev, invalid("%v", err)
	}
	ev.Impression = id
	if ev.Item, err = itemOf(w.Item); err != nil {
		return ev, err
	}
	if w.Event == nil || *w.Event == "" {
		return ev, invalid(`missing "event"`)
	}
	ev.Type = *w.Event
	ev.Time = now
	if w.Time != nil {
		if ev.Time, err = parseTime(*w.Time); err != nil {
			return ev, invalid(`"time" %q is not an RFC 3339 time (e.g. 2026-04-01T12:00:00Z)`, *w.Time)
		}
		if ev.Time.IsZero() {
			return ev, invalid(`"time" %q is the zero time, a missing time: send the event's time, or no "time" to have it stamped on receipt`, *w.Time)
		}
	}
	if w.Key != nil {
		ev.Key = *w.Key
	}
	return ev, nil
}

// parseTime parses an RFC 3339 date-time. A leap second (second 60, which
// RFC 3339 section 5.6 allows and Go's time cannot hold) is read as the
// first instant of the next second.
func parseTime(s string) (time.Time, error) {
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil && len(s) > 19 && s[17:19] == "60" {
		if t, err2 := time.Parse(time.RFC3339Nano, s[:17]+"59"+s[19:]); err2 == nil {
			return t.Truncate(time.Second).Add(time.Second), nil
		}
	}
	return t, err
}

// itemOf reads the item: a JSON string, or a number taken as its text (so
// numeric ids in a backend's response can be echoed back as they are).
func itemOf(raw json.RawMessage) (string, error) {
	if len(raw) == 0 || string(raw) == "null" {
		return "", invalid(`missing "item"`)
	}
	switch c := raw[0]; {
	case c == '"':
		var s string
		if err := json.Unmarshal(raw, &s); err != nil {
			return "", malformed("malformed JSON in \"item\": %v", err)
		}
		if s == "" {
			return "", invalid(`missing "item"`)
		}
		return s, nil
	case c == '-' || (c >= '0' && c <= '9'):
		return string(raw), nil
	}
	return "", invalid(`"item": want a string or a number, have %s`, jsonKind(raw[0]))
}

func wantType(field string) string {
	if field == "item" {
		return "string or number"
	}
	return "string"
}

func jsonKind(c byte) string {
	switch c {
	case '[':
		return "array"
	case '{':
		return "object"
	case '"':
		return "string"
	case 't', 'f':
		return "boolean"
	case 'n':
		return "null"
	}
	return "number"
}

// clampSkew applies the allowed clock skew to an event stamped before its
// impression (whose time its id carries): within skew it counts as at the
// impression's time, further before it is refused, saying by how much.
func clampSkew(ev *store.Event, skew time.Duration) error {
	served := ev.Impression.Time()
	early := served.Sub(ev.Time)
	switch {
	case early <= 0:
		return nil
	case early <= skew:
		ev.Time = served
		return nil
	}
	return &parseError{reason: reasonTooEarly, msg: fmt.Sprintf(
		"%s at %s is %v before its impression (served at %s), more than the allowed clock skew of %v (feedback.clock_skew): %v",
		ev.Type, ev.Time.UTC().Format(time.RFC3339Nano), early, served.UTC().Format(time.RFC3339Nano), skew, store.ErrTooEarly)}
}
