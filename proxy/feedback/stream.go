package feedback

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"io"
	"time"
)

// readChunk is the line reader's buffer: a line longer than this is
// gathered in a buffer of its own, up to the body limit.
const readChunk = 64 << 10

// scanBody reads r (the request body, already capped at the body limit)
// and calls emit for each line as soon as it is parsed, so a request
// holds one line at a time rather than its whole body and every error.
// The one exception is a single JSON object spread over several lines
// (pretty-printed), which is gathered whole: a first line that opens an
// object it does not close makes the rest of the body one candidate, and
// if that whole is not one valid object its lines are parsed one by one,
// as NDJSON. Blank lines are skipped; an event without a time gets now.
// It returns the reader's error, if any.
func scanBody(r io.Reader, now time.Time, emit func(line)) error {
	br := bufio.NewReaderSize(r, readChunk)
	var long []byte
	for n := 1; ; n++ {
		raw, err := readLine(br, &long)
		if err != nil && err != io.EOF {
			return err
		}
		raw = bytes.TrimSpace(raw)
		if len(raw) > 0 {
			if raw[0] == '{' && !json.Valid(raw) && err != io.EOF {
				return scanObject(br, raw, n, now, emit)
			}
			ev, perr := parseLine(raw, now)
			emit(line{n: n, ev: ev, err: perr})
		}
		if err == io.EOF {
			return nil
		}
	}
}

// scanObject handles a body whose first line n opens an object: it reads
// the rest of the body and parses it as one event when it is one valid
// object, and line by line otherwise.
func scanObject(br *bufio.Reader, first []byte, n int, now time.Time, emit func(line)) error {
	rest, err := io.ReadAll(br)
	if err != nil {
		return err
	}
	whole := append(append(append([]byte(nil), first...), '\n'), rest...)
	if trimmed := bytes.TrimSpace(whole); json.Valid(trimmed) {
		ev, perr := parseLine(trimmed, now)
		emit(line{n: n, ev: ev, err: perr})
		return nil
	}
	for i, raw := range bytes.Split(whole, []byte("\n")) {
		if raw = bytes.TrimSpace(raw); len(raw) > 0 {
			ev, perr := parseLine(raw, now)
			emit(line{n: n + i, ev: ev, err: perr})
		}
	}
	return nil
}

// readLine returns the next line without its newline, and io.EOF with the
// last one. A line longer than the reader's buffer is gathered in *long,
// which is reused between lines.
func readLine(br *bufio.Reader, long *[]byte) ([]byte, error) {
	b, err := br.ReadSlice('\n')
	if !errors.Is(err, bufio.ErrBufferFull) {
		return bytes.TrimSuffix(b, []byte("\n")), err
	}
	*long = append((*long)[:0], b...)
	for errors.Is(err, bufio.ErrBufferFull) {
		b, err = br.ReadSlice('\n')
		*long = append(*long, b...)
	}
	return bytes.TrimSuffix(*long, []byte("\n")), err
}
