package replay

// This file draws the replay's four plots with gonum/plot: the
// regularization path, the held-out loss along the ladder, the chosen
// coefficients over the stream with the alerts, and the held-out metrics
// and λ* over the stream.

import (
	"cmp"
	"errors"
	"fmt"
	"image/color"
	"math"
	"os"
	"path/filepath"
	"slices"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/plotutil"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"lariat/sink"
)

// Plot names: each is written as NAME.png and NAME.svg.
var PlotNames = []string{"path", "heldout", "coefficients", "loss"}

// legendMax is how many features the path and coefficient plots name.
const legendMax = 6

// plotW and plotH are the size of one panel.
var plotW, plotH = 8 * vg.Inch, 5 * vg.Inch

// WritePlots writes the four plots into dir (created if missing), each as
// PNG and SVG. A replay in which no retune scored the ladder has no path
// to draw and gives an error.
func (r *Result) WritePlots(dir string) error {
	if r.Path == nil || len(r.History) == 0 {
		return errors.New("replay: no retune scored the ladder; nothing to plot (is the recording shorter than retune.every records?)")
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("replay: %w", err)
	}
	path, err := r.pathPlot()
	if err != nil {
		return err
	}
	held, err := r.heldOutPlot()
	if err != nil {
		return err
	}
	coef, err := r.coefficientPlot()
	if err != nil {
		return err
	}
	loss, err := r.lossPlots()
	if err != nil {
		return err
	}
	panels := map[string][]*plot.Plot{"path": {path}, "heldout": {held}, "coefficients": {coef}, "loss": loss}
	for _, name := range PlotNames {
		for _, ext := range []string{".png", ".svg"} {
			if err := save(panels[name], filepath.Join(dir, name+ext)); err != nil {
				return err
			}
		}
	}
	return nil
}

// save draws the panels one above the other, aligned, into file.
func save(panels []*plot.Plot, file string) error {
	h := plotH * vg.Length(1+0.5*float64(len(panels)-1)) // lower panels are shorter
	c, err := draw.NewFormattedCanvas(plotW, h, filepath.Ext(file)[1:])
	if err != nil {
		return fmt.Errorf("replay: %w", err)
	}
	grid := make([][]*plot.Plot, len(panels))
	for i, p := range panels {
		grid[i] = []*plot.Plot{p}
	}
	tiles := draw.Tiles{Rows: len(panels), Cols: 1, PadY: vg.Millimeter * 3,
		PadTop: vg.Millimeter, PadBottom: vg.Millimeter, PadLeft: vg.Millimeter, PadRight: vg.Millimeter * 3}
	canvases := plot.Align(grid, tiles, draw.New(c))
	for i, p := range panels {
		p.Draw(canvases[i][0])
	}
	f, err := os.Create(file)
	if err != nil {
		return fmt.Errorf("replay: %w", err)
	}
	if _, err := c.WriteTo(f); err != nil {
		f.Close()
		return fmt.Errorf("replay: writing %s: %w", file, err)
	}
	return f.Close()
}

// pathPlot draws each standardized coefficient against log10 λ.
func (r *Result) pathPlot() (*plot.Plot, error) {
	pa := r.Path
	p := plot.New()
	p.Title.Text = fmt.Sprintf("%s: regularization path at the end of the stream", r.Model)
	p.X.Label.Text = "log10 λ"
	p.Y.Label.Text = "standardized coefficient"
	top := topFeatures(len(pa.Names), func(j int) float64 {
		var m float64
		for _, mem := range pa.Members {
			if j < len(mem.Standardized) {
				m = max(m, math.Abs(mem.Standardized[j]))
			}
		}
		return m
	})
	for rank, j := range top {
		var xy plotter.XYs
		for _, mem := range pa.Members {
			if mem.Lambda > 0 && j < len(mem.Standardized) {
				xy = append(xy, plotter.XY{X: math.Log10(mem.Lambda), Y: mem.Standardized[j]})
			}
		}
		if len(xy) == 0 {
			continue
		}
		l, err := plotter.NewLine(xy)
		if err != nil {
			return nil, fmt.Errorf("replay: path: %w", err)
		}
		l.Color = plotutil.Color(rank)
		if rank >= legendMax {
			l.Color = color.Gray{Y: 170}
		} else {
			p.Legend.Add(pa.Names[j], l)
		}
		p.Add(l)
	}
	if pa.Chosen >= 0 && pa.Chosen < len(pa.Members) {
		if err := vline(p, pa.Members[pa.Chosen].Lambda, "λ* (current)", color.Black, nil); err != nil {
			return nil, err
		}
	}
	p.Legend.Top = true
	p.Add(plotter.NewGrid())
	return p, nil
}

