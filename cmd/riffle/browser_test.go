package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"riffle/cmd/riffle/internal/shop"
	"riffle/proxy/config"
	"riffle/proxy/sidecar"
)

// chartCheck is what the page script below finds in one chart.
type chartCheck struct {
	ID     string   `json:"id"`
	Datums int      `json:"datums"`
	Ticks  []string `json:"ticks"`
	NaN    []string `json:"nan"`
}

// pageCheck is what the page script finds in the whole page.
type pageCheck struct {
	Charts    []chartCheck `json:"charts"`
	MainBand  []string     `json:"main_band"`
	Secondary []string     `json:"secondary_band"`
	NaNText   bool         `json:"nan_text"`
	Verdict   string       `json:"verdict"`
}

// inspect collects, for every chart, its data marks, its labelled ticks and
// any attribute holding NaN or Infinity, and which intervals the Delta chart
// drew as its main and its secondary band.
const inspect = `(() => {
  const charts = [...document.querySelectorAll("svg[id^=chart-]")].map(svg => ({
    id: svg.id,
    datums: svg.querySelectorAll(".datum").length,
    ticks: [...svg.querySelectorAll(".tick")].map(t => t.textContent).filter(t => t.trim() !== ""),
    nan: [...svg.querySelectorAll("*")].flatMap(e => [...e.attributes].filter(a => /NaN|Infinity|undefined/.test(a.value)).map(a => e.tagName + "." + a.name + "=" + a.value)),
  }));
  const keys = sel => [...document.querySelectorAll("#chart-delta " + sel)].map(e => e.getAttribute("data-key"));
  return {charts, main_band: keys(".band-main"), secondary_band: [...new Set(keys(".band-secondary"))],
    nan_text: /\bNaN\b/.test(document.body.innerText), verdict: document.getElementById("verdict").textContent};
})()`

// TestPagesInHeadlessChromium runs the demo's shop with riffle in front of
// it, loads the live status page in a real headless Chromium while shoppers
// browse, then writes the HTML report from the store and loads it too. On
// both it checks that every chart drew data with labelled ticks and no NaN,
// that the always-valid interval is the Delta chart's main band, and that
// nothing was logged as a console error; it saves a screenshot of each to
// $RIFFLE_SCREENSHOTS (default: the test's temporary directory).
func TestPagesInHeadlessChromium(t *testing.T) {
	if testing.Short() {
		t.Skip("browser test skipped in -short mode")
	}
	chrome := findChromium(t)
	shots := os.Getenv("RIFFLE_SCREENSHOTS")
	if shots == "" {
		shots = t.TempDir()
	}
	if err := os.MkdirAll(shots, 0o755); err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	admin, storePath, stop := startShop(t, dir)
	ctx := newBrowser(t, chrome)
	problems := watchConsole(ctx)

	waitForHistory(t, admin, 3)
	if err := chromedp.Do(ctx, chromedp.EmulateViewport(1200, 900), chromedp.Navigate(admin+"/status/")); err != nil {
		t.Fatalf("browser: load status page: %v", err)
	}
	page := checkPage(t, ctx, "status page", 7)
	st, err := fetchStatus(admin)
	if err != nil {
		t.Fatal(err)
	}
	if page.Verdict != st.Verdict {
		t.Errorf("status page shows verdict %q, the API says %q", page.Verdict, st.Verdict)
	}
	screenshot(t, ctx, filepath.Join(shots, "status-page.png"))
	stop()

	report := filepath.Join(dir, "report.html")
	code, out, errOut := runCmd(t, runReport, "--store", storePath, "--config", filepath.Join(dir, "riffle.yaml"), "--format", "html")
	if code != 0 {
		t.Fatalf("riffle report --format html: exit %d: %s", code, errOut)
	}
	if err := os.WriteFile(report, []byte(out), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(ctx, chromedp.Navigate("file://"+report)); err != nil {
		t.Fatalf("browser: load report: %v", err)
	}
	checkPage(t, ctx, "report", 6)
	screenshot(t, ctx, filepath.Join(shots, "report.png"))
	for _, p := range problems() {
		t.Errorf("browser console: %s", p)
	}
	t.Logf("screenshots in %s", shots)
}

// findChromium returns Chromium's path, or skips (fails under CI=true).
func findChromium(t *testing.T) string {
	t.Helper()
	for _, name := range []string{"chromium", "/usr/bin/chromium"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	if os.Getenv("CI") == "true" {
		t.Fatal("chromium is not installed, and CI=true requires the browser test (Debian package chromium; .ci/run installs it)")
	}
	t.Skip("chromium not found (Debian package chromium; .ci/run installs it)")
	return ""
}

// newBrowser starts headless Chromium with a fresh profile and no network
// beyond loopback.
func newBrowser(t *testing.T, chrome string) context.Context {
	t.Helper()
	opts := append(chromedp.DefaultExecAllocatorOptions[:], chromedp.ExecPath(chrome),
		chromedp.Headless, chromedp.NoSandbox, chromedp.DisableGPU, chromedp.NoFirstRun,
		chromedp.Flag("disable-background-networking", true), chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true), chromedp.UserDataDir(t.TempDir()))
	actx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancelTab := chromedp.NewContext(actx)
	ctx, cancelTime := context.WithTimeout(ctx, 90*time.Second)
	t.Cleanup(func() { cancelTime(); cancelTab(); cancelAlloc() })
	return ctx
}

// watchConsole collects console errors and uncaught exceptions.
func watchConsole(ctx context.Context) func() []string {
	var mu sync.Mutex
	var got []string
	messages := chromedp.Console(ctx)
	go func() {
		for m, err := range messages {
			if err != nil {
				return
			}
			if m.Type == chromedp.ConsoleError || m.IsException() {
				mu.Lock()
				got = append(got, fmt.Sprintf("%s %s:%d %s", m.Type, m.URL, m.Line+1, m))
				mu.Unlock()
			}
		}
	}()
	return func() []string {
		time.Sleep(200 * time.Millisecond) // let the last events of the tab arrive
		mu.Lock()
		defer mu.Unlock()
		return append([]string(nil), got...)
	}
}

// checkPage waits until the page has drawn, then checks every chart.
func checkPage(t *testing.T, ctx context.Context, what string, wantCharts int) pageCheck {
	t.Helper()
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](`Number(document.body.dataset.drawn || 0) >= 1`, chromedp.WithPollingTimeout(20*time.Second))); err != nil {
		t.Fatalf("%s: never drew: %v", what, err)
	}
	raw, err := chromedp.Run(ctx, chromedp.Evaluate[json.RawMessage](inspect))
	if err != nil {
		t.Fatalf("%s: inspect: %v", what, err)
	}
	var pc pageCheck
	if err := json.Unmarshal(raw, &pc); err != nil {
		t.Fatalf("%s: inspect answer %s: %v", what, raw, err)
	}
	if len(pc.Charts) < wantCharts {
		t.Errorf("%s: %d charts, want at least %d", what, len(pc.Charts), wantCharts)
	}
	for _, c := range pc.Charts {
		if c.Datums == 0 {
			t.Errorf("%s: chart %s drew no data", what, c.ID)
		}
		if len(c.Ticks) < 2 {
			t.Errorf("%s: chart %s has %d labelled ticks (%q), want at least 2", what, c.ID, len(c.Ticks), c.Ticks)
		}
		if len(c.NaN) > 0 {
			t.Errorf("%s: chart %s has attributes without a number: %q", what, c.ID, c.NaN)
		}
	}
	if len(pc.MainBand) != 1 || pc.MainBand[0] != "cs_delta" {
		t.Errorf("%s: the Delta chart's main band is %q, want the always-valid interval cs_delta alone", what, pc.MainBand)
	}
	if len(pc.Secondary) != 1 || pc.Secondary[0] != "ci" {
		t.Errorf("%s: the Delta chart's secondary band is %q, want the fixed-sample interval ci", what, pc.Secondary)
	}
	if pc.NaNText {
		t.Errorf("%s: the page's text shows NaN", what)
	}
	return pc
}

