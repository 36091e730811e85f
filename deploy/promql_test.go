package deploy

// A small evaluator for the part of PromQL that the fleet-verdict recording
// rules use, so that their arithmetic is checked even where promtool is
// missing. It follows the PromQL documentation's semantics for what it
// covers: instant selectors with =, !=, =~ and !~ matchers (regexes fully
// anchored), number literals, + - * / ^ (^ right-associative and binding
// tightest), comparison filters, `or`, sum with without/by, and sqrt.
// Binary operations between vectors match one-to-one on every label but
// the metric name; arithmetic drops the metric name, filters keep it.
// Anything else is a parse error naming what is unsupported.

import (
	"fmt"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"
)

// sample is one series' value at the evaluation time.
type sample struct {
	labels map[string]string // includes __name__ when the series has a name
	v      float64
}

// value is a PromQL result: a scalar or an instant vector.
type value struct {
	scalar bool
	s      float64
	vec    []sample
}

// node is a parsed expression.
type node func(db []sample) (value, error)

type token struct {
	kind string // "ident", "num", "str", or the operator itself
	text string
}

// lex splits a PromQL expression into tokens.
func lex(src string) ([]token, error) {
	var toks []token
	ops := []string{"=~", "!~", "!=", "==", ">=", "<=", "(", ")", "{", "}", ",", "=", ">", "<", "+", "-", "*", "/", "^"}
	for i := 0; i < len(src); {
		c := src[i]
		switch {
		case c == ' ' || c == '\t' || c == '\n' || c == '\r':
			i++
		case c == '_' || c == ':' || ('a' <= c && c <= 'z') || ('A' <= c && c <= 'Z'):
			j := i
			for j < len(src) && (src[j] == '_' || src[j] == ':' || isAlnum(src[j])) {
				j++
			}
			toks = append(toks, token{"ident", src[i:j]})
			i = j
		case ('0' <= c && c <= '9') || c == '.':
			j := i
			for j < len(src) && (isAlnum(src[j]) || src[j] == '.' ||
				((src[j] == '+' || src[j] == '-') && (src[j-1] == 'e' || src[j-1] == 'E'))) {
				j++
			}
			toks = append(toks, token{"num", src[i:j]})
			i = j
		case c == '"':
			j := i + 1
			for j < len(src) && src[j] != '"' {
				if src[j] == '\\' {
					j++
				}
				j++
			}
			if j >= len(src) {
				return nil, fmt.Errorf("offset %d: unterminated string", i)
			}
			toks = append(toks, token{"str", src[i : j+1]})
			i = j + 1
		default:
			k := slices.IndexFunc(ops, func(op string) bool { return strings.HasPrefix(src[i:], op) })
			if k < 0 {
				return nil, fmt.Errorf("offset %d: unexpected %q", i, c)
			}
			toks = append(toks, token{ops[k], ops[k]})
			i += len(ops[k])
		}
	}
	return toks, nil
}

func isAlnum(b byte) bool {
	return b == '_' || ('0' <= b && b <= '9') || ('a' <= b && b <= 'z') || ('A' <= b && b <= 'Z')
}

// parser is a recursive-descent parser over the tokens.
type parser struct {
	toks []token
	pos  int
}

// parseExpr parses a whole expression.
func parseExpr(src string) (node, error) {
	toks, err := lex(src)
	if err != nil {
		return nil, err
	}
	p := &parser{toks: toks}
	n, err := p.binary(0)
	if err != nil {
		return nil, err
	}
	if p.pos != len(p.toks) {
		return nil, fmt.Errorf("unexpected %q after the expression", p.toks[p.pos].text)
	}
	return n, nil
}

func (p *parser) peek() token {
	if p.pos < len(p.toks) {
		return p.toks[p.pos]
	}
	return token{kind: "eof"}
}

func (p *parser) expect(kind string) (token, error) {
	t := p.peek()
	if t.kind != kind {
		return t, fmt.Errorf("want %s, got %q", kind, t.text)
	}
	p.pos++
	return t, nil
}

// levels lists the binary operators from the loosest to the tightest.
func levels() [][]string {
	return [][]string{{"or"}, {"==", "!=", ">", "<", ">=", "<="}, {"+", "-"}, {"*", "/"}, {"^"}}
}

func (p *parser) binary(level int) (node, error) {
	ops := levels()
	if level == len(ops) {
		return p.unary()
	}
	lhs, err := p.binary(level + 1)
	if err != nil {
		return nil, err
	}
	for {
		op := p.peek().text
		if !slices.Contains(ops[level], op) {
			return lhs, nil
		}
		p.pos++
		next := level + 1
		if op == "^" {
			next = level // right-associative
		}
		rhs, err := p.binary(next)
		if err != nil {
			return nil, err
		}
		lhs = binop(op, lhs, rhs)
	}
}

