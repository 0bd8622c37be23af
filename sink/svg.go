package sink

import (
	"cmp"
	"html/template"
	"math"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"
)

// The status page's charts are inline SVG written here: every text that
// reaches an SVG goes through esc, every number through f, so the markup is
// well-formed XML and safe to mark as template.HTML.

// Chart colours: positive and negative coefficients, accents.
const (
	colPos    = "#2563eb"
	colNeg    = "#dc6803"
	colAccent = "#b42318"
	colMuted  = "#98a2b3"
	colGrid   = "#e4e7ec"
	colInk    = "#344054"
)

// pathPalette colours the coefficient paths (cycled).
var pathPalette = [...]string{"#2563eb", "#dc6803", "#079455", "#b42318", "#7a5af8", "#0e9384", "#c11574", "#667085", "#ca8504", "#155eef"}

// esc escapes s for SVG text and attribute values, dropping the control
// characters XML 1.0 cannot carry.
func esc(s string) string {
	s = strings.Map(func(r rune) rune {
		if r < 0x20 && r != '\t' && r != '\n' && r != '\r' || r == utf8.RuneError || r == 0xFFFE || r == 0xFFFF {
			return -1
		}
		return r
	}, s)
	return template.HTMLEscapeString(s)
}

// f formats a coordinate with one decimal.
func f(x float64) string { return strconv.FormatFloat(x, 'f', 1, 64) }

// short cuts a label to n runes, with an ellipsis.
func short(s string, n int) string {
	if utf8.RuneCountInString(s) <= n {
		return s
	}
	r := []rune(s)
	return string(r[:n-1]) + "…"
}

// svgBuilder accumulates one SVG element.
type svgBuilder struct{ strings.Builder }

// open starts an SVG of the given viewBox size with an accessible label.
func newSVG(w, h float64, class, label string) *svgBuilder {
	b := &svgBuilder{}
	b.WriteString(`<svg class="` + class + `" viewBox="0 0 ` + f(w) + ` ` + f(h) +
		`" role="img" aria-label="` + esc(label) + `">`)
	b.WriteString(`<title>` + esc(label) + `</title>`)
	return b
}

// done closes the SVG and returns it as trusted HTML.
func (b *svgBuilder) done() template.HTML {
	b.WriteString(`</svg>`)
	return template.HTML(b.String()) // every text was escaped by esc
}

func (b *svgBuilder) line(x1, y1, x2, y2 float64, stroke string, width float64, dash bool) {
	b.WriteString(`<line x1="` + f(x1) + `" y1="` + f(y1) + `" x2="` + f(x2) + `" y2="` + f(y2) +
		`" stroke="` + stroke + `" stroke-width="` + f(width) + `"`)
	if dash {
		b.WriteString(` stroke-dasharray="4 3"`)
	}
	b.WriteString(`/>`)
}

func (b *svgBuilder) text(x, y float64, anchor, class, s string) {
	b.WriteString(`<text x="` + f(x) + `" y="` + f(y) + `" text-anchor="` + anchor + `" class="` + class + `">` + esc(s) + `</text>`)
}

func (b *svgBuilder) polyline(xs, ys []float64, stroke string, width float64, title string) {
	b.WriteString(`<polyline fill="none" stroke="` + stroke + `" stroke-width="` + f(width) + `" stroke-linejoin="round" points="`)
	for i := range xs {
		if i > 0 {
			b.WriteByte(' ')
		}
		b.WriteString(f(xs[i]) + "," + f(ys[i]))
	}
	b.WriteString(`">`)
	if title != "" {
		b.WriteString(`<title>` + esc(title) + `</title>`)
	}
	b.WriteString(`</polyline>`)
}

func (b *svgBuilder) circle(x, y, r float64, fill, title string) {
	b.WriteString(`<circle cx="` + f(x) + `" cy="` + f(y) + `" r="` + f(r) + `" fill="` + fill + `">`)
	if title != "" {
		b.WriteString(`<title>` + esc(title) + `</title>`)
	}
	b.WriteString(`</circle>`)
}

// scale maps [lo, hi] onto [a, b]; a degenerate domain maps to the middle.
type scale struct{ lo, hi, a, b float64 }

func (s scale) at(x float64) float64 {
	if s.hi == s.lo {
		return (s.a + s.b) / 2
	}
	return s.a + (x-s.lo)/(s.hi-s.lo)*(s.b-s.a)
}

