package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"time"

	"riffle/cmd/riffle/internal/shop"
	"riffle/proxy/config"
	"riffle/proxy/sidecar"
	"riffle/store"
)

// demoFlags are riffle demo's settings.
type demoFlags struct {
	duration      time.Duration
	listen, admin string
	rate          float64
	seed          uint64
	// keep, when set, is the directory the demo's config and store are
	// written to and left in, for riffle report afterwards.
	keep string
}

// runDemo runs a whole experiment on loopback: two embedded backends of an
// invented garden-supply shop, riffle in front of them (through the same
// code path as riffle serve, on a store in a temporary directory), and a
// crowd of synthetic shoppers who browse, click and buy.
func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("riffle demo", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var f demoFlags
	fs.DurationVar(&f.duration, "duration", 60*time.Second, "how long the shoppers browse")
	fs.StringVar(&f.listen, "listen", "127.0.0.1:8080", "riffle's data-plane address")
	fs.StringVar(&f.admin, "admin", "127.0.0.1:7464", "riffle's admin address (status page, metrics, API)")
	fs.Float64Var(&f.rate, "rate", 150, "recommendation requests per second")
	fs.Uint64Var(&f.seed, "seed", 1, "seed of the shop and the shoppers")
	fs.StringVar(&f.keep, "keep", "", "keep the demo's riffle.yaml and riffle.db in this directory (created if missing) for riffle report afterwards")
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if f.duration <= 0 || f.rate <= 0 {
		fmt.Fprintln(stderr, "riffle demo: --duration and --rate must be positive")
		return 2
	}
	if err := demo(ctx, f, stdout, stderr); err != nil {
		printError(stderr, "riffle demo", err)
		return 1
	}
	return 0
}

func demo(ctx context.Context, f demoFlags, stdout, stderr io.Writer) error {
	dir, err := demoDir(f.keep)
	if err != nil {
		return err
	}
	if f.keep == "" {
		defer os.RemoveAll(dir)
	}
	cat := shop.NewCatalogue(f.seed)
	inc, err := startBackend(shop.Backend(cat, "popularity", shop.Popularity, 2*time.Millisecond))
	if err != nil {
		return err
	}
	defer inc.Close()
	chal, err := startBackend(shop.Backend(cat, "co-purchase", shop.Affinity, 3*time.Millisecond))
	if err != nil {
		return err
	}
	defer chal.Close()

	path := filepath.Join(dir, "riffle.yaml")
	if err := os.WriteFile(path, []byte(demoConfig(f, dir, inc.URL, chal.URL)), 0o600); err != nil {
		return err
	}
	cfg, err := config.Load(path)
	if err != nil {
		return err
	}
	log := slog.New(slog.NewTextHandler(stderr, &slog.HandlerOptions{Level: slog.LevelWarn}))
	sc, err := sidecar.Start(path, cfg, log)
	if err != nil {
		return err
	}
	runCtx, stopRiffle := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- sc.Run(runCtx) }()

	err = browse(ctx, f, sc, cat, stdout, cfg.Experiment.Window)
	stopRiffle()
	if err := errors.Join(err, <-done); err != nil {
		return err
	}
	if ctx.Err() != nil {
		return nil
	}
	if err := printTeamClicks(stdout, cfg.Store); err != nil {
		return err
	}
	if f.keep != "" {
		fmt.Fprintf(stdout, "\nkept the config and the store in %s; report on them with\n  riffle report --store %s --config %s\n",
			dir, cfg.Store, path)
	}
	return nil
}

// demoDir returns the directory for the demo's files: keep, created if
// missing and refused if it already holds a demo store, else a new
// temporary directory.
func demoDir(keep string) (string, error) {
	if keep == "" {
		return os.MkdirTemp("", "riffle-demo-")
	}
	if err := os.MkdirAll(keep, 0o755); err != nil {
		return "", fmt.Errorf("--keep: %w", err)
	}
	if _, err := os.Stat(filepath.Join(keep, "riffle.db")); err == nil {
		return "", fmt.Errorf("--keep %s: it already holds a riffle.db; give an empty directory so two demos do not mix", keep)
	}
	return filepath.Abs(keep)
}

