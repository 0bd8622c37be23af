package main

// This file prints a model document as `lariat pull` shows it; fetching
// it is in pull.go.

import (
	"fmt"
	"io"
	"math"
	"slices"
	"strings"
	"unicode/utf8"

	"lariat/sink"
)

// writeModel prints a model document as a readable table: the header (loss,
// penalty, λ, version, record counts), the held-out metrics, and the nonzero
// coefficients sorted by the size of their standardized value, in raw units
// and standardized.
func writeModel(w io.Writer, doc *sink.ModelDoc) error {
	var head [][]string
	kv := func(k, format string, args ...any) { head = append(head, []string{k, fmt.Sprintf(format, args...)}) }
	kv("model", "%s (version %d, updated %s)", doc.Model, doc.Version, doc.Updated.Format("2006-01-02T15:04:05Z07:00"))
	pen := doc.Penalty.Kind
	if doc.Penalty.Kind == "elastic-net" {
		pen = fmt.Sprintf("%s (mix %.3g)", pen, doc.Penalty.Mix)
	}
	kv("loss", "%s, %s", doc.Loss, pen)
	lam := fmt.Sprintf("%.6g (ladder index %d", doc.Penalty.Lambda, doc.LambdaIndex)
	if len(doc.Ladder) > 0 {
		lam += fmt.Sprintf(" of %d", len(doc.Ladder))
	}
	kv("λ", "%s)", lam)
	kv("records", "window %d, held out %d, seen %d, rejected %d",
		doc.Records.Window, doc.Records.Holdout, doc.Records.Seen, doc.Records.Rejected)
	kv("held-out", "%s", heldOutLine(doc))
	if t := doc.Threshold; t != nil {
		kv("threshold", "%.4g (%s, target %.4g)", t.Value, t.Mode, t.Target)
	}
	kv("nonzero", "%d of %d features", len(doc.Coefficients), len(doc.Features))
	if _, err := io.WriteString(w, textTable(head, 2)); err != nil {
		return err
	}
	rows := [][]string{
		{"feature", "coefficient (raw)", "standardized", "mean", "std"},
		{"(intercept)", fmt.Sprintf("%.6g", doc.Intercept), "", "", ""},
	}
	for _, name := range byWeight(doc) {
		sc := doc.Scale[name]
		rows = append(rows, []string{name, fmt.Sprintf("%.6g", doc.Coefficients[name]),
			fmt.Sprintf("%.4f", doc.Standardized[name]), fmt.Sprintf("%.6g", sc.Mean), fmt.Sprintf("%.6g", sc.Std)})
	}
	_, err := fmt.Fprintf(w, "\n%s", textTable(rows, 0))
	return err
}

// textTable formats rows in columns two spaces apart, without trailing
// blanks: the first column left-aligned, the others right-aligned from
// column rightFrom on (left-aligned before it; 0 means all but the first).
func textTable(rows [][]string, rightFrom int) string {
	if rightFrom < 1 {
		rightFrom = 1
	}
	var width []int
	for _, r := range rows {
		for i, c := range r {
			if i == len(width) {
				width = append(width, 0)
			}
			width[i] = max(width[i], utf8.RuneCountInString(c))
		}
	}
	var b strings.Builder
	for _, r := range rows {
		var line strings.Builder
		for i, c := range r {
			pad := strings.Repeat(" ", width[i]-utf8.RuneCountInString(c))
			switch {
			case i == 0:
				line.WriteString(c + pad)
			case i < rightFrom:
				line.WriteString("  " + c + pad)
			default:
				line.WriteString("  " + pad + c)
			}
		}
		b.WriteString(strings.TrimRight(line.String(), " "))
		b.WriteByte('\n')
	}
	return b.String()
}

// heldOutLine formats the held-out metrics that apply to the model's loss.
func heldOutLine(doc *sink.ModelDoc) string {
	h := doc.Holdout
	parts := []string{fmt.Sprintf("loss %s ± %s", metric(h.Loss), metric(h.SE))}
	if doc.Logistic() {
		parts = append(parts, "AUC "+metric(h.AUC), "Brier "+metric(h.Brier), "log loss "+metric(h.LogLoss))
	} else {
		parts = append(parts, "RMSE "+metric(h.RMSE), "MAE "+metric(h.MAE), "R² "+metric(h.R2))
	}
	if h.Records == 0 {
		return "none yet (no retune has scored the ladder)"
	}
	return fmt.Sprintf("%s (%d records)", strings.Join(parts, ", "), h.Records)
}

func metric(m sink.Metric) string {
	f := float64(m)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return "n/a"
	}
	return fmt.Sprintf("%.4g", f)
}

// byWeight returns the nonzero features, largest |standardized| first.
func byWeight(doc *sink.ModelDoc) []string {
	names := make([]string, 0, len(doc.Coefficients))
	for n := range doc.Coefficients {
		names = append(names, n)
	}
	slices.SortFunc(names, func(a, b string) int {
		wa, wb := math.Abs(doc.Standardized[a]), math.Abs(doc.Standardized[b])
		switch {
		case wa > wb:
			return -1
		case wa < wb:
			return 1
		}
		return strings.Compare(a, b)
	})
	return names
}