// ticks returns about n round values covering [lo, hi].
func ticks(lo, hi float64, n int) []float64 {
	if !(hi > lo) || n < 1 {
		return []float64{lo}
	}
	raw := (hi - lo) / float64(n)
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	step := mag
	for _, m := range []float64{1, 2, 2.5, 5, 10} {
		if m*mag >= raw {
			step = m * mag
			break
		}
	}
	var out []float64
	for v := math.Ceil(lo/step) * step; v <= hi+step*1e-9; v += step {
		out = append(out, math.Round(v/step)*step+0) // +0: no "-0" label
	}
	return out
}

// extent returns the finite minimum and maximum of xs, padded when equal.
func extent(xs ...[]float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, s := range xs {
		for _, x := range s {
			if finite(x) {
				lo, hi = min(lo, x), max(hi, x)
			}
		}
	}
	if lo > hi {
		return 0, 1
	}
	if lo == hi {
		d := max(math.Abs(lo)*0.1, 1e-9)
		lo, hi = lo-d, hi+d
	}
	return lo, hi
}

// plotBox is a chart's inner rectangle in viewBox units.
type plotBox struct{ x0, y0, x1, y1 float64 }

// axes draws the horizontal grid with y tick labels and the x tick labels.
func (b *svgBuilder) axes(p plotBox, xs, ys scale, xTicks, yTicks []float64, xLabel string) {
	for _, v := range yTicks {
		y := ys.at(v)
		b.line(p.x0, y, p.x1, y, colGrid, 1, false)
		b.text(p.x0-4, y+3.5, "end", "tk", num(v))
	}
	for _, v := range xTicks {
		x := xs.at(v)
		b.line(x, p.y1, x, p.y1+4, colMuted, 1, false)
		b.text(x, p.y1+15, "middle", "tk", num(v))
	}
	b.line(p.x0, p.y1, p.x1, p.y1, colMuted, 1, false)
	b.line(p.x0, p.y0, p.x0, p.y1, colMuted, 1, false)
	if xLabel != "" {
		b.text((p.x0+p.x1)/2, p.y1+30, "middle", "ax", xLabel)
	}
}

// coefBar is one bar of the coefficient chart.
type coefBar struct {
	name  string
	value float64
}

// sortedBars returns the nonzero standardized coefficients of d, largest
// magnitude first (ties by name).
func sortedBars(d *ModelDoc) []coefBar {
	bars := make([]coefBar, 0, len(d.Standardized))
	for n, v := range d.Standardized {
		if v != 0 && finite(v) {
			bars = append(bars, coefBar{n, v})
		}
	}
	slices.SortFunc(bars, func(a, b coefBar) int {
		if c := cmp.Compare(math.Abs(b.value), math.Abs(a.value)); c != 0 {
			return c
		}
		return strings.Compare(a.name, b.name)
	})
	return bars
}

// maxBars is the number of coefficients the bar chart draws.
const maxBars = 40

// coefChart draws the nonzero standardized coefficients as horizontal bars
// sorted by magnitude, positive and negative in two colours.
func coefChart(d *ModelDoc) template.HTML {
	bars := sortedBars(d)
	more := 0
	if len(bars) > maxBars {
		bars, more = bars[:maxBars], len(bars)-maxBars
	}
	const w, rowH, top = 400.0, 20.0, 8.0
	h := top + rowH*float64(max(len(bars), 1)) + 24
	if more > 0 {
		h += 16
	}
	b := newSVG(w, h, "chart bars", "standardized coefficients of "+d.Model)
	if len(bars) == 0 {
		b.text(w/2, h/2, "middle", "ax", "every coefficient is zero")
		return b.done()
	}
	vals := make([]float64, len(bars))
	for i, c := range bars {
		vals[i] = c.value
	}
	lo, hi := extent(vals, []float64{0})
	p := plotBox{x0: 140, y0: top, x1: w - 52, y1: top + rowH*float64(len(bars))}
	xs := scale{lo, hi, p.x0, p.x1}
	for _, v := range ticks(lo, hi, 4) {
		x := xs.at(v)
		b.line(x, p.y0, x, p.y1, colGrid, 1, false)
		b.text(x, p.y1+14, "middle", "tk", num(v))
	}
	zero := xs.at(0)
	for i, c := range bars {
		y := p.y0 + rowH*float64(i)
		x1 := xs.at(c.value)
		col, anchor, tx := colPos, "start", max(zero, x1)+3
		if c.value < 0 {
			col = colNeg
		}
		if c.value < 0 && zero > p.x1-1 { // all negative: value text right of zero
			tx = zero + 3
		}
		b.WriteString(`<rect x="` + f(min(zero, x1)) + `" y="` + f(y+3) + `" width="` + f(max(math.Abs(x1-zero), 1)) +
			`" height="` + f(rowH-6) + `" fill="` + col + `"><title>` + esc(c.name+" = "+num(c.value)) + `</title></rect>`)
		b.text(p.x0-6, y+rowH/2+4, "end", "lb", short(c.name, 22))
		b.text(tx, y+rowH/2+4, anchor, "tk", num(c.value))
	}
	b.line(zero, p.y0, zero, p.y1, colInk, 1, false)
	if more > 0 {
		b.text(p.x0, h-6, "start", "tk", "… and "+strconv.Itoa(more)+" smaller coefficients")
	}
	return b.done()
}