// printTeamClicks reads the closed store back and counts the events on each
// team's slots of the interleaved impressions.
func printTeamClicks(w io.Writer, path string) error {
	st, err := store.Open(path, &store.Options{ReadOnly: true})
	if err != nil {
		return err
	}
	defer st.Close()
	pr, pw := io.Pipe()
	go func() { pw.CloseWithError(st.Export(context.Background(), pw, time.Time{})) }()
	clicks := map[string]map[string]int{}
	dec := json.NewDecoder(pr)
	for {
		var line struct {
			Fallback string `json:"fallback"`
			Slots    []struct {
				Team string `json:"team"`
			} `json:"slots"`
			Events []struct {
				Event string `json:"event"`
				Slot  int    `json:"slot"`
			} `json:"events"`
		}
		if err := dec.Decode(&line); errors.Is(err, io.EOF) {
			break
		} else if err != nil {
			return fmt.Errorf("read back store: %w", err)
		}
		if line.Fallback != "" {
			continue
		}
		for _, ev := range line.Events {
			if ev.Slot < 1 || ev.Slot > len(line.Slots) {
				continue
			}
			team := line.Slots[ev.Slot-1].Team
			if clicks[team] == nil {
				clicks[team] = map[string]int{}
			}
			clicks[team][ev.Event]++
		}
	}
	fmt.Fprintf(w, "  events by team     challenger slots: %d clicks, %d purchases; incumbent slots: %d clicks, %d purchases (interleaved impressions, read back from the store)\n",
		clicks["challenger"]["click"], clicks["challenger"]["purchase"], clicks["incumbent"]["click"], clicks["incumbent"]["purchase"])
	return nil
}

// browse runs the shoppers for the demo's duration, printing progress, then
// waits for the last attribution window to close and prints the result.
func browse(ctx context.Context, f demoFlags, sc *sidecar.Sidecar, cat *shop.Catalogue, stdout io.Writer, window time.Duration) error {
	admin := "http://" + sc.AdminAddr()
	fmt.Fprintf(stdout, "riffle demo: a garden-supply shop's incumbent (popularity) against a challenger (co-purchase affinity)\n")
	fmt.Fprintf(stdout, "  data plane  http://%s/v1/recommend   feedback POST http://%s/feedback\n", sc.DataAddr(), sc.DataAddr())
	fmt.Fprintf(stdout, "  live status %s/status/   experiment %s/api/v1/experiment   metrics %s/metrics\n", admin, admin, admin)
	fmt.Fprintf(stdout, "  shoppers browse for %v at about %.0f requests/s\n\n", f.duration, f.rate)

	var tally shop.Tally
	crowdCtx, stopCrowd := context.WithTimeout(ctx, f.duration)
	defer stopCrowd()
	crowdDone := make(chan struct{})
	go func() {
		defer close(crowdDone)
		shop.Crowd{Base: "http://" + sc.DataAddr(), Rate: f.rate, Seed: f.seed}.Browse(crowdCtx, cat, &tally)
	}()
	every := max(f.duration/6, 2*time.Second)
	tick := time.NewTicker(every)
	defer tick.Stop()
	start := time.Now()
	for running := true; running; {
		select {
		case <-crowdDone:
			running = false
		case <-tick.C:
			printProgress(stdout, time.Since(start), &tally, admin)
		}
	}
	if ctx.Err() != nil {
		return nil
	}
	fmt.Fprintf(stdout, "\nshoppers done; waiting %v for the last attribution window to close\n", window+2*time.Second)
	select {
	case <-ctx.Done():
		return nil
	case <-time.After(window + 2*time.Second):
	}
	st, err := fetchStatus(admin)
	if err != nil {
		return err
	}
	printSummary(stdout, &tally, st)
	return nil
}

// startBackend serves h on a free loopback port.
func startBackend(h http.Handler) (*backend, error) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return nil, fmt.Errorf("demo backend: %w", err)
	}
	srv := &http.Server{Handler: h, ReadHeaderTimeout: 5 * time.Second}
	go func() { _ = srv.Serve(ln) }()
	return &backend{srv: srv, URL: "http://" + ln.Addr().String()}, nil
}

type backend struct {
	srv *http.Server
	URL string
}

func (b *backend) Close() { _ = b.srv.Close() }

