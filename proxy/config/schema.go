package config

import (
	"fmt"
	"math"
	"reflect"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/goccy/go-yaml/ast"
)

var (
	durationType = reflect.TypeFor[time.Duration]()
	timeType     = reflect.TypeFor[time.Time]()
)

// schema walks a YAML syntax tree beside the Go type it will be decoded
// into. It reports every unknown key and every value of the wrong kind at
// once, each with its key path and line, which the decoder alone cannot:
// it stops at the first error and names Go types rather than keys. It also
// records where each key path is written so that later validation problems
// can carry a line.
type schema struct {
	lines    map[string]int    // key path -> line of its key
	maps     map[string]bool   // key paths written as a mapping
	at       map[[2]int]string // token position -> key path
	problems []Problem
}

func newSchema() *schema {
	return &schema{lines: map[string]int{}, maps: map[string]bool{}, at: map[[2]int]string{}}
}

func (s *schema) add(path string, n ast.Node, format string, args ...any) {
	s.problems = append(s.problems, Problem{Path: path, Message: fmt.Sprintf(format, args...), Line: line(n)})
}

// line returns the 1-based line of a node's first token, or 0.
func line(n ast.Node) int {
	if n == nil || reflect.ValueOf(n).IsNil() {
		return 0
	}
	tk := n.GetToken()
	if tk == nil || tk.Position == nil {
		return 0
	}
	return tk.Position.Line
}

func (s *schema) mark(path string, n ast.Node) {
	if n == nil || reflect.ValueOf(n).IsNil() {
		return
	}
	if tk := n.GetToken(); tk != nil && tk.Position != nil {
		s.at[[2]int{tk.Position.Line, tk.Position.Column}] = path
	}
}

// walk checks node against type t; path is the node's key path.
func (s *schema) walk(n ast.Node, t reflect.Type, path string) {
	for t.Kind() == reflect.Pointer {
		t = t.Elem()
	}
	s.mark(path, n)
	switch v := n.(type) {
	case nil, *ast.NullNode:
		return // null leaves the zero value, which means the default
	case *ast.AnchorNode:
		s.walk(v.Value, t, path)
		return
	case *ast.AliasNode, *ast.TagNode:
		return // resolved and checked by the decoder itself
	}
	switch {
	case t == durationType:
		s.duration(n, path)
	case t == timeType:
		s.time(n, path)
	case t.Kind() == reflect.Struct:
		s.mapping(n, path, func(key string) (reflect.Type, bool) { return fieldType(t, key) }, keysOf(t))
	case t.Kind() == reflect.Map:
		s.mapping(n, path, func(string) (reflect.Type, bool) { return t.Elem(), true }, nil)
	case t.Kind() == reflect.Slice:
		s.sequence(n, t.Elem(), path)
	default:
		s.scalar(n, t, path)
	}
}

func (s *schema) mapping(n ast.Node, path string, field func(string) (reflect.Type, bool), known []string) {
	var values []*ast.MappingValueNode
	switch v := n.(type) {
	case *ast.MappingNode:
		values = v.Values
	case *ast.MappingValueNode:
		values = []*ast.MappingValueNode{v}
	default:
		what := "must be"
		if path == "" {
			what = "the file must hold"
		}
		s.add(path, n, "%s a mapping of keys to values, not %s", what, describe(n))
		return
	}
	s.maps[path] = true
	for _, mv := range values {
		if mv.Key.IsMergeKey() {
			continue // "<<" merges are resolved and checked by the decoder
		}
		key := keyText(mv.Key)
		sub := join(path, key)
		s.lines[sub] = line(mv.Key)
		s.mark(sub, mv.Key)
		ft, ok := field(key)
		if !ok {
			msg := fmt.Sprintf("unknown key %q", key)
			if near := nearest(key, known); near != "" {
				msg += fmt.Sprintf(" (did you mean %q?)", near)
			}
			s.problems = append(s.problems, Problem{Path: sub, Message: msg, Line: line(mv.Key)})
			continue
		}
		s.walk(mv.Value, ft, sub)
	}
}

func (s *schema) sequence(n ast.Node, elem reflect.Type, path string) {
	seq, ok := n.(*ast.SequenceNode)
	if !ok {
		s.add(path, n, "must be a list, not %s", describe(n))
		return
	}
	for i, v := range seq.Values {
		sub := fmt.Sprintf("%s[%d]", path, i)
		s.lines[sub] = line(v)
		s.walk(v, elem, sub)
	}
}

func (s *schema) duration(n ast.Node, path string) {
	str, ok := n.(*ast.StringNode)
	if !ok {
		s.add(path, n, "%s is not a duration; write a number with a unit, e.g. \"200ms\" or \"1h30m\"", describe(n))
		return
	}
	if _, err := time.ParseDuration(str.Value); err != nil {
		s.add(path, n, "%q is not a duration; write a number with a unit, e.g. \"200ms\" or \"1h30m\"", str.Value)
	}
}