// topFeatures returns the feature indexes with a nonzero size, largest
// first.
func topFeatures(n int, size func(j int) float64) []int {
	var idx []int
	for j := range n {
		if size(j) > 0 {
			idx = append(idx, j)
		}
	}
	slices.SortStableFunc(idx, func(a, b int) int { return cmp.Compare(size(b), size(a)) })
	return idx
}

// vline marks x = log10(lambda) with a vertical line across the plot's data
// range.
func vline(p *plot.Plot, lambda float64, label string, c color.Color, dashes []vg.Length) error {
	if !(lambda > 0) {
		return nil
	}
	x := math.Log10(lambda)
	lo, hi := yRange(p)
	l, err := plotter.NewLine(plotter.XYs{{X: x, Y: lo}, {X: x, Y: hi}})
	if err != nil {
		return fmt.Errorf("replay: %w", err)
	}
	l.Color, l.Dashes = c, dashes
	p.Add(l)
	p.Legend.Add(label, l)
	return nil
}

// yRange returns the data range of the plot's y axis so far.
func yRange(p *plot.Plot) (lo, hi float64) {
	lo, hi = p.Y.Min, p.Y.Max
	if lo == hi {
		lo, hi = lo-1, hi+1
	}
	return lo, hi
}

// heldOutPlot draws the held-out loss of every ladder member, ±1 SE, and
// marks each rule's choice.
func (r *Result) heldOutPlot() (*plot.Plot, error) {
	pa := r.Path
	p := plot.New()
	p.Title.Text = fmt.Sprintf("%s: held-out loss along the ladder (last retune)", r.Model)
	p.X.Label.Text = "log10 λ"
	p.Y.Label.Text = "mean held-out loss ± 1 SE"
	type xyErr struct {
		plotter.XYs
		plotter.YErrors
	}
	var pts xyErr
	for _, mem := range pa.Members {
		if mem.Lambda > 0 && finite(mem.Loss) && finite(mem.SE) {
			pts.XYs = append(pts.XYs, plotter.XY{X: math.Log10(mem.Lambda), Y: mem.Loss})
			pts.YErrors = append(pts.YErrors, struct{ Low, High float64 }{mem.SE, mem.SE})
		}
	}
	if len(pts.XYs) == 0 {
		return nil, errors.New("replay: no finite held-out loss to plot")
	}
	line, dots, err := plotter.NewLinePoints(pts.XYs)
	if err != nil {
		return nil, fmt.Errorf("replay: held-out: %w", err)
	}
	bars, err := plotter.NewYErrorBars(pts)
	if err != nil {
		return nil, fmt.Errorf("replay: held-out: %w", err)
	}
	p.Add(line, dots, bars)
	p.Legend.Add("held-out loss", line, dots)
	mark := func(i int, label string, c color.Color, dashes []vg.Length) error {
		if i < 0 || i >= len(pa.Members) {
			return nil
		}
		return vline(p, pa.Members[i].Lambda, label, c, dashes)
	}
	if err := mark(pa.Min, "minimum rule", color.RGBA{R: 200, A: 255}, []vg.Length{vg.Points(4), vg.Points(2)}); err != nil {
		return nil, err
	}
	if err := mark(pa.OneSE, "one-SE rule", color.RGBA{B: 200, A: 255}, []vg.Length{vg.Points(1), vg.Points(2)}); err != nil {
		return nil, err
	}
	p.Legend.Top = true
	p.Add(plotter.NewGrid())
	return p, nil
}

// alertGlyphs are the markers of the alert kinds.
var alertGlyphs = map[sink.AlertKind]struct {
	shape draw.GlyphDrawer
	color color.Color
}{
	sink.KindPerformance: {draw.TriangleGlyph{}, color.RGBA{R: 220, A: 255}},
	sink.KindData:        {draw.SquareGlyph{}, color.RGBA{G: 150, A: 255}},
	sink.KindModel:       {draw.CrossGlyph{}, color.RGBA{B: 220, A: 255}},
	sink.KindPrediction:  {draw.RingGlyph{}, color.Gray{Y: 90}},
}

// coefficientPlot draws the chosen model's standardized coefficients at
// each retune over the stream, with the alerts marked by kind.
func (r *Result) coefficientPlot() (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = fmt.Sprintf("%s: chosen model over the stream", r.Model)
	p.X.Label.Text = "record (line)"
	p.Y.Label.Text = "standardized coefficient"
	names := r.historyNames()
	top := topFeatures(len(names), func(j int) float64 {
		var m float64
		for _, h := range r.History {
			m = max(m, math.Abs(h.Standardized[names[j]]))
		}
		return m
	})
	for rank, j := range top {
		xy := make(plotter.XYs, 0, len(r.History))
		for _, h := range r.History {
			if h.LambdaIndex >= 0 {
				xy = append(xy, plotter.XY{X: float64(h.Index), Y: h.Standardized[names[j]]})
			}
		}
		if len(xy) == 0 {
			continue
		}
		l, err := plotter.NewLine(xy)
		if err != nil {
			return nil, fmt.Errorf("replay: coefficients: %w", err)
		}
		l.Color = plotutil.Color(rank)
		if rank >= legendMax {
			l.Color = color.Gray{Y: 170}
		} else {
			p.Legend.Add(names[j], l)
		}
		p.Add(l)
	}
	if err := r.addAlerts(p); err != nil {
		return nil, err
	}
	p.Legend.Top = true
	p.Add(plotter.NewGrid())
	return p, nil
}

