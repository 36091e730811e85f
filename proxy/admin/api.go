package admin

import (
	"fmt"
	"mime"
	"net/http"
	"time"

	"riffle/proxy/guard"
)

// experiment serves GET /api/v1/experiment: the live status as JSON.
func (a *api) experiment(w http.ResponseWriter, r *http.Request) {
	if a.o.Experiment == nil {
		notConfigured("the experiment status")(w, r)
		return
	}
	st, err := a.o.Experiment(r.Context())
	if err != nil {
		a.log.Error("admin: experiment status failed", "error", err)
		writeError(w, http.StatusInternalServerError, "experiment status: "+err.Error())
		return
	}
	writeJSON(w, http.StatusOK, st)
}

// configBody is the body of GET /api/v1/config.
type configBody struct {
	Hash        string     `json:"hash"`
	LoadedAt    time.Time  `json:"loaded_at"`
	LastError   string     `json:"last_error"`
	LastAttempt *time.Time `json:"last_attempt"`
	Problems    any        `json:"problems,omitempty"`
	Config      any        `json:"config"`
}

// config serves GET /api/v1/config: the hash, load time and last reload
// error, and the config in force with its secrets redacted.
func (a *api) config(w http.ResponseWriter, r *http.Request) {
	if a.o.Config == nil {
		notConfigured("the config view")(w, r)
		return
	}
	cs := a.o.Config()
	body := configBody{Hash: cs.Hash, LoadedAt: cs.LoadedAt, LastError: cs.LastError, Problems: cs.Problems}
	if !cs.LastAttempt.IsZero() {
		body.LastAttempt = &cs.LastAttempt
	}
	if cs.Config != nil {
		red, err := Redact(cs.Config)
		if err != nil {
			a.log.Error("admin: config view failed", "error", err)
			writeError(w, http.StatusInternalServerError, err.Error())
			return
		}
		body.Config = red
	}
	writeJSON(w, http.StatusOK, body)
}

// reloadBody is the body of a successful POST /api/v1/reload.
type reloadBody struct {
	Reloaded bool   `json:"reloaded"`
	Hash     string `json:"hash,omitempty"`
}

// reload serves POST /api/v1/reload. A rejected config answers 422: the
// request was fine, the file it made riffle read was not, and the old
// config stays in force.
func (a *api) reload(w http.ResponseWriter, r *http.Request) {
	if a.o.Reloader == nil {
		notConfigured("reloading")(w, r)
		return
	}
	if err := a.o.Reloader.Reload(); err != nil {
		a.log.Warn("admin: reload rejected; the old config stays in force", "error", err)
		writeError(w, http.StatusUnprocessableEntity, "reload rejected, the old config stays in force: "+err.Error())
		return
	}
	body := reloadBody{Reloaded: true}
	if a.o.Config != nil {
		body.Hash = a.o.Config().Hash
	}
	a.log.Info("admin: config reloaded", "hash", body.Hash)
	writeJSON(w, http.StatusOK, body)
}

// guardrailsBody is the body of GET /api/v1/guardrails and of
// POST /api/v1/guardrails/reset, which reports the trip it cleared.
type guardrailsBody struct {
	Tripped bool        `json:"tripped"`
	Trip    *guard.Trip `json:"trip"`
}

func (a *api) guardrails(w http.ResponseWriter, r *http.Request) {
	if a.o.Guardrails == nil {
		notConfigured("guardrails")(w, r)
		return
	}
	var body guardrailsBody
	if ok, t := a.o.Guardrails.Tripped(); ok {
		body = guardrailsBody{Tripped: true, Trip: &t}
	}
	writeJSON(w, http.StatusOK, body)
}

// resetBody is the body of POST /api/v1/guardrails/reset.
type resetBody struct {
	// Cleared is the trip the reset cleared, null when none was tripped.
	Cleared *guard.Trip `json:"cleared"`
}

func (a *api) resetGuardrails(w http.ResponseWriter, r *http.Request) {
	if a.o.Guardrails == nil {
		notConfigured("guardrails")(w, r)
		return
	}
	var body resetBody
	if ok, t := a.o.Guardrails.Tripped(); ok {
		body.Cleared = &t
	}
	a.o.Guardrails.Reset()
	if body.Cleared != nil {
		a.log.Info("admin: guardrail reset by operator", "guardrail", body.Cleared.Guardrail)
	}
	writeJSON(w, http.StatusOK, body)
}

// snapshot serves GET /api/v1/snapshot: a consistent copy of the live store,
// streamed as it is written. A failure before the first byte answers 500;
// after it the connection is aborted, so the client sees a truncated
// transfer rather than a short file that looks whole.
func (a *api) snapshot(w http.ResponseWriter, r *http.Request) {
	if a.o.Snapshot == nil {
		notConfigured("store snapshots")(w, r)
		return
	}
	name := "riffle-" + a.now().UTC().Format("20060102T150405Z") + ".db"
	cw := &attachmentWriter{w: w, name: name}
	n, err := a.o.Snapshot.Snapshot(cw)
	if err == nil {
		a.log.Info("admin: store snapshot sent", "bytes", n, "file", name)
		return
	}
	a.log.Error("admin: store snapshot failed", "error", err, "bytes_sent", cw.n)
	if cw.n == 0 {
		writeError(w, http.StatusInternalServerError, fmt.Sprintf("store snapshot: %v", err))
		return
	}
	panic(http.ErrAbortHandler)
}

// attachmentWriter sends the attachment's headers with its first byte, so
// that a snapshot failing before then can still answer with an error, and
// counts the bytes sent.
type attachmentWriter struct {
	w    http.ResponseWriter
	name string
	n    int64
}

func (a *attachmentWriter) Write(p []byte) (int, error) {
	if len(p) == 0 {
		return 0, nil
	}
	if a.n == 0 {
		h := a.w.Header()
		h.Set("Content-Type", "application/octet-stream")
		h.Set("Content-Disposition", mime.FormatMediaType("attachment", map[string]string{"filename": a.name}))
		h.Set("Cache-Control", "no-store")
	}
	n, err := a.w.Write(p)
	a.n += int64(n)
	return n, err
}
