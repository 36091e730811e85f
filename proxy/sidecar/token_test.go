package sidecar_test

import (
	"net/http"
	"os"
	"path/filepath"
	"testing"
)

// TestAdminTokenGuardsMutatingEndpoints checks that with admin_token_file
// set, reload, guardrail reset and snapshot answer 401 without the bearer
// token (RFC 6750 section 3) and work with it, that read-only endpoints stay
// open, and that a rotated token file applies at once.
func TestAdminTokenGuardsMutatingEndpoints(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	inc := newBackend(t, "incumbent", incumbentShelf, 0)
	chal := newBackend(t, "challenger", challengerShelf, 0)
	tokenPath := filepath.Join(dir, "admin-token")
	if err := os.WriteFile(tokenPath, []byte("seed-tray-42\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	c := newConf(dir, inc.URL, chal.URL)
	c.TokenFile = tokenPath
	r := start(t, dir, c)

	send := func(method, path, token string) int {
		t.Helper()
		req, err := http.NewRequest(method, r.adm+path, nil)
		if err != nil {
			t.Fatal(err)
		}
		if token != "" {
			req.Header.Set("Authorization", "Bearer "+token)
		}
		resp, err := client.Do(req)
		if err != nil {
			t.Fatalf("%s %s: %v", method, path, err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	cases := []struct {
		method, path, token string
		want                int
	}{
		{"POST", "/api/v1/reload", "", http.StatusUnauthorized},
		{"POST", "/api/v1/reload", "wrong", http.StatusUnauthorized},
		{"POST", "/api/v1/reload", "seed-tray-42", http.StatusOK},
		{"POST", "/api/v1/guardrails/reset", "", http.StatusUnauthorized},
		{"POST", "/api/v1/guardrails/reset", "seed-tray-42", http.StatusOK},
		{"GET", "/api/v1/snapshot", "", http.StatusUnauthorized},
		{"GET", "/api/v1/snapshot", "seed-tray-42", http.StatusOK},
		{"GET", "/api/v1/experiment", "", http.StatusOK},
		{"GET", "/healthz", "", http.StatusOK},
	}
	for _, tc := range cases {
		if got := send(tc.method, tc.path, tc.token); got != tc.want {
			t.Errorf("%s %s with token %q: status %d, want %d", tc.method, tc.path, tc.token, got, tc.want)
		}
	}
	if err := os.WriteFile(tokenPath, []byte("compost-7\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if got := send("POST", "/api/v1/guardrails/reset", "seed-tray-42"); got != http.StatusUnauthorized {
		t.Errorf("old token after rotation: status %d, want 401", got)
	}
	if got := send("POST", "/api/v1/guardrails/reset", "compost-7"); got != http.StatusOK {
		t.Errorf("new token after rotation: status %d, want 200", got)
	}
}