// historyNames returns every feature that is nonzero in some retune, in
// model order.
func (r *Result) historyNames() []string {
	var out []string
	for _, name := range r.Names {
		for _, h := range r.History {
			if h.Standardized[name] != 0 {
				out = append(out, name)
				break
			}
		}
	}
	return out
}

// addAlerts marks each alert at its record along the bottom of the plot,
// one glyph and colour per kind.
func (r *Result) addAlerts(p *plot.Plot) error {
	lo, hi := yRange(p)
	y := lo - 0.05*(hi-lo)
	for _, kind := range []sink.AlertKind{sink.KindPerformance, sink.KindData, sink.KindModel, sink.KindPrediction} {
		var xy plotter.XYs
		for _, a := range r.Alerts {
			if a.Alert.Kind == kind {
				xy = append(xy, plotter.XY{X: float64(a.Index), Y: y})
			}
		}
		if len(xy) == 0 {
			continue
		}
		s, err := plotter.NewScatter(xy)
		if err != nil {
			return fmt.Errorf("replay: alerts: %w", err)
		}
		g := alertGlyphs[kind]
		s.GlyphStyle = draw.GlyphStyle{Shape: g.shape, Color: g.color, Radius: vg.Points(4)}
		p.Add(s)
		p.Legend.Add(fmt.Sprintf("%s drift alert", kind), s)
	}
	return nil
}

// lossPlots draws the held-out loss (and AUC or R²) of the chosen member
// over the stream, and λ* below it on an aligned panel.
func (r *Result) lossPlots() ([]*plot.Plot, error) {
	top := plot.New()
	top.Title.Text = fmt.Sprintf("%s: held-out metrics of the chosen model over the stream", r.Model)
	top.Y.Label.Text = "held-out loss"
	second, secondName := "R²", func(h Retune) float64 { return h.R2 }
	if r.Logistic {
		second, secondName = "AUC", func(h Retune) float64 { return h.AUC }
	}
	var loss, metric, lambda plotter.XYs
	for _, h := range r.History {
		x := float64(h.Index)
		if finite(h.Loss) {
			loss = append(loss, plotter.XY{X: x, Y: h.Loss})
		}
		if v := secondName(h); finite(v) && h.LambdaIndex >= 0 {
			metric = append(metric, plotter.XY{X: x, Y: v})
		}
		if h.Lambda > 0 {
			lambda = append(lambda, plotter.XY{X: x, Y: math.Log10(h.Lambda)})
		}
	}
	if err := addLine(top, loss, "held-out loss", plotutil.Color(0)); err != nil {
		return nil, err
	}
	top.Legend.Top = true
	top.Add(plotter.NewGrid())
	mid := plot.New()
	mid.Y.Label.Text = second
	if err := addLine(mid, metric, "held-out "+second, plotutil.Color(1)); err != nil {
		return nil, err
	}
	if err := r.addAlerts(mid); err != nil {
		return nil, err
	}
	mid.Legend.Top = true
	mid.Legend.Left = true
	mid.Add(plotter.NewGrid())
	bottom := plot.New()
	bottom.X.Label.Text = "record (line)"
	bottom.Y.Label.Text = "log10 λ*"
	if err := addLine(bottom, lambda, "λ*", plotutil.Color(2)); err != nil {
		return nil, err
	}
	bottom.Add(plotter.NewGrid())
	// One x range for the aligned panels.
	for _, p := range []*plot.Plot{top, mid, bottom} {
		p.X.Min, p.X.Max = 0, float64(r.lastIndex())
	}
	return []*plot.Plot{top, mid, bottom}, nil
}

func (r *Result) lastIndex() int {
	n := r.History[len(r.History)-1].Index
	if len(r.Alerts) > 0 {
		n = max(n, r.Alerts[len(r.Alerts)-1].Index)
	}
	return n
}

func addLine(p *plot.Plot, xy plotter.XYs, label string, c color.Color) error {
	if len(xy) == 0 {
		return nil
	}
	l, err := plotter.NewLine(xy)
	if err != nil {
		return fmt.Errorf("replay: %s: %w", label, err)
	}
	l.Color = c
	p.Add(l)
	p.Legend.Add(label, l)
	return nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