// ladderPoint is one scored ladder member on the loss chart.
type ladderPoint struct {
	idx             int
	x, loss, se     float64
	lambda          float64
	chosen, minimum bool
}

// selections returns the ladder indices chosen by the minimum rule and the
// one-SE rule (the largest λ whose loss is within one SE of the minimum),
// -1 if no member has a finite loss.
func selections(ladder []LadderEntry) (minIdx, oneSE int) {
	minIdx, oneSE = -1, -1
	best := math.Inf(1)
	var bestSE float64
	for _, e := range ladder {
		if l := float64(e.Loss); finite(l) && l < best {
			best, bestSE, minIdx = l, float64(e.SE), e.Index
		}
	}
	if minIdx < 0 {
		return -1, -1
	}
	if !finite(bestSE) {
		bestSE = 0
	}
	bestLambda := math.Inf(-1)
	for _, e := range ladder {
		if l, lam := float64(e.Loss), float64(e.Lambda); finite(l) && finite(lam) && l <= best+bestSE && lam > bestLambda {
			bestLambda, oneSE = lam, e.Index
		}
	}
	return minIdx, oneSE
}

// log10s returns log10 of each positive finite λ (NaN otherwise).
func log10s(lambdas []float64) []float64 {
	out := make([]float64, len(lambdas))
	for i, l := range lambdas {
		out[i] = math.NaN()
		if l > 0 && finite(l) {
			out[i] = math.Log10(l)
		}
	}
	return out
}

// lambdaScale maps log10 λ onto [x0, x1] with λ decreasing to the right
// (the model grows from left to right).
func lambdaScale(lx []float64, x0, x1 float64) scale {
	lo, hi := extent(lx)
	return scale{lo: hi, hi: lo, a: x0, b: x1}
}

// lambdaMarker draws a labelled vertical line at log10 λ = x, the label
// on the side with more room.
func (b *svgBuilder) lambdaMarker(p plotBox, x float64, col, label string, dash bool, row int) {
	b.line(x, p.y0, x, p.y1, col, 1.3, dash)
	if x > (p.x0+p.x1)/2 {
		b.text(x-3, p.y0+10+12*float64(row), "end", "mk", label)
	} else {
		b.text(x+3, p.y0+10+12*float64(row), "start", "mk", label)
	}
}

// pathChart draws every feature's standardized coefficient against log10 λ
// over the ladder, with λ* marked.
func pathChart(d *ModelDoc, path *Path) template.HTML {
	const w, h = 400.0, 240.0
	b := newSVG(w, h, "chart path", "regularization path of "+d.Model)
	lx := log10s(path.Lambdas)
	var all []float64
	for _, c := range path.Coef {
		all = append(all, c...)
	}
	ylo, yhi := extent(all, []float64{0})
	p := plotBox{x0: 46, y0: 8, x1: w - 78, y1: h - 40}
	xs, ys := lambdaScale(lx, p.x0, p.x1), scale{ylo, yhi, p.y1, p.y0}
	b.axes(p, xs, ys, ticks(xs.hi, xs.lo, 4), ticks(ylo, yhi, 4), "log10 λ (smaller λ →)")
	b.line(p.x0, ys.at(0), p.x1, ys.at(0), colMuted, 1, false)
	nf := 0
	for _, c := range path.Coef {
		nf = max(nf, len(c))
	}
	// Members in ascending λ order of drawing: the path's own order.
	type end struct {
		y     float64
		name  string
		color string
	}
	var ends []end
	last := -1
	for i := range lx {
		if finite(lx[i]) {
			last = i
		}
	}
	for j := range nf {
		var px, py []float64
		nonzero := false
		for i, c := range path.Coef {
			if j < len(c) && finite(lx[i]) && finite(c[j]) {
				px, py = append(px, xs.at(lx[i])), append(py, ys.at(c[j]))
				nonzero = nonzero || c[j] != 0
			}
		}
		if !nonzero || len(px) == 0 {
			continue
		}
		name := "feature " + strconv.Itoa(j)
		if j < len(d.Features) {
			name = d.Features[j]
		}
		col := pathPalette[j%len(pathPalette)]
		b.polyline(px, py, col, 1.5, name)
		if last >= 0 && j < len(path.Coef[last]) && path.Coef[last][j] != 0 {
			ends = append(ends, end{ys.at(path.Coef[last][j]), name, col})
		}
	}
	// Label the largest paths at the smallest λ, pushed apart vertically.
	slices.SortFunc(ends, func(a, b end) int { return cmp.Compare(a.y, b.y) })
	if len(ends) > 12 {
		ends = ends[:0] // too many to label legibly: hover titles only
	}
	prev := math.Inf(-1)
	for _, e := range ends {
		y := max(e.y+3.5, prev+10)
		prev = y
		b.WriteString(`<text x="` + f(p.x1+4) + `" y="` + f(y) + `" class="lb" fill="` + e.color + `">` + esc(short(e.name, 12)) + `</text>`)
	}
	if k := d.LambdaIndex; k >= 0 && k < len(lx) && finite(lx[k]) {
		b.lambdaMarker(p, xs.at(lx[k]), colAccent, "λ*", true, 0)
	}
	return b.done()
}

