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

// statusAlerts is the number of recent alerts on the status page.
const statusAlerts = 20

// statusTemplate is the status page: self-contained HTML with inline CSS,
// no scripts and no external assets, refreshed by a meta tag.
var statusTemplate = template.Must(template.New("status").Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta http-equiv="refresh" content="{{.Refresh}}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>lariat status</title>
<style>
body{font:14px/1.4 system-ui,sans-serif;margin:1.5em;color:#222;background:#fafafa}
h1{font-size:1.4em;margin:0 0 .2em}h2{font-size:1.1em;margin:1.4em 0 .4em}
table{border-collapse:collapse;background:#fff}
th,td{padding:.3em .7em;border-bottom:1px solid #ddd;text-align:left}
td.n{text-align:right;font-variant-numeric:tabular-nums}
.ok{color:#176117}.bad{color:#a11}.muted{color:#777}
.critical{color:#a11;font-weight:bold}.warning{color:#9a5b00}.info{color:#555}
</style>
</head>
<body>
<h1>lariat</h1>
<p class="muted">{{if .Version}}version {{.Version}} · {{end}}{{.Now}} ·
{{if .Ready}}<span class="ok">ready</span>{{else}}<span class="bad">not ready: {{.NotReady}}</span>{{end}}
· refreshes every {{.Refresh}} s</p>
<h2>Models</h2>
{{if .Models}}<table>
<tr><th>model</th><th>loss</th><th>penalty</th><th>λ</th><th>λ index</th><th>nonzero</th><th>held-out loss</th><th>±SE</th><th>{{"AUC / R²"}}</th><th>window</th><th>version</th><th>updated</th><th>last alert</th></tr>
{{range .Models}}<tr>
<td><a href="/v1/models/{{.Name}}">{{.Name}}</a></td><td>{{.Loss}}</td><td>{{.Penalty}}</td>
<td class="n">{{.Lambda}}</td><td class="n">{{.Index}}</td><td class="n">{{.Nonzero}} / {{.Features}}</td>
<td class="n">{{.HoldoutLoss}}</td><td class="n">{{.SE}}</td><td class="n">{{.Quality}}</td>
<td class="n">{{.Window}}</td><td class="n">{{.Version}}</td><td>{{.Updated}}</td><td>{{.LastAlert}}</td>
</tr>
{{end}}</table>{{else}}<p class="muted">no model has published yet</p>{{end}}
{{if .Pending}}<p class="muted">waiting for a first version: {{range $i, $n := .Pending}}{{if $i}}, {{end}}{{$n}}{{end}}</p>{{end}}
<h2>Recent alerts</h2>
{{if .Alerts}}<table>
<tr><th>time</th><th>model</th><th>kind</th><th>severity</th><th>statistic</th><th>threshold</th><th>message</th></tr>
{{range .Alerts}}<tr>
<td>{{.Time}}</td><td>{{.Model}}</td><td>{{.Kind}}</td><td class="{{.Severity}}">{{.Severity}}</td>
<td class="n">{{.Statistic}}</td><td class="n">{{.Threshold}}</td><td>{{.Message}}</td>
</tr>
{{end}}</table>{{else}}<p class="muted">no alerts</p>{{end}}
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
	Alerts   []statusAlert
	Metrics  bool
}

// statusModel is one row of the models table (numbers preformatted).
type statusModel struct {
	Name, Loss, Penalty, Lambda, HoldoutLoss, SE, Quality, Updated, LastAlert string
	Index, Nonzero, Features, Window                                          int
	Version                                                                   uint64
}

// statusAlert is one row of the alerts table.
type statusAlert struct {
	Time, Model, Kind, Severity, Statistic, Threshold, Message string
}

// num formats x compactly; NaN and ±Inf as "–".
func num(x float64) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "–"
	}
	return strconv.FormatFloat(x, 'g', 4, 64)
}

// statusModelOf builds a models-table row.
func statusModelOf(d *ModelDoc) statusModel {
	q := "AUC " + num(float64(d.Holdout.AUC))
	if !d.Logistic() {
		q = "R² " + num(float64(d.Holdout.R2))
	}
	if d.Holdout.Records == 0 {
		q = "–"
	}
	return statusModel{
		Name: d.Model, Loss: d.Loss, Penalty: d.Penalty.Kind, Lambda: num(d.Penalty.Lambda),
		HoldoutLoss: num(float64(d.Holdout.Loss)), SE: num(float64(d.Holdout.SE)), Quality: q,
		Updated: d.Updated.Format(time.RFC3339), Index: d.LambdaIndex, Nonzero: d.Nonzero(),
		Features: len(d.Features), Window: d.Records.Window, Version: d.Version,
	}
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
			row := statusModelOf(d)
			if recent := h.o.Store.Alerts(n); len(recent) > 0 {
				a := recent[len(recent)-1]
				row.LastAlert = string(a.Severity) + " " + string(a.Kind) + " " + alertTime(a)
			}
			page.Models = append(page.Models, row)
		} else {
			page.Pending = append(page.Pending, n)
		}
	}
	alerts := h.o.Store.Alerts("")
	alerts = alerts[max(0, len(alerts)-statusAlerts):]
	for _, a := range slices.Backward(alerts) {
		page.Alerts = append(page.Alerts, statusAlert{
			Time: alertTime(a), Model: a.Model, Kind: string(a.Kind), Severity: string(a.Severity),
			Statistic: num(a.Statistic), Threshold: num(a.Threshold), Message: a.Message,
		})
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
