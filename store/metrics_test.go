package store

import (
	"context"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
	"github.com/prometheus/client_golang/prometheus/testutil/promlint"
	dto "github.com/prometheus/client_model/go"
)

// counterValue returns one of the store's impression counters.
func counterValue(t *testing.T, st *Store, name string) float64 {
	t.Helper()
	switch name {
	case "queued":
		return testutil.ToFloat64(st.m.queued)
	case "committed":
		return testutil.ToFloat64(st.m.committed)
	case "dropped":
		return testutil.ToFloat64(st.m.dropped)
	}
	t.Fatalf("no counter %q", name)
	return 0
}

func TestMetrics(t *testing.T) {
	reg := prometheus.NewRegistry()
	o := testOptions(newClock(t0))
	o.Registerer = reg
	st, _ := openTest(t, o)
	recordAll(t, st, teamDraftImpression(t0, 1, 0), teamDraftImpression(t0, 2, 0))
	if st.Record(&Impression{ID: fixedID(t0, 3)}) {
		t.Error("Record of an impression without an experiment = true")
	}
	mustAdd(t, st, Event{Impression: fixedID(t0, 1), Item: "b1", Type: "click", Time: t0.Add(time.Second)})
	if _, err := st.Finalize(context.Background(), t0.Add(time.Hour)); err != nil {
		t.Fatal(err)
	}
	expected := `
# HELP riffle_store_impressions_committed_total Impressions written to the store file by a group commit.
# TYPE riffle_store_impressions_committed_total counter
riffle_store_impressions_committed_total 2
# HELP riffle_store_impressions_dropped_total Impressions not stored: queue full, store closed, no experiment, or a failed commit.
# TYPE riffle_store_impressions_dropped_total counter
riffle_store_impressions_dropped_total 1
# HELP riffle_store_impressions_queued_total Impressions handed to the store's write queue.
# TYPE riffle_store_impressions_queued_total counter
riffle_store_impressions_queued_total 2
# HELP riffle_store_queue_length Impressions waiting in the store's write queue.
# TYPE riffle_store_queue_length gauge
riffle_store_queue_length 0
# HELP riffle_impression_outcomes_total Finalised interleaved impressions by outcome, starting from the totals stored in this sidecar's file.
# TYPE riffle_impression_outcomes_total counter
riffle_impression_outcomes_total{experiment="spring-refresh",outcome="challenger"} 1
riffle_impression_outcomes_total{experiment="spring-refresh",outcome="incumbent"} 0
riffle_impression_outcomes_total{experiment="spring-refresh",outcome="none"} 1
riffle_impression_outcomes_total{experiment="spring-refresh",outcome="tie"} 0
`
	if err := testutil.GatherAndCompare(reg, strings.NewReader(expected),
		"riffle_store_impressions_committed_total", "riffle_store_impressions_dropped_total",
		"riffle_store_impressions_queued_total", "riffle_store_queue_length", "riffle_impression_outcomes_total"); err != nil {
		t.Error(err)
	}
	if n := testutil.CollectAndCount(st.m.commitSeconds); n != 1 {
		t.Errorf("commit histogram has %d series, want 1", n)
	}
	problems, err := promlint.NewWithMetricFamilies(mustGather(t, reg)).Lint()
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("promlint: %s: %s", p.Metric, p.Text)
	}
	// A second store on the same registry is refused, not silently merged.
	if second, err := Open(filepath.Join(t.TempDir(), "b.db"), o); err == nil {
		second.Close()
		t.Error("two stores registered on one registry")
	}
}

func mustGather(t *testing.T, reg *prometheus.Registry) []*dto.MetricFamily {
	t.Helper()
	mfs, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	return mfs
}
