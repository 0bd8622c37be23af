package online

import (
	"math"
	"math/rand/v2"
	"strconv"

	"gonum.org/v1/gonum/mat"
	"pgregory.net/rapid"
)

// problem is a batch of records with a known generating model.
type problem struct {
	x    [][]float64
	y, w []float64
}

// makeProblem draws n records of d correlated Gaussian features (scaled and
// shifted per feature so standardization matters) with a sparse truth of
// k nonzero coefficients; logistic labels when logistic is set.
func makeProblem(seed uint64, n, d, k int, logistic, weighted bool) problem {
	r := rand.New(rand.NewPCG(seed, 7))
	beta := make([]float64, d)
	for j := range min(k, d) {
		beta[j] = (1 + r.Float64()) * float64(1-2*(j%2))
	}
	scale := make([]float64, d)
	shift := make([]float64, d)
	for j := range d {
		scale[j] = 0.5 + 3*r.Float64()
		shift[j] = 10 * r.NormFloat64()
	}
	p := problem{x: make([][]float64, n), y: make([]float64, n), w: make([]float64, n)}
	for i := range n {
		x := make([]float64, d)
		common := r.NormFloat64()
		var eta float64
		for j := range d {
			z := 0.5*common + r.NormFloat64()
			eta += beta[j] * z
			x[j] = shift[j] + scale[j]*z
		}
		p.x[i] = x
		if logistic {
			p.y[i] = 0
			if r.Float64() < Sigmoid(eta) {
				p.y[i] = 1
			}
		} else {
			p.y[i] = eta + 0.5*r.NormFloat64()
		}
		p.w[i] = 1
		if weighted {
			p.w[i] = 0.25 + 2*r.Float64()
		}
	}
	return p
}

func (p problem) record(i int) Record { return Record{X: p.x[i], Y: p.y[i], W: p.w[i]} }

// feed adds records [from, to) of p to l.
// fataler is what feed needs of *testing.T and *rapid.T.
type fataler interface {
	Helper()
	Fatal(args ...any)
}

func feed(t fataler, l *Ladder, p problem, from, to int) {
	t.Helper()
	for i := from; i < to; i++ {
		if err := l.Add(p.record(i)); err != nil {
			t.Fatal(err)
		}
	}
}

// standardize returns X̃ (n×d, population std) and the centered y of
// records [from, to) with unit weights.
func standardize(p problem, from, to int) (*mat.Dense, []float64, float64) {
	n, d := to-from, len(p.x[0])
	xs := mat.NewDense(n, d, nil)
	for j := range d {
		var m, v float64
		for i := from; i < to; i++ {
			m += p.x[i][j]
		}
		m /= float64(n)
		for i := from; i < to; i++ {
			v += (p.x[i][j] - m) * (p.x[i][j] - m)
		}
		s := math.Sqrt(v / float64(n))
		for i := from; i < to; i++ {
			xs.Set(i-from, j, (p.x[i][j]-m)/s)
		}
	}
	var ybar float64
	for i := from; i < to; i++ {
		ybar += p.y[i]
	}
	ybar /= float64(n)
	yc := make([]float64, n)
	for i := range yc {
		yc[i] = p.y[from+i] - ybar
	}
	return xs, yc, ybar
}

// relErr returns ‖a − b‖∞ / max(1, ‖b‖∞).
func relErr(a, b []float64) float64 {
	var num, den float64
	for i := range a {
		num = max(num, math.Abs(a[i]-b[i]))
		den = max(den, math.Abs(b[i]))
	}
	return num / max(1, den)
}

func strconvFloat(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// drawLadder draws a random weighted problem (pgregory.net/rapid) of n in
// [nLo, nHi] records, d in [1, dHi] features of which 3 are informative, a
// loss (squared or logistic) and a penalty mix (1, 0.5 or 0.1), and
// returns a 4-member ladder with its grid down to floor·λ_max, fed the
// whole problem, with its options, the problem and n.
func drawLadder(t *rapid.T, nLo, nHi, dHi int, floor float64) (*Ladder, *Options, problem, int) {
	n := rapid.IntRange(nLo, nHi).Draw(t, "n")
	d := rapid.IntRange(1, dHi).Draw(t, "d")
	logistic := rapid.Bool().Draw(t, "logistic")
	mix := rapid.SampledFrom([]float64{1, 0.5, 0.1}).Draw(t, "mix")
	seed := rapid.Uint64().Draw(t, "seed")
	p := makeProblem(seed, n, d, 3, logistic, true)
	o := &Options{Features: d, Window: n, Size: 4, Floor: floor, Penalty: &Penalty{Mix: mix}, Seed: seed}
	if logistic {
		o.Loss = Logistic{}
	}
	l, err := NewLadder(o)
	if err != nil {
		t.Fatal(err)
	}
	feed(t, l, p, 0, n)
	return l, o, p, n
}