func (p *parser) unary() (node, error) {
	if p.peek().kind == "-" {
		p.pos++
		n, err := p.unary()
		if err != nil {
			return nil, err
		}
		return binop("*", constant(-1), n), nil
	}
	return p.primary()
}

func constant(f float64) node {
	return func([]sample) (value, error) { return value{scalar: true, s: f}, nil }
}

func (p *parser) primary() (node, error) {
	t := p.peek()
	switch {
	case t.kind == "num":
		p.pos++
		f, err := strconv.ParseFloat(t.text, 64)
		if err != nil {
			return nil, fmt.Errorf("number %q: %w", t.text, err)
		}
		return constant(f), nil
	case t.kind == "(":
		p.pos++
		n, err := p.binary(0)
		if err != nil {
			return nil, err
		}
		_, err = p.expect(")")
		return n, err
	case t.kind == "ident" && t.text == "sum":
		p.pos++
		return p.sum()
	case t.kind == "ident" && t.text == "sqrt":
		p.pos++
		return p.sqrt()
	case t.kind == "ident":
		p.pos++
		if p.peek().kind == "(" {
			return nil, fmt.Errorf("function %s is not supported by this evaluator", t.text)
		}
		return p.selector(t.text)
	}
	return nil, fmt.Errorf("unexpected %q", t.text)
}

func (p *parser) sqrt() (node, error) {
	if _, err := p.expect("("); err != nil {
		return nil, err
	}
	arg, err := p.binary(0)
	if err != nil {
		return nil, err
	}
	if _, err := p.expect(")"); err != nil {
		return nil, err
	}
	return func(db []sample) (value, error) {
		v, err := arg(db)
		if err != nil || v.scalar {
			return value{}, fmt.Errorf("sqrt wants a vector (%v)", err)
		}
		return mapVec(v, math.Sqrt), nil
	}, nil
}

// sum parses `sum [without|by (l, ...)] (expr) [without|by (l, ...)]`.
func (p *parser) sum() (node, error) {
	mode, labels, err := p.grouping()
	if err != nil {
		return nil, err
	}
	if _, err := p.expect("("); err != nil {
		return nil, err
	}
	arg, err := p.binary(0)
	if err != nil {
		return nil, err
	}
	if _, err := p.expect(")"); err != nil {
		return nil, err
	}
	if mode == "" {
		if mode, labels, err = p.grouping(); err != nil {
			return nil, err
		}
	}
	return func(db []sample) (value, error) {
		v, err := arg(db)
		if err != nil || v.scalar {
			return value{}, fmt.Errorf("sum wants a vector (%v)", err)
		}
		return sumVec(v.vec, mode, labels), nil
	}, nil
}

func (p *parser) grouping() (string, []string, error) {
	mode := p.peek().text
	if p.peek().kind != "ident" || (mode != "without" && mode != "by") {
		return "", nil, nil
	}
	p.pos++
	if _, err := p.expect("("); err != nil {
		return "", nil, err
	}
	var labels []string
	for p.peek().kind != ")" {
		t, err := p.expect("ident")
		if err != nil {
			return "", nil, err
		}
		labels = append(labels, t.text)
		if p.peek().kind == "," {
			p.pos++
		}
	}
	p.pos++
	return mode, labels, nil
}

func (p *parser) selector(name string) (node, error) {
	var match []func(map[string]string) bool
	if p.peek().kind == "{" {
		p.pos++
		for p.peek().kind != "}" {
			m, err := p.matcher()
			if err != nil {
				return nil, err
			}
			match = append(match, m)
			if p.peek().kind == "," {
				p.pos++
			}
		}
		p.pos++
	}
	return func(db []sample) (value, error) {
		out := value{}
		for _, s := range db {
			if s.labels["__name__"] == name && !slices.ContainsFunc(match, func(m func(map[string]string) bool) bool { return !m(s.labels) }) {
				out.vec = append(out.vec, s)
			}
		}
		return out, nil
	}, nil
}

func (p *parser) matcher() (func(map[string]string) bool, error) {
	l, err := p.expect("ident")
	if err != nil {
		return nil, err
	}
	op := p.peek().kind
	if op != "=" && op != "!=" && op != "=~" && op != "!~" {
		return nil, fmt.Errorf("label %s: want a matcher operator, got %q", l.text, p.peek().text)
	}
	p.pos++
	st, err := p.expect("str")
	if err != nil {
		return nil, err
	}
	val, err := strconv.Unquote(st.text)
	if err != nil {
		return nil, fmt.Errorf("label %s: %w", l.text, err)
	}
	re, err := regexp.Compile("^(?:" + val + ")$")
	if err != nil {
		return nil, fmt.Errorf("label %s: %w", l.text, err)
	}
	return func(ls map[string]string) bool {
		switch op {
		case "=":
			return ls[l.text] == val
		case "!=":
			return ls[l.text] != val
		case "=~":
			return re.MatchString(ls[l.text])
		}
		return !re.MatchString(ls[l.text])
	}, nil
}
