package status

import (
	"context"
	"net/http"
	"net/http/httptest"
	"os/exec"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
)

func TestHistoryRingKeepsNewestInOrder(t *testing.T) {
	h := NewHistory(3)
	t0 := time.Unix(1000, 0)
	for i := range 5 {
		h.Add(Point{Time: t0.Add(time.Duration(i) * time.Second), Delta: float64(i)})
	}
	got := h.Points()
	if len(got) != 3 {
		t.Fatalf("got %d points, want 3", len(got))
	}
	for i, want := range []float64{2, 3, 4} {
		if got[i].Delta != want {
			t.Errorf("point %d: delta %v, want %v", i, got[i].Delta, want)
		}
	}
}

// statusJSON is an experiment status as the admin API serves it
// (DESIGN.md Interface keys), with a guardrail block.
const statusJSON = `{"experiment":"spring-refresh","policy":"team-draft","ramp":0.25,
"impressions":1200,"interleaved":300,"with_feedback":150,
"wins":{"incumbent":40,"challenger":80,"tie":30},"delta":0.1333,"ci":[0.05,0.21],
"p_value":0.004,"verdict":"challenger-better","reason":"the always-valid test rejects no difference",
"needed":0,"eta":null,"guardrail":{"tripped":%TRIPPED%,"guardrail":"error-rate","reason":"challenger errors 12% > 5%"}}`

// TestPageInHeadlessBrowser loads the page in a real headless Chromium and
// checks that it renders the live verdict, Delta with its interval, the
// ramp and the guardrails, and that it follows a change on its next poll.
func TestPageInHeadlessBrowser(t *testing.T) {
	if testing.Short() {
		t.Skip("browser test skipped in -short mode")
	}
	chrome, err := exec.LookPath("chromium")
	if err != nil {
		t.Skip("chromium not on PATH (Debian package chromium; .ci/run installs it)")
	}
	var tripped atomic.Bool
	h := NewHistory(0)
	t0 := time.Now().Add(-time.Minute)
	for i := range 10 {
		h.Add(Point{Time: t0.Add(time.Duration(i) * 5 * time.Second), Delta: 0.01 * float64(i), Lo: 0.01*float64(i) - 0.05, Hi: 0.01*float64(i) + 0.05, Ramp: 0.25})
	}
	mux := http.NewServeMux()
	mux.HandleFunc("/api/v1/experiment", func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		v := "false"
		if tripped.Load() {
			v = "true"
		}
		_, _ = w.Write([]byte(strings.Replace(statusJSON, "%TRIPPED%", v, 1)))
	})
	mux.Handle("/status/", http.StripPrefix("/status", Handler(h)))
	srv := httptest.NewServer(mux)
	defer srv.Close()

	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(chrome), chromedp.NoSandbox, chromedp.DisableGPU,
		chromedp.Flag("disable-quic", true), chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true), chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(t.TempDir()))
	actx, cancel := chromedp.NewExecAllocator(context.Background(), opts...)
	defer cancel()
	ctx, cancel := chromedp.NewContext(actx)
	defer cancel()
	ctx, cancel = context.WithTimeout(ctx, 60*time.Second)
	defer cancel()

	if err := chromedp.Do(ctx, chromedp.Navigate(srv.URL+"/status/"), chromedp.WaitVisible(chromedp.ID("deltaline"))); err != nil {
		t.Fatalf("browser: load page: %v", err)
	}
	text := func(id string) string {
		t.Helper()
		v, err := chromedp.Run(ctx, chromedp.Text(chromedp.ID(id)))
		if err != nil {
			t.Fatalf("browser: read #%s: %v", id, err)
		}
		return v
	}
	verdict, delta, ci, ramp, guard, wins := text("verdict"), text("delta"), text("ci"), text("ramp"), text("guardrails"), text("w_challenger")
	attr, err := chromedp.Run(ctx, chromedp.AttributeValue(chromedp.ID("deltaline"), "d"))
	if err != nil {
		t.Fatalf("browser: read delta line: %v", err)
	}
	path := attr.Value
	checks := []struct{ name, got, want string }{
		{"verdict", verdict, "challenger-better"},
		{"delta", delta, "0.1333"},
		{"ci", strings.TrimSpace(ci), "[0.0500, 0.2100]"},
		{"ramp", ramp, "0.250"},
		{"guardrails", guard, "ok"},
		{"challenger wins", wins, "80"},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("%s: page shows %q, want %q", c.name, c.got, c.want)
		}
	}
	if n := strings.Count(path, "L"); n != 9 {
		t.Errorf("delta line has %d segments, want 9 (one per history point after the first): %q", n, path)
	}

	tripped.Store(true)
	_, err = chromedp.Run(ctx, chromedp.Poll[bool](`document.getElementById("guardrails").textContent.startsWith("tripped")`,
		chromedp.WithPollingTimeout(10*time.Second)))
	if err != nil {
		t.Fatalf("page did not show the tripped guardrail after its next poll: %v", err)
	}
	if got := text("guardrails"); got != "tripped: error-rate" {
		t.Errorf("guardrails shows %q, want %q", got, "tripped: error-rate")
	}
}
