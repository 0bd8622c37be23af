package sink

import (
	"bytes"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"strings"
)

// threshold serves GET /v1/models/{name}/threshold.
func (h *handler) threshold(w http.ResponseWriter, r *http.Request) {
	sd, ok := h.published(w, r)
	if !ok {
		return
	}
	d := sd.doc
	if !d.Logistic() {
		writeError(w, http.StatusNotFound, fmt.Sprintf("model %s uses the %s loss: it has no threshold", QuoteInput(d.Model), d.Loss))
		return
	}
	roc := h.o.Store.ROC(d.Model)
	if roc == nil {
		roc = []ROCRow{}
	}
	writeJSON(w, http.StatusOK, struct {
		Model     string     `json:"model"`
		Version   uint64     `json:"version"`
		Threshold *Threshold `json:"threshold"`
		ROC       []ROCRow   `json:"roc"`
	}{d.Model, d.Version, d.Threshold, roc})
}

// authorize checks the bearer token of a state-changing call, writing 403
// when no admin token is configured and 401 when the token is missing or
// wrong. The comparison is constant-time over SHA-256 digests, so neither
// the token's content nor its length leaks through timing.
func (h *handler) authorize(w http.ResponseWriter, r *http.Request) bool {
	if h.o.AdminToken == "" {
		writeError(w, http.StatusForbidden, "state-changing calls are disabled: no admin token is configured (http.admin_token_file or http.admin_token_env)")
		return false
	}
	auth := r.Header.Get("Authorization")
	scheme, token, ok := strings.Cut(auth, " ")
	if !ok || !strings.EqualFold(scheme, "Bearer") || token == "" {
		w.Header().Set("WWW-Authenticate", `Bearer realm="lariat"`)
		writeError(w, http.StatusUnauthorized, "missing bearer token (Authorization: Bearer <admin token>)")
		return false
	}
	got := sha256.Sum256([]byte(strings.TrimSpace(token)))
	if subtle.ConstantTimeCompare(got[:], h.tokenHash[:]) != 1 {
		w.Header().Set("WWW-Authenticate", `Bearer realm="lariat", error="invalid_token"`)
		writeError(w, http.StatusUnauthorized, "invalid bearer token")
		return false
	}
	return true
}

// thresholdRequest is the body of PUT /v1/models/{name}/threshold.
type thresholdRequest struct {
	Mode   string   `json:"mode"`
	Target *float64 `json:"target"`
	Value  *float64 `json:"value"` // alias of target for mode fixed
}

// parseThreshold validates a threshold request body.
func parseThreshold(b []byte) (mode string, target float64, err error) {
	var req thresholdRequest
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&req); err != nil {
		return "", 0, fmt.Errorf("body must be {\"mode\": \"fixed|fpr|precision\", \"target\": number}: %s", jsonError(err))
	}
	if _, err := dec.Token(); err != io.EOF {
		return "", 0, errors.New("body must hold exactly one JSON object")
	}
	t := req.Target
	if t == nil {
		t = req.Value
	}
	switch {
	case req.Mode != "fixed" && req.Mode != "fpr" && req.Mode != "precision":
		return "", 0, fmt.Errorf("mode %s (allowed: fixed, fpr, precision)", QuoteInput(req.Mode))
	case t == nil:
		return "", 0, errors.New("target is required")
	case req.Mode == "fixed" && !(*t > 0 && *t < 1):
		return "", 0, fmt.Errorf("fixed threshold %v must be in (0, 1)", *t)
	case !(*t > 0 && *t < 1):
		return "", 0, fmt.Errorf("target %v must be in (0, 1), as in the configuration", *t)
	}
	return req.Mode, *t, nil
}

// jsonError describes an encoding/json decoding error without echoing the
// request: an unknown field is named by a short prefix (QuoteInput), any
// other error by encoding/json's message, which quotes at most one
// character of the input.
func jsonError(err error) string {
	if name, ok := strings.CutPrefix(err.Error(), "json: unknown field "); ok {
		if u, uerr := strconv.Unquote(name); uerr == nil {
			name = u
		}
		return "unknown field " + QuoteInput(name)
	}
	return cutUTF8(err.Error(), 2*MaxEcho)
}

// setThreshold serves PUT /v1/models/{name}/threshold.
func (h *handler) setThreshold(w http.ResponseWriter, r *http.Request) {
	if !h.authorize(w, r) {
		return
	}
	name := r.PathValue("name")
	doc, known := h.o.Store.Model(name)
	switch {
	case !known:
		writeError(w, http.StatusNotFound, "unknown model "+QuoteInput(name))
		return
	case doc != nil && !doc.Logistic():
		writeError(w, http.StatusNotFound, fmt.Sprintf("model %s uses the %s loss: it has no threshold", QuoteInput(name), doc.Loss))
		return
	case h.o.Thresholds == nil:
		writeError(w, http.StatusNotImplemented, "threshold changes are not supported by this server")
		return
	}
	b, ok := h.readBody(w, r)
	if !ok {
		return
	}
	mode, target, err := parseThreshold(b)
	if err != nil {
		writeError(w, http.StatusBadRequest, err.Error())
		return
	}
	if err := h.o.Thresholds.SetThresholdTarget(name, mode, target); err != nil {
		writeError(w, statusOf(err), err.Error())
		return
	}
	writeJSON(w, http.StatusAccepted, map[string]any{"model": name, "mode": mode, "target": target})
}