// demoConfig is the demo's riffle.yaml: a short attribution window so that
// outcomes are final within the run, and a staged ramp.
func demoConfig(f demoFlags, dir, inc, chal string) string {
	return fmt.Sprintf(`listen: %s
admin: %s
store: %s
incumbent:  {url: %q, timeout: 200ms}
challenger: {url: %q, timeout: 150ms}
routes:
  - path: /v1/recommend
    list: /items
    id: /sku
user: {header: Shopper-Id}
experiment:
  name: seedling-affinity
  policy: team-draft
  window: 3s
  events: {click: 1, purchase: 3}
  alpha: 0.05
  mde: 0.05
  margin: 0.02
  schedule:
    - {after: 0s, ramp: 0.5}
    - {after: %s, ramp: 1.0}
  guardrails: {error_rate: 0.2, window: 30s, min_requests: 50}
`, f.listen, f.admin, filepath.Join(dir, "riffle.db"), inc, chal, (f.duration / 3).Round(time.Millisecond))
}

// demoStatus is the part of the experiment status the demo prints.
type demoStatus struct {
	Impressions  int64    `json:"impressions"`
	Interleaved  int64    `json:"interleaved"`
	WithFeedback int64    `json:"with_feedback"`
	Ramp         *float64 `json:"ramp"`
	Wins         struct {
		Incumbent, Challenger, Tie int64
	} `json:"wins"`
	Delta        float64    `json:"delta"`
	CI           [2]float64 `json:"ci"`
	PValue       float64    `json:"p_value"`
	Verdict      string     `json:"verdict"`
	Reason       string     `json:"reason"`
	Needed       *int64     `json:"needed"`
	DesignEffect float64    `json:"design_effect"`
}

func fetchStatus(admin string) (demoStatus, error) {
	var st demoStatus
	c := http.Client{Timeout: 5 * time.Second}
	resp, err := c.Get(admin + "/api/v1/experiment")
	if err != nil {
		return st, fmt.Errorf("read experiment status: %w", err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		b, _ := io.ReadAll(io.LimitReader(resp.Body, 1024))
		return st, fmt.Errorf("read experiment status: %s: %s", resp.Status, b)
	}
	if err := json.NewDecoder(resp.Body).Decode(&st); err != nil {
		return st, fmt.Errorf("read experiment status: %w", err)
	}
	return st, nil
}

func printProgress(w io.Writer, elapsed time.Duration, t *shop.Tally, admin string) {
	st, err := fetchStatus(admin)
	if err != nil {
		fmt.Fprintf(w, "%5.0fs  requests %d  (status unavailable: %v)\n", elapsed.Seconds(), t.Requests.Load(), err)
		return
	}
	ramp := 0.0
	if st.Ramp != nil {
		ramp = *st.Ramp
	}
	fmt.Fprintf(w, "%5.0fs  impressions %6d  interleaved %5.1f%%  ramp %.2f  clicks %5d  purchases %4d  outcomes %5d  Delta %+.4f  verdict %s\n",
		elapsed.Seconds(), st.Impressions, pct(st.Interleaved, st.Impressions), ramp,
		t.Clicks.Load(), t.Purchases.Load(), st.WithFeedback, st.Delta, st.Verdict)
}

func printSummary(w io.Writer, t *shop.Tally, st demoStatus) {
	fmt.Fprintf(w, "\nwhat riffle saw\n")
	fmt.Fprintf(w, "  impressions        %d (%d interleaved, %.1f%%)\n", st.Impressions, st.Interleaved, pct(st.Interleaved, st.Impressions))
	fmt.Fprintf(w, "  shopper events     %d clicks, %d purchases; feedback accepted %d, rejected %d, unanswered %d; request errors %d\n",
		t.Clicks.Load(), t.Purchases.Load(), t.FeedbackAccepted.Load(), t.FeedbackRejected.Load(),
		t.FeedbackUnanswered.Load(), t.Errors.Load())
	fmt.Fprintf(w, "  outcomes           challenger %d, incumbent %d, tie %d (with feedback %d)\n",
		st.Wins.Challenger, st.Wins.Incumbent, st.Wins.Tie, st.WithFeedback)
	fmt.Fprintf(w, "  Delta              %+.4f, interval [%+.4f, %+.4f], always-valid p %.4g, design effect %.2f\n",
		st.Delta, st.CI[0], st.CI[1], st.PValue, st.DesignEffect)
	fmt.Fprintf(w, "  verdict            %s: %s\n", st.Verdict, st.Reason)
}

func pct(a, b int64) float64 {
	if b == 0 {
		return 0
	}
	return 100 * float64(a) / float64(b)
}
