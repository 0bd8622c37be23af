package sink

import (
	"crypto/sha256"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
)

// The HTTP API served by NewHandler. Every error is JSON {"error": "..."}.
//
//	Method  Path                          Success                      Errors
//	GET     /                             status page (HTML)           404 (other paths)
//	GET     /v1/models?prefix=&after=&limit=  {"models": [summary…], "next"}   400 (limit)
//	GET     /v1/models/{name}             ModelDoc, ETag "<epoch>-<version>"   304 (If-None-Match), 404, 503 (no version yet)
//	GET     /v1/models/{name}/pmml        PMML 4.4 XML, same ETag      304, 404, 503
//	GET     /v1/models/{name}/ladder      {model, version, lambda_index, ladder}  404, 503
//	GET     /v1/models/{name}/threshold   {model, version, threshold, roc}        404 (unknown or not logistic), 503
//	PUT     /v1/models/{name}/threshold   202 {model, mode, target}    400, 401, 403 (no admin token), 404, 413, 501
//	POST    /v1/models/{name}/predict     Prediction                   400 (also: no feature of the model), 404, 413, 501 (no Predictor), 503
//	GET     /v1/alerts?model=             {"alerts": [Alert…]}         404 (unknown model)
//	GET     /healthz                      {"status": "ok"}
//	GET     /readyz                       {"status": "ready"}          503 {"status": "not ready", "error": reason}
//	                                      (+ "partitions": {template: [n, ...]} held, for shared templates)
//	GET     /metrics                      Prometheus exposition        404 if no Gatherer
//
// Any other method on a known path gets 405 with an Allow header. HEAD is
// served wherever GET is.

// DefaultMaxBodyBytes is the default request body limit.
const DefaultMaxBodyBytes = 1 << 20

// MaxEcho is the most bytes of one request value (a model name, a path, a
// method, a field) that an error message quotes.
const MaxEcho = 64

// maxErrorBytes bounds a whole error message; a longer one is cut (a
// last line of defence: every site quotes request values with QuoteInput).
const maxErrorBytes = 1024

// QuoteInput returns s Go-quoted for an error message or a log line, cut to
// its first MaxEcho bytes (never inside a UTF-8 sequence) and followed by
// its full length when cut, so that no request value is echoed at length.
func QuoteInput(s string) string {
	if len(s) <= MaxEcho {
		return strconv.Quote(s)
	}
	return strconv.Quote(cutUTF8(s, MaxEcho)) + "… (" + strconv.Itoa(len(s)) + " bytes)"
}

// cutUTF8 returns s cut to at most n bytes, not inside a UTF-8 sequence.
func cutUTF8(s string, n int) string {
	if len(s) <= n {
		return s
	}
	for n > 0 && !utf8.RuneStart(s[n]) {
		n--
	}
	return s[:n]
}

var (
	// ErrUnknownModel marks an error about a model the daemon does not
	// run; Predictor and ThresholdSetter errors wrapping it give 404.
	ErrUnknownModel = errors.New("sink: unknown model")
	// ErrNotReady marks an error about a model that cannot answer yet;
	// Predictor errors wrapping it give 503.
	ErrNotReady = errors.New("sink: model not ready")
	// ErrBadRecord marks a record that cannot be scored; Predict returns
	// it when the prediction is not finite. Predictor errors wrapping it
	// give 400, as any error not wrapping ErrUnknownModel or ErrNotReady.
	ErrBadRecord = errors.New("sink: bad record")
)

// Predictor scores one record for POST /v1/models/{name}/predict. body is
// the request body (a record in the wire format); decoding it is the
// Predictor's job, so the process has one record decoder (the daemon's
// Predictor uses package record). Errors wrapping ErrUnknownModel give 404,
// ErrNotReady 503, any other error 400.
type Predictor interface {
	// Predict decodes body as a record and scores it with the named model.
	Predict(model string, body []byte) (*Prediction, error)
}

// ThresholdSetter changes a logistic model's alert threshold for
// PUT /v1/models/{name}/threshold. mode is "fixed" (target is the
// probability threshold itself), "fpr" or "precision" (target is the rate
// to reach on the held-out ring). Errors wrapping ErrUnknownModel give 404,
// ErrNotReady 503, any other error 400.
type ThresholdSetter interface {
	// SetThresholdTarget sets the named model's threshold mode and target.
	SetThresholdTarget(model, mode string, target float64) error
}