// lossChart draws the held-out loss of every ladder member against
// log10 λ with ±1 SE bars, marking the minimum-rule and one-SE-rule
// choices and λ*.
func lossChart(d *ModelDoc) template.HTML {
	const w, h = 400.0, 220.0
	b := newSVG(w, h, "chart loss", "held-out loss along the λ ladder of "+d.Model)
	var pts []ladderPoint
	for _, e := range d.Ladder {
		lam, l, se := float64(e.Lambda), float64(e.Loss), float64(e.SE)
		if !(lam > 0) || !finite(lam) || !finite(l) {
			continue
		}
		if !finite(se) || se < 0 {
			se = 0
		}
		pts = append(pts, ladderPoint{idx: e.Index, x: math.Log10(lam), loss: l, se: se, lambda: lam})
	}
	if len(pts) == 0 {
		b.text(w/2, h/2, "middle", "ax", "no held-out scores yet")
		return b.done()
	}
	lx, lo, hi := make([]float64, len(pts)), make([]float64, len(pts)), make([]float64, len(pts))
	for i, q := range pts {
		lx[i], lo[i], hi[i] = q.x, q.loss-q.se, q.loss+q.se
	}
	ylo, yhi := extent(lo, hi)
	p := plotBox{x0: 52, y0: 8, x1: w - 12, y1: h - 40}
	xs, ys := lambdaScale(lx, p.x0, p.x1), scale{ylo, yhi, p.y1, p.y0}
	b.axes(p, xs, ys, ticks(xs.hi, xs.lo, 4), ticks(ylo, yhi, 4), "log10 λ (smaller λ →)")
	minIdx, oneSE := selections(d.Ladder)
	xOf := func(idx int) (float64, bool) {
		for _, q := range pts {
			if q.idx == idx {
				return xs.at(q.x), true
			}
		}
		return 0, false
	}
	if x, ok := xOf(minIdx); ok {
		label := "min"
		if oneSE == minIdx {
			label = "min = 1-SE"
		}
		b.lambdaMarker(p, x, colPos, label, true, 0)
	}
	if x, ok := xOf(oneSE); ok && oneSE != minIdx {
		b.lambdaMarker(p, x, colNeg, "1-SE", true, 1)
	}
	var px, py []float64
	for _, q := range pts {
		x := xs.at(q.x)
		px, py = append(px, x), append(py, ys.at(q.loss))
		if q.se > 0 {
			b.line(x, ys.at(q.loss-q.se), x, ys.at(q.loss+q.se), colMuted, 1, false)
			b.line(x-3, ys.at(q.loss-q.se), x+3, ys.at(q.loss-q.se), colMuted, 1, false)
			b.line(x-3, ys.at(q.loss+q.se), x+3, ys.at(q.loss+q.se), colMuted, 1, false)
		}
	}
	b.polyline(px, py, colInk, 1.2, "")
	for _, q := range pts {
		col, r := colInk, 2.5
		if q.idx == d.LambdaIndex {
			col, r = colAccent, 4.5
		}
		b.circle(xs.at(q.x), ys.at(q.loss), r, col,
			"λ "+num(q.lambda)+" (index "+strconv.Itoa(q.idx)+"): loss "+num(q.loss)+" ± "+num(q.se))
	}
	for _, q := range pts {
		if q.idx == d.LambdaIndex {
			y := ys.at(q.loss) + 18 // below the point, or above it at the bottom
			if y > p.y1-2 {
				y = ys.at(q.loss) - 9
			}
			b.text(xs.at(q.x), y, "middle", "mk", "λ*")
		}
	}
	return b.done()
}

