package merge

import (
	"fmt"
	"slices"
	"strings"
)

// Options configures the policies that take parameters. The zero value gives
// every policy its published defaults.
type Options struct {
	// Tau is the probabilistic policy's softmax exponent; 0 means the
	// published default of 3.
	Tau float64
	// Credit names the optimized policy's rank-difference credit function;
	// empty means its default.
	Credit string
}

// constructor builds one named policy from its options.
type constructor struct {
	name  string
	build func(Options) (Policy, error)
}

// constructors lists every policy New knows. It is a function rather than a
// package-level table so that the package holds no mutable state.
func constructors() []constructor {
	return []constructor{
		{"balanced", func(Options) (Policy, error) { return Balanced{}, nil }},
		{"team-draft", func(Options) (Policy, error) { return TeamDraft{}, nil }},
		{"probabilistic", func(o Options) (Policy, error) { return NewProbabilistic(o.Tau) }},
		{"optimized", func(o Options) (Policy, error) { return NewOptimized(o.Credit, 0) }},
	}
}

// New returns the policy configured under name ("team-draft", "balanced",
// ...; see Names) built with o. An unknown name gives an error that wraps
// ErrUnknownPolicy and lists the known names.
func New(name string, o Options) (Policy, error) {
	for _, c := range constructors() {
		if c.name == name {
			p, err := c.build(o)
			if err != nil {
				return nil, fmt.Errorf("merge: policy %q: %w", name, err)
			}
			return p, nil
		}
	}
	return nil, fmt.Errorf("merge: %w %q (known: %s)",
		ErrUnknownPolicy, name, strings.Join(Names(), ", "))
}

// Names returns the configuration names of every policy New knows, sorted.
func Names() []string {
	cs := constructors()
	names := make([]string, 0, len(cs))
	for _, c := range cs {
		names = append(names, c.name)
	}
	slices.Sort(names)
	return names
}
