package simulate

import (
	"bufio"
	"cmp"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
)

// maxLine bounds one line of a qrels or run file.
const maxLine = 1 << 20

// Qrels are graded judgements by topic and then document, as read from a
// TREC-style qrels file.
type Qrels map[string]map[string]int

// Ranking is a system's ranked documents by topic, as read from a TREC-style
// run file, best first.
type Ranking map[string][]string

// ReadQrels reads a TREC-style qrels file: one judgement per line, four
// fields separated by white space, "topic iteration document relevance"
// (the format trec_eval reads; recalled from memory of its documentation).
// The iteration field is ignored. Relevance is an integer: negative grades
// (some collections mark spam so) count as 0 and grades above MaxGrade as
// MaxGrade. Blank lines are skipped. name labels errors, which wrap
// ErrSyntax and give the line.
func ReadQrels(r io.Reader, name string) (Qrels, error) {
	q := Qrels{}
	err := eachLine(r, name, func(line int, f []string) error {
		if len(f) != 4 {
			return fmt.Errorf("want 4 fields (topic iteration document relevance), have %d", len(f))
		}
		g, err := strconv.Atoi(f[3])
		if err != nil {
			return fmt.Errorf("relevance %q is not an integer", f[3])
		}
		topic, doc := f[0], f[2]
		if q[topic] == nil {
			q[topic] = map[string]int{}
		}
		if _, dup := q[topic][doc]; dup {
			return fmt.Errorf("document %q judged twice for topic %q", doc, topic)
		}
		q[topic][doc] = clampGrade(g)
		return nil
	})
	return q, err
}

// ReadRun reads a TREC-style run file: one retrieved document per line,
// six fields separated by white space, "topic Q0 document rank score tag"
// (recalled from memory of trec_eval's documentation). Documents are
// ordered by score, highest first, as trec_eval orders them; ties are
// broken by the rank field and then the document name, so the order is
// total. The second and last fields are not checked. name labels errors,
// which wrap ErrSyntax and give the line.
func ReadRun(r io.Reader, name string) (Ranking, error) {
	type entry struct {
		doc   string
		rank  int
		score float64
	}
	byTopic := map[string][]entry{}
	seen := map[[2]string]bool{}
	err := eachLine(r, name, func(line int, f []string) error {
		if len(f) != 6 {
			return fmt.Errorf("want 6 fields (topic Q0 document rank score tag), have %d", len(f))
		}
		rank, err := strconv.Atoi(f[3])
		if err != nil {
			return fmt.Errorf("rank %q is not an integer", f[3])
		}
		score, err := strconv.ParseFloat(f[4], 64)
		if err != nil || math.IsNaN(score) {
			return fmt.Errorf("score %q is not a number", f[4])
		}
		if seen[[2]string{f[0], f[2]}] {
			return fmt.Errorf("document %q retrieved twice for topic %q", f[2], f[0])
		}
		seen[[2]string{f[0], f[2]}] = true
		byTopic[f[0]] = append(byTopic[f[0]], entry{f[2], rank, score})
		return nil
	})
	if err != nil {
		return nil, err
	}
	run := make(Ranking, len(byTopic))
	for topic, es := range byTopic {
		slices.SortFunc(es, func(x, y entry) int {
			return cmp.Or(cmp.Compare(y.score, x.score), cmp.Compare(x.rank, y.rank), strings.Compare(x.doc, y.doc))
		})
		docs := make([]string, len(es))
		for i, e := range es {
			docs[i] = e.doc
		}
		run[topic] = docs
	}
	return run, nil
}

// eachLine calls fn with the white-space separated fields of every
// non-blank line, wrapping its error with the file name and line number.
func eachLine(r io.Reader, name string, fn func(line int, fields []string) error) error {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 64*1024), maxLine)
	line := 0
	for sc.Scan() {
		line++
		f := strings.Fields(sc.Text())
		if len(f) == 0 {
			continue
		}
		if err := fn(line, f); err != nil {
			return fmt.Errorf("%s:%d: %w: %w", name, line, ErrSyntax, err)
		}
	}
	if err := sc.Err(); err != nil {
		return fmt.Errorf("%s:%d: %w: %w", name, line+1, ErrSyntax, err)
	}
	return nil
}

// Judge builds the queries to simulate on from judgements and two runs:
// every topic that both runs retrieve and that has at least one judged
// relevant document, in topic order, each run cut to its top k documents.
// It fails with ErrNoQueries when there is none.
func Judge(q Qrels, a, b Ranking, k int) ([]Query, error) {
	var topics []string
	for t := range q {
		if len(a[t]) > 0 && len(b[t]) > 0 && hasRelevant(q[t]) {
			topics = append(topics, t)
		}
	}
	if len(topics) == 0 {
		return nil, fmt.Errorf("simulate: %w: no topic is retrieved by both runs and judged relevant somewhere", ErrNoQueries)
	}
	slices.Sort(topics)
	out := make([]Query, len(topics))
	for i, t := range topics {
		out[i] = Query{ID: t, Grades: q[t], A: a[t][:min(k, len(a[t]))], B: b[t][:min(k, len(b[t]))]}
	}
	return out, nil
}

// hasRelevant reports whether any document has a positive grade.
func hasRelevant(grades map[string]int) bool {
	for _, g := range grades {
		if g > 0 {
			return true
		}
	}
	return false
}
