package sink

import (
	"bytes"
	"html/template"
	"math"
	"net/http"
	"slices"
	"strconv"
	"time"
)

// The status page lists, per model, the latest drift alerts
// (performance, data, model) and the latest prediction alerts.
const (
	statusDriftAlerts      = 10
	statusPredictionAlerts = 3
)

// statusTemplate is the status page: self-contained HTML with inline CSS
// and inline SVG charts, no scripts and no external assets, refreshed by a
// meta tag. It reflows to a single column on a narrow screen.
var statusTemplate = template.Must(template.New("status").Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta http-equiv="refresh" content="{{.Refresh}}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>lariat status</title>
<style>
*{box-sizing:border-box}
body{font:14px/1.45 system-ui,sans-serif;margin:0 auto;padding:1em;max-width:1400px;color:#1d2939;background:#f5f6f8}
h1{font-size:1.4em;margin:0 0 .2em}h2{font-size:1.2em;margin:0;overflow-wrap:anywhere}h3{font-size:.95em;margin:0 0 .4em;color:#475467}
a{color:#175cd3}
.ok{color:#176117}.bad{color:#a11}.muted{color:#667085}
.critical{color:#b42318;font-weight:bold}.warning{color:#b54708}.info{color:#475467}
section.model{background:#fff;border:1px solid #e4e7ec;border-radius:8px;padding:1em;margin:1em 0}
.facts{display:flex;flex-wrap:wrap;gap:.3em 1.2em;margin:.4em 0 .8em;padding:0}
.facts div{white-space:nowrap}.facts dt{display:inline;color:#667085}.facts dd{display:inline;margin:0 0 0 .3em;font-variant-numeric:tabular-nums}
.grid{display:grid;grid-template-columns:repeat(auto-fit,minmax(min(100%,340px),1fr));gap:1em}
.card{min-width:0}
svg.chart{display:block;width:100%;height:auto;background:#fff}
svg.roc{max-width:320px}
svg text{font:11px system-ui,sans-serif;fill:#475467}
svg text.lb{font-size:11.5px;fill:#1d2939}svg text.ax{font-size:11.5px}svg text.mk{font-size:11.5px;font-weight:bold;fill:#b42318}
.legend{font-size:.85em;color:#667085;margin:.2em 0 0}
.pos{color:#2563eb}.neg{color:#dc6803}
ul.alerts{list-style:none;margin:0;padding:0}
ul.alerts li{padding:.3em 0;border-bottom:1px solid #eaecf0;overflow-wrap:anywhere}
ul.alerts .when{color:#667085;font-size:.85em;font-variant-numeric:tabular-nums}
</style>
</head>
<body>
<h1>lariat</h1>
<p class="muted">{{if .Version}}version {{.Version}} · {{end}}{{.Now}} ·
{{if .Ready}}<span class="ok">ready</span>{{else}}<span class="bad">not ready: {{.NotReady}}</span>{{end}}
· refreshes every {{.Refresh}} s</p>
{{range .Models}}<section class="model" id="model-{{.Name}}">
<h2><a href="/v1/models/{{.Name}}">{{.Name}}</a> <span class="muted">{{.Loss}} · {{.Penalty}}</span></h2>
<dl class="facts">
<div><dt>λ*</dt><dd>{{.Lambda}} (index {{.Index}})</dd></div>
<div><dt>nonzero</dt><dd>{{.Nonzero}} / {{.Features}}</dd></div>
<div><dt>held-out loss</dt><dd>{{.HoldoutLoss}} ± {{.SE}}</dd></div>
<div><dt>quality</dt><dd>{{.Quality}}</dd></div>
<div><dt>window</dt><dd>{{.Window}}</dd></div>
<div><dt>version</dt><dd>{{.Version}}</dd></div>
<div><dt>updated</dt><dd>{{.Updated}}</dd></div>
{{if .Threshold}}<div><dt>threshold</dt><dd>{{.Threshold}}</dd></div>{{end}}
<div><dt>last alert</dt><dd>{{.LastAlert}}</dd></div>
{{if .Problem}}<div><dt>problem</dt><dd class="bad">{{.Problem}}</dd></div>{{end}}
</dl>
<div class="grid">
<div class="card"><h3>Coefficients (standardized)</h3>{{.Bars}}
<p class="legend"><span class="pos">■ positive</span> · <span class="neg">■ negative</span> · sorted by magnitude</p></div>
<div class="card"><h3>Regularization path</h3>{{if .Path}}{{.Path}}
<p class="legend">each feature's standardized coefficient over the λ ladder; dashed: λ*</p>{{else}}<p class="muted">no path published yet</p>{{end}}</div>
<div class="card"><h3>Held-out loss along the ladder</h3>{{.LossChart}}
<p class="legend">± 1 SE bars; dashed: the minimum and one-SE choices; red: λ*</p></div>
<div class="card"><h3>Held-out loss, recent versions</h3>{{.Spark}}</div>
{{if .Logistic}}<div class="card"><h3>ROC and threshold</h3>{{if .ROC}}{{.ROC}}<p class="legend">{{.Operating}}</p>{{else}}<p class="muted">no ROC table yet</p>{{end}}</div>{{end}}
<div class="card"><h3>Drift alerts</h3>
{{if .Drift}}<ul class="alerts">{{range .Drift}}<li><span class="{{.Severity}}">{{.Severity}}</span> {{.Kind}} <span class="when">{{.Time}}</span><br>{{.Message}}</li>{{end}}</ul>{{else}}<p class="muted">no drift alerts</p>{{end}}
<h3 style="margin-top:.8em">Prediction alerts: {{.PredictionCount}}</h3>
{{if .Predictions}}<ul class="alerts">{{range .Predictions}}<li><span class="{{.Severity}}">{{.Severity}}</span> <span class="when">{{.Time}}</span><br>{{.Message}}</li>{{end}}</ul>{{end}}
</div>
</div>
</section>
{{else}}<p class="muted">no model has published yet</p>{{end}}
{{if .Pending}}<p class="muted">waiting for a first version: {{range $i, $n := .Pending}}{{if $i}}, {{end}}{{$n}}{{end}}</p>{{end}}
<p class="muted">JSON: <a href="/v1/models">/v1/models</a> · <a href="/v1/alerts">/v1/alerts</a> · <a href="/readyz">/readyz</a>{{if .Metrics}} · <a href="/metrics">/metrics</a>{{end}}</p>
</body>
</html>
`))

// statusPage is the data of statusTemplate.
type statusPage struct {
	Version  string
	Now      string
	Ready    bool
	NotReady string
	Refresh  int
	Models   []statusModel
	Pending  []string
	Metrics  bool
}

// statusModel is one model's section (numbers preformatted, charts
// rendered).
type statusModel struct {
	Name, Loss, Penalty, Lambda, HoldoutLoss, SE, Quality, Updated, LastAlert string
	Threshold, Operating, Problem                                             string
	Index, Nonzero, Features, Window                                          int
	Version, PredictionCount                                                  uint64
	Logistic                                                                  bool
	Bars, Path, LossChart, Spark, ROC                                         template.HTML
	Drift, Predictions                                                        []statusAlert
}

// statusAlert is one listed alert.
type statusAlert struct {
	Time, Kind, Severity, Message string
}

// num formats x compactly; NaN and ±Inf as "–".
func num(x float64) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "–"
	}
	return strconv.FormatFloat(x, 'g', 4, 64)
}

// statusModelOf builds a model's section from its document and the
// store's path, loss history, ROC table and alerts.
func statusModelOf(s *Store, d *ModelDoc) statusModel {
	q := "AUC " + num(float64(d.Holdout.AUC))
	if !d.Logistic() {
		q = "R² " + num(float64(d.Holdout.R2))
	}
	if d.Holdout.Records == 0 {
		q = "–"
	}
	m := statusModel{
		Name: d.Model, Loss: d.Loss, Penalty: d.Penalty.Kind, Lambda: num(d.Penalty.Lambda),
		HoldoutLoss: num(float64(d.Holdout.Loss)), SE: num(float64(d.Holdout.SE)), Quality: q,
		Updated: d.Updated.Format(time.RFC3339), Index: d.LambdaIndex, Nonzero: d.Nonzero(),
		Features: len(d.Features), Window: d.Records.Window, Version: d.Version, Logistic: d.Logistic(),
		Bars: coefChart(d), LossChart: lossChart(d), Spark: sparkline(d.Model, s.LossHistory(d.Model)),
	}
	if p := s.Path(d.Model); p != nil && len(p.Lambdas) > 0 {
		m.Path = pathChart(d, p)
	}
	if d.Threshold != nil {
		m.Threshold = num(d.Threshold.Value) + " (" + d.Threshold.Mode
		if d.Threshold.Mode != "fixed" {
			m.Threshold += " " + num(d.Threshold.Target)
		}
		m.Threshold += ")"
	}
	if rows := s.ROC(d.Model); m.Logistic && len(rows) > 0 {
		m.ROC, m.Operating = rocChart(d, rows)
	}
	drift, _ := s.alertsOf(d.Model, false)
	preds, count := s.alertsOf(d.Model, true)
	m.PredictionCount = count
	m.Drift = statusAlerts(drift, statusDriftAlerts)
	m.Predictions = statusAlerts(preds, statusPredictionAlerts)
	m.Problem = s.Problem(d.Model)
	if recent := s.Alerts(d.Model); len(recent) > 0 {
		a := recent[len(recent)-1]
		m.LastAlert = string(a.Severity) + " " + string(a.Kind) + " " + alertTime(a)
	} else {
		m.LastAlert = "–"
	}
	return m
}

// statusAlerts returns the newest n of alerts (oldest first), newest first.
func statusAlerts(alerts []Alert, n int) []statusAlert {
	var out []statusAlert
	for _, a := range slices.Backward(alerts[max(0, len(alerts)-n):]) {
		out = append(out, statusAlert{Time: alertTime(a), Kind: string(a.Kind), Severity: string(a.Severity), Message: a.Message})
	}
	return out
}

// status serves the status page.
func (h *handler) status(w http.ResponseWriter, r *http.Request) {
	page := statusPage{
		Version: h.o.Version,
		Now:     time.Now().UTC().Format(time.RFC3339),
		Refresh: max(1, int(h.o.Refresh/time.Second)),
		Metrics: h.o.Gatherer != nil,
	}
	if err := h.ready(); err != nil {
		page.NotReady = err.Error()
	} else {
		page.Ready = true
	}
	for _, n := range h.o.Store.Names() {
		if d, _ := h.o.Store.Model(n); d != nil {
			page.Models = append(page.Models, statusModelOf(h.o.Store, d))
		} else {
			page.Pending = append(page.Pending, n)
		}
	}
	var b bytes.Buffer
	if err := statusTemplate.Execute(&b, page); err != nil {
		writeError(w, http.StatusInternalServerError, "rendering status page: "+err.Error())
		return
	}
	w.Header().Set("Content-Security-Policy", "default-src 'none'; style-src 'unsafe-inline'")
	w.Header().Set("Cache-Control", "no-store")
	writeRaw(w, http.StatusOK, "text/html; charset=utf-8", b.Bytes())
}

// alertTime formats an alert's record time, "–" if it has none.
func alertTime(a Alert) string {
	if a.Time.IsZero() {
		return "–"
	}
	return a.Time.UTC().Format(time.RFC3339)
}
