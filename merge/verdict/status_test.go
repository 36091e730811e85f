package verdict

import (
	"encoding/json"
	"errors"
	"math"
	"slices"
	"strings"
	"testing"
	"time"

	"riffle/merge"
)

// outcomes builds Outcomes from none, incumbent, challenger and tie counts.
func outcomes(none, inc, chal, tie int64) [4]int64 {
	var o [4]int64
	o[merge.NoFeedback], o[merge.IncumbentWin], o[merge.ChallengerWin], o[merge.Tie] = none, inc, chal, tie
	return o
}

// blockUsers spreads counts over users holding blocks of size identical
// outcomes each: the most clustered a population can be.
func blockUsers(o [4]int64, size int64) map[uint64][4]int64 {
	users := map[uint64][4]int64{}
	id := uint64(1)
	for k := 1; k < 4; k++ {
		for left := o[k]; left > 0; left -= size {
			var c [4]int64
			c[k] = min(size, left)
			users[id] = c
			id++
		}
	}
	return users
}

func TestComputeVerdicts(t *testing.T) {
	cases := []struct {
		name    string
		in      Input
		want    Verdict
		because string // a phrase the reason must hold
	}{
		{"nothing yet", Input{}, Undecided, "no impressions with feedback"},
		{"challenger ahead", Input{Outcomes: outcomes(5000, 4000, 6000, 1000)}, ChallengerBetter, "lies above 0"},
		{"incumbent ahead", Input{Outcomes: outcomes(5000, 6000, 4000, 1000)}, IncumbentBetter, "the incumbent won 6000"},
		{"even, no margin", Input{Outcomes: outcomes(0, 50000, 50000, 10000)}, Undecided, "planned sample for power 0.8 at Delta 0.02 is reached"},
		{"even, early", Input{Outcomes: outcomes(0, 500, 500, 100)}, Undecided, "more impressions with feedback needed"},
		{"even, margin 0.02", Input{Outcomes: outcomes(0, 50000, 50000, 10000), Params: Params{Margin: 0.02}}, OnPar, "within the margin"},
		// Ahead of 0 takes precedence over within the margin.
		{"slightly ahead within the margin", Input{Outcomes: outcomes(0, 50000, 52000, 0), Params: Params{Margin: 0.05}}, ChallengerBetter, "lies above 0"},
		{"few ties only", Input{Outcomes: outcomes(0, 0, 0, 3), Params: Params{Margin: 0.05}}, Undecided, "cannot yet tell"},
		{"ahead but clustered in few users", Input{Outcomes: outcomes(0, 4000, 6000, 0), Users: blockUsers(outcomes(0, 4000, 6000, 0), 500)}, Undecided, "cannot yet tell"},
		{"peeking at a fixed-sample interval", Input{Outcomes: outcomes(0, 1000, 1100, 0)}, Undecided, "fixed-sample interval excludes 0"},
		{"non-inferior so far", Input{Outcomes: outcomes(0, 1000, 1100, 0), Params: Params{Margin: 0.05}}, Undecided, "on par or better so far"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, err := Compute(c.in)
			if err != nil {
				t.Fatal(err)
			}
			if s.Verdict != c.want || !strings.Contains(s.Reason, c.because) {
				t.Errorf("verdict %s (%s), want %s with %q", s.Verdict, s.Reason, c.want, c.because)
			}
			if s.Needed > 0 && s.Verdict != Undecided {
				t.Errorf("verdict %s with needed %d: want needed 0 once decided", s.Verdict, s.Needed)
			}
		})
	}
}

// Delta is the preference statistic of Chapelle, Joachims, Radlinski & Yue
// (ACM TOIS 2012): (wins + ties/2)/(wins + losses + ties) - 0.5.
func TestComputeDeltaAndIntervals(t *testing.T) {
	s, err := Compute(Input{Outcomes: outcomes(7, 120, 150, 30)})
	if err != nil {
		t.Fatal(err)
	}
	want := (150+15.0)/300 - 0.5
	if math.Abs(s.Delta-want) > 1e-15 {
		t.Errorf("delta = %v, want %v", s.Delta, want)
	}
	for name, iv := range map[string]Interval{"ci": s.CI, "cs_delta": s.CSDelta} {
		if !iv.Contains(s.Delta) {
			t.Errorf("%s %v does not hold delta %v", name, iv, s.Delta)
		}
	}
	if s.CSDelta.Lo() > s.CI.Lo() || s.CSDelta.Hi() < s.CI.Hi() {
		t.Errorf("always-valid interval %v narrower than the fixed-sample %v", s.CSDelta, s.CI)
	}
	// Independent impressions: the win share's interval is Wilson's
	// (Newcombe 1998 method 3) on 150 of 270.
	w, _ := Wilson(150, 270, 0.05)
	if s.Wilson != w || s.WinShare != 150.0/270 {
		t.Errorf("win share %v wilson %v, want %v and %v", s.WinShare, s.Wilson, 150.0/270, w)
	}
	sign, _ := SignTestPValue(150, 120)
	if s.SignTest != (SignTest{PValue: sign, Challenger: 150, Incumbent: 120, TiesSetAside: 30, Unit: "users"}) {
		t.Errorf("sign test %+v, want p %v with 30 ties set aside", s.SignTest, sign)
	}
	if s.DesignEffect != 1 || s.Users != 300 {
		t.Errorf("design effect %v over %d users, want 1 over 300 singletons", s.DesignEffect, s.Users)
	}
}

