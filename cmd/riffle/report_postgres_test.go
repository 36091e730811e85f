package main

import (
	"context"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"riffle/store/postgres"
	"riffle/store/postgres/pgtest"
)

// TestReportOnPostgres writes one traffic to a file and to a shared
// database: riffle report gives the same numbers from either, and riffle
// export the same lines.
func TestReportOnPostgres(t *testing.T) {
	r := rand.New(rand.NewPCG(47, 53))
	imps := plannedTraffic(r, "spring-refresh", 800, 200, time.Second, trafficMix{0.22, 0.18, 0.05, 0.1})
	path := filepath.Join(t.TempDir(), "one.db")
	writeStore(t, path, imps)
	url := pgtest.Database(t)
	st, err := postgres.Open(context.Background(), postgres.Config{URL: url, Options: *writeOptions()})
	if err != nil {
		t.Fatal(err)
	}
	fill(t, st, imps)
	code, onDB, errOut := runCmd(t, runReport, "--store", url, "--format", "json")
	if code != 0 {
		t.Fatalf("report --store postgres://...: exit %d: %s", code, errOut)
	}
	code, onFile, errOut := runCmd(t, runReport, "--store", path, "--format", "json")
	if code != 0 {
		t.Fatalf("report on the file: exit %d: %s", code, errOut)
	}
	if onDB != onFile || !strings.Contains(onDB, `"impressions": 800`) && !strings.Contains(onDB, `"impressions":800`) {
		t.Errorf("report on PostgreSQL differs from the file's:\n%s\n%s", onDB, onFile)
	}
	code, expDB, errOut := runCmd(t, runExport, "--store", url)
	if code != 0 {
		t.Fatalf("export --store postgres://...: exit %d: %s", code, errOut)
	}
	_, expFile, _ := runCmd(t, runExport, "--store", path)
	// The ids (and so the seeds) are drawn afresh for each store, so
	// compare what follows from the traffic: lines and outcomes.
	for _, want := range []string{"\n", `"outcome":"challenger"`, `"outcome":"incumbent"`, `"outcome":"tie"`, `"outcome":"none"`} {
		if a, b := strings.Count(expDB, want), strings.Count(expFile, want); a != b || a == 0 {
			t.Errorf("export: %d of %q on PostgreSQL, %d in the file; want the same, and some", a, want, b)
		}
	}
}