// sparkline draws the held-out loss of the recent versions.
func sparkline(name string, hist []LossPoint) template.HTML {
	const w, h = 400.0, 70.0
	b := newSVG(w, h, "chart spark", "held-out loss of the last "+strconv.Itoa(len(hist))+" versions of "+name)
	if len(hist) == 0 {
		b.text(w/2, h/2+4, "middle", "ax", "no held-out loss yet")
		return b.done()
	}
	ls := make([]float64, len(hist))
	for i, q := range hist {
		ls[i] = q.Loss
	}
	lo, hi := extent(ls)
	p := plotBox{x0: 50, y0: 8, x1: w - 60, y1: h - 10}
	xs := scale{0, float64(max(len(hist)-1, 1)), p.x0, p.x1}
	if len(hist) == 1 {
		xs = scale{0, 0, p.x1, p.x1}
	}
	ys := scale{lo, hi, p.y1, p.y0}
	b.text(p.x0-4, p.y0+4, "end", "tk", num(hi))
	b.text(p.x0-4, p.y1+2, "end", "tk", num(lo))
	px, py := make([]float64, len(hist)), make([]float64, len(hist))
	for i, q := range hist {
		px[i], py[i] = xs.at(float64(i)), ys.at(q.Loss)
	}
	b.polyline(px, py, colPos, 1.5, "")
	q := hist[len(hist)-1]
	b.circle(px[len(px)-1], py[len(py)-1], 3, colAccent, "version "+strconv.FormatUint(q.Version, 10)+": "+num(q.Loss))
	b.text(p.x1+6, py[len(py)-1]+4, "start", "lb", num(q.Loss))
	return b.done()
}

// rocChart draws a logistic model's ROC curve with its threshold marked;
// it returns the chart and the operating point's description.
func rocChart(d *ModelDoc, rows []ROCRow) (template.HTML, string) {
	const w, h = 260.0, 250.0
	b := newSVG(w, h, "chart roc", "ROC curve of "+d.Model)
	p := plotBox{x0: 40, y0: 8, x1: w - 12, y1: h - 40}
	xs, ys := scale{0, 1, p.x0, p.x1}, scale{0, 1, p.y1, p.y0}
	tk := []float64{0, 0.25, 0.5, 0.75, 1}
	b.axes(p, xs, ys, tk, tk, "false-positive rate")
	b.WriteString(`<text x="10" y="` + f((p.y0+p.y1)/2) + `" transform="rotate(-90 10 ` + f((p.y0+p.y1)/2) +
		`)" text-anchor="middle" class="ax">true-positive rate</text>`)
	b.line(xs.at(0), ys.at(0), xs.at(1), ys.at(1), colMuted, 1, true)
	pts := slices.Clone(rows)
	slices.SortStableFunc(pts, func(a, b ROCRow) int {
		if c := cmp.Compare(a.FPR, b.FPR); c != 0 {
			return c
		}
		return cmp.Compare(a.TPR, b.TPR)
	})
	px, py := []float64{xs.at(0)}, []float64{ys.at(0)}
	for _, r := range pts {
		px, py = append(px, xs.at(r.FPR)), append(py, ys.at(r.TPR))
	}
	px, py = append(px, xs.at(1)), append(py, ys.at(1))
	b.polyline(px, py, colPos, 1.8, "")
	op := ""
	if d.Threshold != nil && len(rows) > 0 {
		best := 0
		for i, r := range rows {
			if math.Abs(r.Threshold-d.Threshold.Value) < math.Abs(rows[best].Threshold-d.Threshold.Value) {
				best = i
			}
		}
		r := rows[best]
		op = "at " + num(r.Threshold) + ": TPR " + num(r.TPR) + ", FPR " + num(r.FPR) + ", precision " + num(r.Precision)
		b.circle(xs.at(r.FPR), ys.at(r.TPR), 5, colAccent, "threshold "+op)
		b.text(min(xs.at(r.FPR)+8, p.x1-60), max(ys.at(r.TPR)+14, p.y0+12), "start", "mk", "p ≥ "+num(r.Threshold))
	}
	return b.done(), op
}