func screenshot(t *testing.T, ctx context.Context, path string) {
	t.Helper()
	png, err := chromedp.Run(ctx, chromedp.FullScreenshot(90))
	if err != nil {
		t.Fatalf("screenshot: %v", err)
	}
	if err := os.WriteFile(path, png, 0o644); err != nil {
		t.Fatal(err)
	}
}

// startShop runs the demo's backends, riffle and its shoppers on loopback
// and returns the admin URL, the store's path, and a stop function that
// stops the shoppers and riffle (closing the store) and waits for both.
func startShop(t *testing.T, dir string) (admin, storePath string, stop func()) {
	t.Helper()
	cat := shop.NewCatalogue(7)
	inc, err := startBackend(shop.Backend(cat, "popularity", shop.Popularity, 2*time.Millisecond))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(inc.Close)
	chal, err := startBackend(shop.Backend(cat, "co-purchase", shop.Affinity, 3*time.Millisecond))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(chal.Close)
	path := filepath.Join(dir, "riffle.yaml")
	f := demoFlags{duration: 30 * time.Second, listen: "127.0.0.1:0", admin: "127.0.0.1:0", rate: 150, seed: 7}
	if err := os.WriteFile(path, []byte(demoConfig(f, dir, inc.URL, chal.URL)), 0o600); err != nil {
		t.Fatal(err)
	}
	cfg, err := config.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	sc, err := sidecar.Start(path, cfg, slog.New(slog.NewTextHandler(io.Discard, nil)))
	if err != nil {
		t.Fatal(err)
	}
	runCtx, stopRiffle := context.WithCancel(context.Background())
	crowdCtx, stopCrowd := context.WithCancel(context.Background())
	var wg sync.WaitGroup
	done := make(chan error, 1)
	go func() { done <- sc.Run(runCtx) }()
	wg.Add(1)
	go func() {
		defer wg.Done()
		shop.Crowd{Base: "http://" + sc.DataAddr(), Rate: f.rate, Seed: f.seed}.Browse(crowdCtx, cat, &shop.Tally{})
	}()
	var once sync.Once
	stop = func() {
		once.Do(func() {
			stopCrowd()
			wg.Wait()
			stopRiffle()
			if err := <-done; err != nil {
				t.Errorf("riffle: %v", err)
			}
		})
	}
	t.Cleanup(stop)
	return "http://" + sc.AdminAddr(), cfg.Store, stop
}

// waitForHistory waits until the status page's history holds n points with
// feedback, so that its time charts have lines to draw.
func waitForHistory(t *testing.T, admin string, n int) {
	t.Helper()
	deadline := time.Now().Add(45 * time.Second)
	for time.Now().Before(deadline) {
		resp, err := http.Get(admin + "/status/history.json")
		if err == nil {
			var pts []struct {
				WithFeedback int64 `json:"with_feedback"`
			}
			err = json.NewDecoder(resp.Body).Decode(&pts)
			resp.Body.Close()
			with := 0
			for _, p := range pts {
				if p.WithFeedback > 0 {
					with++
				}
			}
			if err == nil && with >= n {
				return
			}
		}
		time.Sleep(500 * time.Millisecond)
	}
	t.Fatalf("the status history did not reach %d points with feedback in 45s", n)
}
