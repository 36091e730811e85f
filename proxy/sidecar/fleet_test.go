package sidecar_test

import (
	"context"
	"encoding/json"
	"fmt"
	"net/http"
	"testing"
	"time"

	"riffle/store/postgres/pgtest"
)

// TestTwoSidecarsOneDatabase runs two sidecars on one PostgreSQL store:
// a click sent to the sidecar that did not serve the list is accepted at
// once, and both sidecars' experiment status shows the same fleet totals.
func TestTwoSidecarsOneDatabase(t *testing.T) {
	url := pgtest.Database(t)
	inc := newBackend(t, "incumbent", incumbentShelf, 0)
	chal := newBackend(t, "challenger", challengerShelf, 0)
	var sc [2]*running
	for i := range sc {
		c := newConf(t.TempDir(), inc.URL, chal.URL)
		c.Store = url
		sc[i] = start(t, t.TempDir(), c)
	}
	const n = 10
	for i := range n {
		a := mustRecommend(t, sc[i%2].data, fmt.Sprintf("shopper-%d", i), "")
		code, fr, err := postFeedback(context.Background(), sc[(i+1)%2].data, event(a.impression, a.skus[0], "click"))
		if err != nil || code != http.StatusAccepted || fr.Accepted != 1 {
			t.Fatalf("click via the other sidecar: %d %+v %v; want 202, accepted 1", code, fr, err)
		}
	}
	eventually(t, 10*time.Second, func() (bool, string) {
		var got [2]int64
		for i, s := range sc {
			code, body := do(t, http.MethodGet, s.adm+"/api/v1/experiment")
			var st struct {
				Impressions int64 `json:"impressions"`
				Store       struct {
					Available bool `json:"available"`
				} `json:"store"`
			}
			if code != http.StatusOK || json.Unmarshal(body, &st) != nil || !st.Store.Available {
				return false, fmt.Sprintf("sidecar %d: %d %s", i, code, body)
			}
			got[i] = st.Impressions
		}
		return got[0] == n && got[1] == n, fmt.Sprintf("impressions %v, want %d on both", got, n)
	})
}