// Prediction is the answer to a predict call.
type Prediction struct {
	// Model is the model's name.
	Model string `json:"model"`
	// Version is the model version used.
	Version uint64 `json:"version"`
	// Eta is the linear predictor (the prediction of a squared model).
	Eta float64 `json:"eta"`
	// Probability is σ(Eta) (logistic only).
	Probability *float64 `json:"probability,omitempty"`
	// Threshold is the current alert threshold (logistic only).
	Threshold *float64 `json:"threshold,omitempty"`
	// Positive reports Probability >= Threshold (logistic only).
	Positive *bool `json:"positive,omitempty"`
	// Contributions maps each feature with a nonzero coefficient to
	// coef·x (x imputed with the window mean if missing); Eta is the
	// intercept plus their sum.
	Contributions map[string]float64 `json:"contributions"`
	// Unknown lists the record's feature names that the model does not
	// have; they were ignored. In the record's order (Predict, given a
	// map, sorts them). Empty when none.
	Unknown []string `json:"unknown"`
	// Missing lists the model's features the record gave no value (absent
	// or null), in the model's order; each was imputed with its window
	// mean. Empty when none.
	Missing []string `json:"missing"`
}

// HandlerOptions configures NewHandler. Store is required, and Predictor is
// required to serve predictions.
type HandlerOptions struct {
	// Store holds the models served; required.
	Store *Store
	// AdminToken is the bearer token of state-changing calls; empty
	// refuses them with 403.
	AdminToken string
	// Predictor decodes and scores the records of predict calls; required
	// for predictions: nil answers POST /v1/models/{name}/predict with 501
	// Not Implemented (after 404 for an unknown model), as Thresholds does
	// for threshold changes.
	Predictor Predictor
	// Thresholds applies threshold changes; nil answers PUT with 501.
	Thresholds ThresholdSetter
	// Ready reports readiness for /readyz (nil error = ready); nil means
	// always ready.
	Ready func() error
	// Partitions, if set, returns the partitions of each shared model
	// template this process holds, shown by /readyz as "partitions".
	Partitions func() map[string][]int
	// Gatherer serves /metrics; nil leaves /metrics unserved (404).
	Gatherer prometheus.Gatherer
	// MaxBodyBytes limits request bodies; default DefaultMaxBodyBytes.
	MaxBodyBytes int64
	// Refresh is the status page's auto-refresh period; default 5s.
	Refresh time.Duration
	// Version is the program version shown on the status page.
	Version string
	// Epoch goes into every ETag with the model version ("<epoch>-<version>"),
	// so that a client's cached ETag can never match a different model
	// after a restart, even where a version number comes round again (a
	// daemon without checkpoints or key-value bucket). The daemon uses its
	// start time. Empty: the ETag is the version alone.
	Epoch string
}

// handler serves the API.
type handler struct {
	o         HandlerOptions
	tokenHash [sha256.Size]byte
}

// NewHandler returns the HTTP API (see the endpoint table above). It panics
// if o.Store is nil; without o.Predictor, predict calls answer 501.
func NewHandler(o HandlerOptions) http.Handler {
	if o.Store == nil {
		panic("sink: NewHandler without a Store")
	}
	if o.MaxBodyBytes <= 0 {
		o.MaxBodyBytes = DefaultMaxBodyBytes
	}
	if o.Refresh <= 0 {
		o.Refresh = 5 * time.Second
	}
	h := &handler{o: o, tokenHash: sha256.Sum256([]byte(o.AdminToken))}
	mux := http.NewServeMux()
	mux.Handle("/{$}", methods{http.MethodGet: h.status})
	mux.Handle("/v1/models", methods{http.MethodGet: h.list})
	mux.Handle("/v1/models/{name}", methods{http.MethodGet: h.model})
	mux.Handle("/v1/models/{name}/pmml", methods{http.MethodGet: h.pmml})
	mux.Handle("/v1/models/{name}/ladder", methods{http.MethodGet: h.ladder})
	mux.Handle("/v1/models/{name}/threshold", methods{http.MethodGet: h.threshold, http.MethodPut: h.setThreshold})
	mux.Handle("/v1/models/{name}/predict", methods{http.MethodPost: h.predict})
	mux.Handle("/v1/alerts", methods{http.MethodGet: h.alerts})
	mux.Handle("/healthz", methods{http.MethodGet: h.healthz})
	mux.Handle("/readyz", methods{http.MethodGet: h.readyz})
	if o.Gatherer != nil {
		mux.Handle("/metrics", methods{http.MethodGet: promhttp.HandlerFor(o.Gatherer, promhttp.HandlerOpts{}).ServeHTTP})
	}
	mux.HandleFunc("/", func(w http.ResponseWriter, r *http.Request) {
		writeError(w, http.StatusNotFound, "no such endpoint: "+QuoteInput(r.URL.Path))
	})
	return mux
}

