package admin

import (
	"bytes"
	"encoding/json"
	"net/http"
)

// errorBody is every JSON error the admin listener sends.
type errorBody struct {
	Error string `json:"error"`
}

// writeJSON sends v as JSON with the given status. Admin answers describe
// live state, so no cache may keep them.
func writeJSON(w http.ResponseWriter, status int, v any) {
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(false) // read by people and tools, not embedded in HTML
	enc.SetIndent("", "  ")
	if err := enc.Encode(v); err != nil {
		status = http.StatusInternalServerError
		buf.Reset()
		_ = enc.Encode(errorBody{Error: "admin: encode response: " + err.Error()})
	}
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(status)
	_, _ = w.Write(buf.Bytes())
}

// writeError sends {"error": msg} with the given status.
func writeError(w http.ResponseWriter, status int, msg string) {
	writeJSON(w, status, errorBody{Error: msg})
}
