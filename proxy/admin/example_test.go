package admin_test

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"

	"github.com/prometheus/client_golang/prometheus"

	"riffle/proxy/admin"
	"riffle/proxy/guard"
)

// A sidecar's admin listener: metrics, readiness, guardrails behind a token.
func ExampleNew() {
	reg := prometheus.NewRegistry()
	g := guard.New(guard.Options{ErrorRate: 0.05, Registerer: reg})
	storeOpen := false
	h := admin.New(admin.Options{
		Metrics:    reg,
		Token:      "rake-and-trowel",
		Guardrails: g,
		Ready: admin.AllReady(func(context.Context) error {
			if !storeOpen {
				return errors.New("store not open yet")
			}
			return nil
		}),
	})
	srv := httptest.NewServer(h)
	defer srv.Close()

	show := func(method, path, token string) {
		req, _ := http.NewRequest(method, srv.URL+path, nil)
		if token != "" {
			req.Header.Set("Authorization", "Bearer "+token)
		}
		resp, err := srv.Client().Do(req)
		if err != nil {
			fmt.Println(err)
			return
		}
		defer resp.Body.Close()
		body, _ := io.ReadAll(resp.Body)
		fmt.Printf("%s %s: %d %s", method, path, resp.StatusCode, body)
	}
	show("GET", "/readyz", "")
	storeOpen = true
	show("GET", "/readyz", "")
	show("POST", "/api/v1/guardrails/reset", "")
	show("POST", "/api/v1/guardrails/reset", "rake-and-trowel")
	// Output:
	// GET /readyz: 503 {
	//   "ready": false,
	//   "reason": "store not open yet"
	// }
	// GET /readyz: 200 {
	//   "ready": true
	// }
	// POST /api/v1/guardrails/reset: 401 {
	//   "error": "this endpoint needs the admin bearer token: send Authorization: Bearer <token>"
	// }
	// POST /api/v1/guardrails/reset: 200 {
	//   "cleared": null
	// }
}