func (s *schema) time(n ast.Node, path string) {
	str, ok := n.(*ast.StringNode)
	if !ok {
		s.add(path, n, "%s is not a time; write it as RFC 3339, e.g. \"2026-04-01T09:00:00Z\"", describe(n))
		return
	}
	if _, err := time.Parse(time.RFC3339, str.Value); err != nil {
		s.add(path, n, "%q is not an RFC 3339 time, e.g. \"2026-04-01T09:00:00Z\"", str.Value)
	}
}

func (s *schema) scalar(n ast.Node, t reflect.Type, path string) {
	switch t.Kind() {
	case reflect.String:
		switch n.(type) {
		case *ast.StringNode, *ast.LiteralNode:
		default:
			s.add(path, n, "%s is not text; put it in quotes if it is meant as text", describe(n))
		}
	case reflect.Bool:
		if _, ok := n.(*ast.BoolNode); !ok {
			s.add(path, n, "%s is not true or false", describe(n))
		}
	case reflect.Int, reflect.Int64:
		s.integer(n, path)
	case reflect.Float64:
		switch n.(type) {
		case *ast.IntegerNode, *ast.FloatNode, *ast.InfinityNode, *ast.NanNode:
		default:
			s.add(path, n, "%s is not a number", describe(n))
		}
	}
}

func (s *schema) integer(n ast.Node, path string) {
	in, ok := n.(*ast.IntegerNode)
	if str, isStr := n.(*ast.StringNode); isStr && digits(str.Value) {
		s.add(path, n, "%s is too large", str.Value) // the lexer gives up on numbers past 64 bits
		return
	}
	if !ok {
		s.add(path, n, "%s is not a whole number", describe(n))
		return
	}
	if u, ok := in.Value.(uint64); ok && u > math.MaxInt64 {
		s.add(path, n, "%d is too large", u)
	}
}

func digits(s string) bool {
	s = strings.TrimPrefix(s, "-")
	return s != "" && strings.Trim(s, "0123456789") == ""
}

// describe names a node's value for a message: the value itself for a
// scalar, its kind for a collection.
func describe(n ast.Node) string {
	switch v := n.(type) {
	case *ast.MappingNode, *ast.MappingValueNode:
		return "a mapping"
	case *ast.SequenceNode:
		return "a list"
	case *ast.StringNode:
		return strconv.Quote(v.Value)
	case *ast.LiteralNode:
		return "a block of text"
	}
	return strings.TrimSpace(n.String())
}

func keyText(k ast.MapKeyNode) string {
	if mk, ok := k.(*ast.MappingKeyNode); ok && mk.Value != nil {
		if s, ok := mk.Value.(*ast.StringNode); ok {
			return s.Value
		}
		return strings.TrimSpace(mk.Value.String())
	}
	if s, ok := k.(*ast.StringNode); ok {
		return s.Value
	}
	return strings.TrimSpace(k.String())
}

// join appends a key to a key path; keys that are not plain words are
// quoted in brackets so that the path stays unambiguous.
func join(path, key string) string {
	plain := key != ""
	for _, r := range key {
		if !(r == '_' || r == '-' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9') {
			plain = false
			break
		}
	}
	switch {
	case !plain:
		return path + "[" + strconv.Quote(key) + "]"
	case path == "":
		return key
	}
	return path + "." + key
}

// fieldType finds the struct field whose yaml tag is key.
func fieldType(t reflect.Type, key string) (reflect.Type, bool) {
	for i := range t.NumField() {
		f := t.Field(i)
		if f.IsExported() && yamlName(f) == key {
			return f.Type, true
		}
	}
	return nil, false
}

func keysOf(t reflect.Type) []string {
	var keys []string
	for i := range t.NumField() {
		if f := t.Field(i); f.IsExported() {
			keys = append(keys, yamlName(f))
		}
	}
	sort.Strings(keys)
	return keys
}

func yamlName(f reflect.StructField) string {
	name, _, _ := strings.Cut(f.Tag.Get("yaml"), ",")
	if name == "" {
		return strings.ToLower(f.Name)
	}
	return name
}

// nearest returns the known key closest to key when it is a likely typo
// (edit distance at most 2, ignoring case), else "".
func nearest(key string, known []string) string {
	best, bestD := "", 3
	for _, k := range known {
		if d := distance(strings.ToLower(key), strings.ToLower(k)); d < bestD {
			best, bestD = k, d
		}
	}
	return best
}

// distance is the Levenshtein edit distance between a and b.
func distance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	prev := make([]int, len(rb)+1)
	cur := make([]int, len(rb)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(ra); i++ {
		cur[0] = i
		for j := 1; j <= len(rb); j++ {
			cost := 1
			if ra[i-1] == rb[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(rb)]
}
