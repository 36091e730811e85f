package deploy

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/goccy/go-yaml"
)

// promtoolInstall is how .ci/run gets promtool on a Debian machine.
const promtoolInstall = "apt-get install -y --no-install-recommends prometheus"

// promtool runs promtool in dir and fails the test with its output when it
// exits non-zero; it skips the test when promtool is not installed.
func promtool(t *testing.T, dir string, args ...string) string {
	t.Helper()
	bin, err := exec.LookPath("promtool")
	if err != nil {
		t.Skipf("promtool is not on PATH (install it with %q); the Go evaluator checks the verdict rules meanwhile", promtoolInstall)
	}
	ctx, cancel := context.WithTimeout(t.Context(), time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin, args...)
	cmd.Dir = dir
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("promtool %s: %v\n%s", strings.Join(args, " "), err, out)
	}
	return string(out)
}

func TestPromtoolChecksRules(t *testing.T) {
	promtool(t, "prometheus", "check", "rules", "rules.yaml")
}

func TestPromtoolUnitTestsRules(t *testing.T) {
	promtool(t, "prometheus", "test", "rules", "rules_test.yaml")
}

// TestPromtoolChecksScrapeConfig checks scrape.yaml. Debian's promtool is
// built without Kubernetes service discovery and rejects
// kubernetes_sd_configs; there the same file is checked with that one block
// swapped for static_configs, so everything else still gets checked.
func TestPromtoolChecksScrapeConfig(t *testing.T) {
	if _, err := exec.LookPath("promtool"); err != nil {
		promtool(t, ".") // skips
	}
	dir := t.TempDir()
	copyFile(t, filepath.Join("prometheus", "rules.yaml"), filepath.Join(dir, "rules.yaml"))
	src, err := os.ReadFile(filepath.Join("prometheus", "scrape.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(dir, "scrape.yaml"), src)
	cmd := exec.CommandContext(t.Context(), "promtool", "check", "config", "scrape.yaml")
	cmd.Dir = dir
	out, err := cmd.CombinedOutput()
	if err == nil {
		return
	}
	if !strings.Contains(string(out), "kubernetes_sd_configs") {
		t.Fatalf("promtool check config scrape.yaml: %v\n%s", err, out)
	}
	t.Logf("this promtool lacks Kubernetes discovery; checking with static_configs instead")
	swapped := strings.Replace(string(src), "    kubernetes_sd_configs:\n      - role: pod\n",
		"    static_configs:\n      - targets: [\"127.0.0.1:7464\"]\n", 1)
	if swapped == string(src) {
		t.Fatal("scrape.yaml's kubernetes_sd_configs block changed shape; update this test")
	}
	writeFile(t, filepath.Join(dir, "scrape.yaml"), []byte(swapped))
	promtool(t, dir, "check", "config", "scrape.yaml")
}

// TestPromtoolParsesDashboardQueries checks every panel's query is valid
// PromQL by handing them to promtool as recording rules, with the
// dashboard's variables filled in.
func TestPromtoolParsesDashboardQueries(t *testing.T) {
	if _, err := exec.LookPath("promtool"); err != nil {
		promtool(t, ".") // skips
	}
	d := readDashboard(t)
	fill := strings.NewReplacer("$namespace", "garden-shop", "$experiment", "spring-refresh")
	type rec struct {
		Record string `yaml:"record"`
		Expr   string `yaml:"expr"`
	}
	var rules []rec
	for _, p := range d.Panels {
		for _, tg := range p.Targets {
			rules = append(rules, rec{Record: fmt.Sprintf("dashboard:panel_%d:%s", p.ID, strings.ToLower(tg.RefID)), Expr: fill.Replace(tg.Expr)})
		}
	}
	b, err := yaml.Marshal(map[string]any{"groups": []any{map[string]any{"name": "dashboard", "rules": rules}}})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "dashboard-rules.yaml"), b)
	out := promtool(t, dir, "check", "rules", "dashboard-rules.yaml")
	if want := fmt.Sprintf("%d rules found", len(rules)); !strings.Contains(out, want) {
		t.Errorf("promtool: %s; want %q", out, want)
	}
}

func copyFile(t *testing.T, from, to string) {
	t.Helper()
	b, err := os.ReadFile(from)
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, to, b)
}

func writeFile(t *testing.T, name string, b []byte) {
	t.Helper()
	if err := os.WriteFile(name, b, 0o644); err != nil {
		t.Fatal(err)
	}
}