// NewServer returns an http.Server for h on addr with every timeout and
// the header size limit set (slow clients cannot hold connections).
func NewServer(addr string, h http.Handler) *http.Server {
	return &http.Server{
		Addr:              addr,
		Handler:           h,
		ReadHeaderTimeout: 5 * time.Second,
		ReadTimeout:       30 * time.Second,
		WriteTimeout:      30 * time.Second,
		IdleTimeout:       120 * time.Second,
		MaxHeaderBytes:    64 << 10,
	}
}

// methods dispatches on the request method, serving HEAD with GET and
// answering others with a JSON 405 and an Allow header.
type methods map[string]http.HandlerFunc

// ServeHTTP implements http.Handler.
func (m methods) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	f, ok := m[r.Method]
	if !ok && r.Method == http.MethodHead {
		f, ok = m[http.MethodGet]
	}
	if !ok {
		allow := make([]string, 0, len(m)+1)
		for k := range m {
			allow = append(allow, k)
		}
		if _, get := m[http.MethodGet]; get {
			allow = append(allow, http.MethodHead)
		}
		slices.Sort(allow)
		w.Header().Set("Allow", strings.Join(allow, ", "))
		writeError(w, http.StatusMethodNotAllowed, "method "+QuoteInput(r.Method)+" not allowed (allowed: "+strings.Join(allow, ", ")+")")
		return
	}
	f(w, r)
}

// writeJSON writes v as JSON with the given status.
func writeJSON(w http.ResponseWriter, status int, v any) {
	b, err := json.Marshal(v)
	if err != nil {
		writeError(w, http.StatusInternalServerError, "encoding response: "+err.Error())
		return
	}
	writeRaw(w, status, "application/json", append(b, '\n'))
}

// writeRaw writes a body of the given content type.
func writeRaw(w http.ResponseWriter, status int, contentType string, b []byte) {
	h := w.Header()
	h.Set("Content-Type", contentType)
	h.Set("Content-Length", strconv.Itoa(len(b)))
	h.Set("X-Content-Type-Options", "nosniff")
	w.WriteHeader(status)
	_, _ = w.Write(b)
}

// writeError writes {"error": msg}, msg cut to maxErrorBytes.
func writeError(w http.ResponseWriter, status int, msg string) {
	if len(msg) > maxErrorBytes {
		msg = cutUTF8(msg, maxErrorBytes) + "…"
	}
	b, _ := json.Marshal(struct {
		Error string `json:"error"`
	}{msg})
	writeRaw(w, status, "application/json", append(b, '\n'))
}

// published returns the stored document of the request's model or writes
// 404 (unknown) or 503 (no version yet).
func (h *handler) published(w http.ResponseWriter, r *http.Request) (*storedDoc, bool) {
	name := r.PathValue("name")
	sd, known := h.o.Store.stored(name)
	switch {
	case !known:
		writeError(w, http.StatusNotFound, "unknown model "+QuoteInput(name))
		return nil, false
	case sd == nil:
		w.Header().Set("Retry-After", "5")
		writeError(w, http.StatusServiceUnavailable, "model "+QuoteInput(name)+" has not published a version yet")
		return nil, false
	}
	return sd, true
}

