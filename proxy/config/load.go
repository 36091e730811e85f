package config

import (
	"errors"
	"fmt"
	"os"
	"reflect"
	"slices"
	"strings"

	"github.com/goccy/go-yaml"
	"github.com/goccy/go-yaml/ast"
	"github.com/goccy/go-yaml/parser"
)

// Load reads the file at path and parses it as Parse does, naming path in
// every problem.
func Load(path string) (*Config, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("config: read %s: %w", path, err)
	}
	return Parse(data, path)
}

// Parse decodes one YAML document strictly (unknown keys and wrongly typed
// values are errors), fills the documented defaults and validates the
// result. source names the document's origin in errors. On failure the
// error is an *Error listing every problem found, each with its key path and
// line.
func Parse(data []byte, source string) (*Config, error) {
	c, where, problems := decode(data)
	if c != nil {
		// Unknown keys do not stop the value checks: check reports
		// every problem of a file at once.
		c.ApplyDefaults()
		problems = append(problems, append(c.problems(), required(c, where)...)...)
	}
	if len(problems) > 0 {
		locate(problems, where.lines)
		sortByLine(problems)
		return nil, &Error{Source: source, Problems: problems}
	}
	return c, nil
}

// decode parses data into a Config without defaults or validation. The
// schema it returns knows where each key path is written, for locating
// later problems.
func decode(data []byte) (*Config, *schema, []Problem) {
	s := newSchema()
	file, err := parser.ParseBytes(data, 0)
	if err != nil {
		return nil, s, []Problem{yamlProblem(err, nil)}
	}
	var bodies []ast.Node
	for _, d := range file.Docs {
		if d.Body != nil {
			bodies = append(bodies, d.Body)
		}
	}
	c := &Config{}
	switch len(bodies) {
	case 0:
		return c, s, nil // an empty file: every default
	case 1:
	default:
		return nil, s, []Problem{{
			Message: fmt.Sprintf("the file holds %d YAML documents; riffle reads exactly one", len(bodies)),
			Line:    line(bodies[1]),
		}}
	}
	s.walk(bodies[0], reflect.TypeFor[Config](), "")
	if len(s.problems) > 0 {
		// Decode the rest leniently when only unknown keys are wrong, so
		// that the values can still be checked; a wrongly typed value
		// stops here.
		if onlyUnknownKeys(s.problems) && yaml.NodeToValue(bodies[0], c) == nil {
			return c, s, s.problems
		}
		return nil, s, s.problems
	}
	if err := yaml.NodeToValue(bodies[0], c, yaml.DisallowUnknownField()); err != nil {
		return nil, s, []Problem{yamlProblem(err, s.at)}
	}
	return c, s, nil
}

// onlyUnknownKeys reports whether every problem is an unknown key, the one
// kind a lenient decode can step over without guessing at a value.
func onlyUnknownKeys(ps []Problem) bool {
	for _, p := range ps {
		if !strings.HasPrefix(p.Message, "unknown key ") {
			return false
		}
	}
	return true
}

// yamlProblem turns a parser or decoder error into a Problem, finding the
// key path from the error's position when at knows it.
func yamlProblem(err error, at map[[2]int]string) Problem {
	var ye yaml.Error
	if !errors.As(err, &ye) {
		return Problem{Message: "invalid YAML: " + err.Error()}
	}
	p := Problem{Message: "invalid YAML: " + ye.GetMessage()}
	if tk := ye.GetToken(); tk != nil && tk.Position != nil {
		p.Line = tk.Position.Line
		if path, ok := at[[2]int{tk.Position.Line, tk.Position.Column}]; ok {
			p.Path, p.Message = path, ye.GetMessage()
		}
	}
	return p
}

// locate fills each problem's line from the nearest enclosing key path that
// is written in the file.
func locate(problems []Problem, lines map[string]int) {
	for i := range problems {
		if problems[i].Line > 0 {
			continue
		}
		for path := problems[i].Path; path != ""; path = parent(path) {
			if l, ok := lines[path]; ok {
				problems[i].Line = l
				break
			}
		}
	}
}

// sortByLine orders problems as they appear in the file, keeping the order
// of the checks within a line; problems with no line go last.
func sortByLine(ps []Problem) {
	slices.SortStableFunc(ps, func(a, b Problem) int {
		switch {
		case a.Line == b.Line:
			return 0
		case a.Line == 0:
			return 1
		case b.Line == 0:
			return -1
		}
		return a.Line - b.Line
	})
}

// parent strips the last segment of a key path: "a.b[2]" -> "a.b" -> "a".
func parent(path string) string {
	if strings.HasSuffix(path, "]") {
		if i := strings.LastIndexByte(path, '['); i >= 0 {
			return path[:i]
		}
	}
	if i := strings.LastIndexByte(path, '.'); i >= 0 {
		return path[:i]
	}
	return ""
}

// required reports keys that must be written when their parent is: a
// schedule stage's after and ramp, whose zero values would otherwise pass
// silently. Stages written through an alias are left to validation.
func required(c *Config, where *schema) []Problem {
	var ps []Problem
	for i := range c.Experiment.Schedule {
		stage := fmt.Sprintf("experiment.schedule[%d]", i)
		if !where.maps[stage] {
			continue
		}
		for _, key := range []string{"after", "ramp"} {
			path := stage + "." + key
			if _, ok := where.lines[path]; !ok {
				ps = append(ps, Problem{Path: path, Message: "is required in every stage"})
			}
		}
	}
	return ps
}
