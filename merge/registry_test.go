package merge

import (
	"errors"
	"slices"
	"strings"
	"testing"
)

// TestNew checks that every configuration name builds its policy.
func TestNew(t *testing.T) {
	for _, name := range []string{"team-draft", "balanced"} {
		p, err := New(name, Options{})
		if err != nil {
			t.Fatalf("New(%q): %v", name, err)
		}
		if p.Name() != name {
			t.Errorf("New(%q).Name() = %q", name, p.Name())
		}
	}
}

// TestNewUnknown checks the error for a name no policy has.
func TestNewUnknown(t *testing.T) {
	for _, name := range []string{"", "teamdraft", "Team-Draft"} {
		_, err := New(name, Options{})
		if !errors.Is(err, ErrUnknownPolicy) {
			t.Fatalf("New(%q) error %v, want ErrUnknownPolicy", name, err)
		}
		for _, known := range Names() {
			if !strings.Contains(err.Error(), known) {
				t.Errorf("New(%q) error %q does not name %q", name, err, known)
			}
		}
	}
}

// TestNames checks that Names is sorted and that each name builds.
func TestNames(t *testing.T) {
	names := Names()
	if !slices.IsSorted(names) || !slices.Contains(names, "team-draft") || !slices.Contains(names, "balanced") {
		t.Fatalf("Names() = %v, want sorted and holding team-draft and balanced", names)
	}
	for _, n := range names {
		if _, err := New(n, Options{}); err != nil {
			t.Errorf("New(%q) from Names: %v", n, err)
		}
	}
}