// modelSummary is one row of GET /v1/models.
type modelSummary struct {
	Name    string    `json:"name"`
	Version uint64    `json:"version"`
	Loss    string    `json:"loss"`
	Lambda  float64   `json:"lambda"`
	Nonzero int       `json:"nonzero"`
	Updated time.Time `json:"updated"`
}

// MaxListLimit bounds the limit parameter of GET /v1/models.
const MaxListLimit = 10000

// list serves GET /v1/models, sorted by name: ?prefix= keeps the names
// that start with it (a template's instances: "<template>."), ?after=
// those after it, ?limit= at most that many (1..MaxListLimit; default
// all). When more follow, "next" is the after= of the next page.
func (h *handler) list(w http.ResponseWriter, r *http.Request) {
	q := r.URL.Query()
	prefix, after := q.Get("prefix"), q.Get("after")
	limit := -1
	if l := q.Get("limit"); l != "" {
		n, err := strconv.Atoi(l)
		if err != nil || n < 1 || n > MaxListLimit {
			writeError(w, http.StatusBadRequest, fmt.Sprintf("limit %q is not allowed (allowed: 1..%d)", l, MaxListLimit))
			return
		}
		limit = n
	}
	rows := []modelSummary{}
	next := ""
	for _, name := range h.o.Store.Names() {
		if !strings.HasPrefix(name, prefix) || after != "" && name <= after {
			continue
		}
		d, _ := h.o.Store.Model(name)
		if d == nil {
			continue
		}
		if limit >= 0 && len(rows) == limit {
			next = rows[len(rows)-1].Name
			break
		}
		rows = append(rows, modelSummary{d.Model, d.Version, d.Loss, d.Penalty.Lambda, d.Nonzero(), d.Updated})
	}
	out := map[string]any{"models": rows}
	if next != "" {
		out["next"] = next
	}
	writeJSON(w, http.StatusOK, out)
}

// model serves GET /v1/models/{name} with ETag and If-None-Match.
func (h *handler) model(w http.ResponseWriter, r *http.Request) {
	sd, ok := h.published(w, r)
	if !ok || notModified(w, r, h.o.Epoch, sd.doc.Version) {
		return
	}
	writeRaw(w, http.StatusOK, "application/json", sd.json)
}

// pmml serves GET /v1/models/{name}/pmml.
func (h *handler) pmml(w http.ResponseWriter, r *http.Request) {
	sd, ok := h.published(w, r)
	if !ok || notModified(w, r, h.o.Epoch, sd.doc.Version) {
		return
	}
	b, err := PMML(sd.doc)
	if err != nil {
		writeError(w, http.StatusInternalServerError, err.Error())
		return
	}
	writeRaw(w, http.StatusOK, "application/xml; charset=utf-8", b)
}

// notModified sets the validator headers of version and, if the request's
// If-None-Match matches, answers 304 and returns true (RFC 9110 §13.1.2,
// §15.4.5).
func notModified(w http.ResponseWriter, r *http.Request, epoch string, version uint64) bool {
	etag := `"` + strconv.FormatUint(version, 10) + `"`
	if epoch != "" {
		etag = `"` + epoch + "-" + strconv.FormatUint(version, 10) + `"`
	}
	w.Header().Set("ETag", etag)
	w.Header().Set("Cache-Control", "no-cache")
	if inm := r.Header.Values("If-None-Match"); len(inm) > 0 && matchETag(strings.Join(inm, ","), etag) {
		w.WriteHeader(http.StatusNotModified)
		return true
	}
	return false
}

// matchETag reports whether the If-None-Match field value list matches etag
// with the weak comparison of RFC 9110 §8.8.3.2 (a W/ prefix is ignored),
// or is "*".
func matchETag(list, etag string) bool {
	for s := strings.TrimSpace(list); s != ""; {
		if s[0] == ',' {
			s = strings.TrimSpace(s[1:])
			continue
		}
		if s[0] == '*' {
			return true
		}
		s = strings.TrimPrefix(s, "W/")
		if s == "" || s[0] != '"' {
			return false // malformed: ignore the field (RFC 9110 §13.1.2 leaves it to us)
		}
		end := strings.IndexByte(s[1:], '"')
		if end < 0 {
			return false
		}
		if s[:end+2] == etag {
			return true
		}
		s = strings.TrimSpace(s[end+2:])
	}
	return false
}