func TestComputeETA(t *testing.T) {
	in := Input{
		Outcomes:          outcomes(300, 100, 100, 0), // 40% of finalised impressions have feedback
		RecentImpressions: 7200,
		RecentSpan:        time.Hour,
	}
	s, err := Compute(in)
	if err != nil {
		t.Fatal(err)
	}
	// 2 interleaved impressions per second, 0.8 with feedback.
	want := time.Duration(float64(s.Needed) / 0.8 * float64(time.Second)).Round(time.Second)
	if s.ETA == nil || time.Duration(*s.ETA) != want {
		t.Errorf("eta %v for %d needed, want %v", s.ETA, s.Needed, want)
	}
	in.RecentSpan = 0
	if s, _ := Compute(in); s.ETA != nil {
		t.Errorf("eta %v without a recent rate, want nil", time.Duration(*s.ETA))
	}
	decided, _ := Compute(Input{Outcomes: outcomes(0, 4000, 6000, 0)})
	if decided.ETA == nil || *decided.ETA != 0 {
		t.Errorf("eta %v once decided, want 0s", decided.ETA)
	}
}

// The status JSON carries exactly the keys of DESIGN.md's Interface, and
// riffle's own beside them.
func TestStatusJSONKeys(t *testing.T) {
	ramp := 0.25
	s, err := Compute(Input{Experiment: "spring-refresh", Policy: "team-draft", Ramp: &ramp,
		Impressions: 900, Interleaved: 700, Outcomes: outcomes(300, 100, 120, 20)})
	if err != nil {
		t.Fatal(err)
	}
	b, err := json.Marshal(s)
	if err != nil {
		t.Fatal(err)
	}
	var got map[string]json.RawMessage
	if err := json.Unmarshal(b, &got); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"experiment", "policy", "ramp", "impressions", "interleaved", "with_feedback",
		"wins", "delta", "ci", "p_value", "verdict", "needed", "eta"} {
		if _, ok := got[k]; !ok {
			t.Errorf("status JSON lacks %q: %s", k, b)
		}
	}
	var wins map[string]int64
	_ = json.Unmarshal(got["wins"], &wins)
	if len(wins) != 3 || wins["incumbent"] != 100 || wins["challenger"] != 120 || wins["tie"] != 20 {
		t.Errorf("wins = %s, want incumbent 100, challenger 120, tie 20", got["wins"])
	}
	var ci []float64
	if err := json.Unmarshal(got["ci"], &ci); err != nil || len(ci) != 2 || ci[0] > ci[1] {
		t.Errorf("ci = %s, want [lo, hi]", got["ci"])
	}
	var back Status
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	if b2, _ := json.Marshal(back); string(b2) != string(b) || *back.Ramp != ramp {
		t.Errorf("round trip changed the status:\n%s\n%s", b, b2)
	}
	keys := make([]string, 0, len(got))
	for k := range got {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	t.Logf("keys: %v", keys)
}

func TestStatusJSONNullETA(t *testing.T) {
	s, err := Compute(Input{Outcomes: outcomes(0, 10, 12, 1)})
	if err != nil {
		t.Fatal(err)
	}
	b, _ := json.Marshal(s)
	if !strings.Contains(string(b), `"eta":null`) || !strings.Contains(string(b), `"ramp":null`) {
		t.Errorf("status JSON %s: want eta and ramp null when unknown", b)
	}
}

func TestComputeBadInput(t *testing.T) {
	cases := map[string]Input{
		"negative outcome":  {Outcomes: outcomes(0, -1, 3, 0)},
		"negative recent":   {RecentImpressions: -5},
		"negative span":     {RecentSpan: -time.Second},
		"alpha above 1":     {Params: Params{Alpha: 1.5}},
		"power of 1":        {Params: Params{Power: 1}},
		"negative mde":      {Params: Params{MDE: -0.01}},
		"margin 0.5":        {Params: Params{Margin: 0.5}},
		"users over totals": {Outcomes: outcomes(0, 1, 1, 0), Users: map[uint64][4]int64{9: outcomes(0, 0, 2, 0)}},
	}
	for name, in := range cases {
		if _, err := Compute(in); !errors.Is(err, ErrInput) {
			t.Errorf("%s: error = %v, want ErrInput", name, err)
		}
	}
}

func FuzzDurationJSON(f *testing.F) {
	for _, s := range []string{`"1h30m"`, `"0s"`, `null`, `"-5m"`, `"x"`, `12`, `"9999999999h"`, `""`} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		var d Duration
		if err := json.Unmarshal([]byte(s), &d); err != nil {
			return
		}
		b, err := json.Marshal(d)
		if err != nil {
			t.Fatalf("marshal %v: %v", time.Duration(d), err)
		}
		var back Duration
		if err := json.Unmarshal(b, &back); err != nil || back != d {
			t.Fatalf("round trip %s -> %s -> %v (%v)", s, b, time.Duration(back), err)
		}
	})
}