// ladder serves GET /v1/models/{name}/ladder.
func (h *handler) ladder(w http.ResponseWriter, r *http.Request) {
	sd, ok := h.published(w, r)
	if !ok {
		return
	}
	d := sd.doc
	writeJSON(w, http.StatusOK, struct {
		Model       string        `json:"model"`
		Version     uint64        `json:"version"`
		LambdaIndex int           `json:"lambda_index"`
		Ladder      []LadderEntry `json:"ladder"`
		Grid        *GridSpec     `json:"grid,omitempty"`
	}{d.Model, d.Version, d.LambdaIndex, d.Ladder, d.Grid})
}

// readBody reads the request body up to the limit, writing 413 or 400 on
// failure.
func (h *handler) readBody(w http.ResponseWriter, r *http.Request) ([]byte, bool) {
	tooLarge := fmt.Sprintf("request body larger than %d bytes", h.o.MaxBodyBytes)
	if r.ContentLength > h.o.MaxBodyBytes {
		writeError(w, http.StatusRequestEntityTooLarge, tooLarge)
		return nil, false
	}
	b, err := io.ReadAll(http.MaxBytesReader(w, r.Body, h.o.MaxBodyBytes))
	if err != nil {
		if _, ok := errors.AsType[*http.MaxBytesError](err); ok {
			writeError(w, http.StatusRequestEntityTooLarge, tooLarge)
		} else {
			writeError(w, http.StatusBadRequest, "reading body: "+err.Error())
		}
		return nil, false
	}
	return b, true
}

// statusOf maps a Predictor or ThresholdSetter error to a status code.
func statusOf(err error) int {
	switch {
	case errors.Is(err, ErrUnknownModel):
		return http.StatusNotFound
	case errors.Is(err, ErrNotReady):
		return http.StatusServiceUnavailable
	}
	return http.StatusBadRequest
}

// predict serves POST /v1/models/{name}/predict.
func (h *handler) predict(w http.ResponseWriter, r *http.Request) {
	name := r.PathValue("name")
	if _, known := h.o.Store.Model(name); !known {
		writeError(w, http.StatusNotFound, "unknown model "+QuoteInput(name))
		return
	}
	if h.o.Predictor == nil {
		writeError(w, http.StatusNotImplemented, "predictions are not supported by this server (no Predictor)")
		return
	}
	b, ok := h.readBody(w, r)
	if !ok {
		return
	}
	p, err := h.o.Predictor.Predict(name, b)
	if err != nil {
		writeError(w, statusOf(err), err.Error())
		return
	}
	writeJSON(w, http.StatusOK, p)
}

// alerts serves GET /v1/alerts?model=.
func (h *handler) alerts(w http.ResponseWriter, r *http.Request) {
	name := r.URL.Query().Get("model")
	if name != "" {
		if _, known := h.o.Store.Model(name); !known {
			writeError(w, http.StatusNotFound, "unknown model "+QuoteInput(name))
			return
		}
	}
	list := h.o.Store.Alerts(name)
	if list == nil {
		list = []Alert{}
	}
	writeJSON(w, http.StatusOK, map[string]any{"alerts": list})
}

// healthz serves GET /healthz: the process is up.
func (h *handler) healthz(w http.ResponseWriter, r *http.Request) {
	writeJSON(w, http.StatusOK, map[string]string{"status": "ok"})
}

// readyz serves GET /readyz from the Ready function.
func (h *handler) readyz(w http.ResponseWriter, r *http.Request) {
	if err := h.ready(); err != nil {
		writeJSON(w, http.StatusServiceUnavailable, map[string]string{"status": "not ready", "error": err.Error()})
		return
	}
	if h.o.Partitions != nil {
		if ps := h.o.Partitions(); len(ps) > 0 {
			writeJSON(w, http.StatusOK, map[string]any{"status": "ready", "partitions": ps})
			return
		}
	}
	writeJSON(w, http.StatusOK, map[string]string{"status": "ready"})
}

// ready calls the Ready function, if any.
func (h *handler) ready() error {
	if h.o.Ready == nil {
		return nil
	}
	return h.o.Ready()
}
