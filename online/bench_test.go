package online

import (
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"gonum.org/v1/gonum/floats"
)

// benchPool returns n records of d features for the benchmarks.
func benchPool(n, d int) []Record {
	p := makeProblem(11, n, d, min(d, 8), false, false)
	rs := make([]Record, n)
	for i := range rs {
		rs[i] = p.record(i)
	}
	return rs
}

// BenchmarkAdd measures ns per arriving record for the SAGA ladder
// ("ladder") beside a baseline ("gonum") that does, on the same records,
// the same number of length-d dot products and axpys with gonum floats
// (floats.Dot and floats.AddScaled, one of each per step per member), so
// that the ratio of the two is the learner's overhead over its bare vector
// work. The ladder line reports that ratio as x-gonum and the baseline's
// ns per record as gonum-ns/rec, both timed on interleaved chunks of the
// same run. Window 1000, filled before timing.
func BenchmarkAdd(b *testing.B) {
	for _, k := range []int{1, 12} {
		for _, d := range []int{16, 64, 256} {
			for _, steps := range []int{1, 4} {
				name := fmt.Sprintf("K%d/d%d/steps%d", k, d, steps)
				pool := benchPool(2048, d)
				b.Run(name+"/ladder", func(b *testing.B) { benchLadder(b, pool, k, d, steps, 1000) })
				b.Run(name+"/gonum", func(b *testing.B) { benchBaseline(b, pool, k, d, steps, 1000) })
			}
		}
	}
}

// BenchmarkWindow measures ns per record at window lengths 1k, 10k and
// 100k (K = 12, d = 16, 2 steps) for the SAGA learner and the gram
// learner: the cost must not grow with n. Each record first readies
// member K/2, as the pipeline readies the member it reads (Ladder.Ready).
// The gram learner solves that member every 1 % of the window (16 to 100
// records, solveEvery), so its cost falls with n up to 10k; gram-R100
// holds R at 100 for every n, to show the cost of the sums against n.
func BenchmarkWindow(b *testing.B) {
	for _, n := range []int{1000, 10000, 100000} {
		pool := benchPool(n+4096, 16)
		b.Run(fmt.Sprintf("n%d", n), func(b *testing.B) { benchLadder(b, pool, 12, 16, 2, n) })
		b.Run(fmt.Sprintf("gram/n%d", n), func(b *testing.B) { benchLearner(b, pool, "gram", 0, 12, 16, 2, n) })
		b.Run(fmt.Sprintf("gram-R100/n%d", n), func(b *testing.B) { benchLearner(b, pool, "gram", 100, 12, 16, 2, n) })
	}
}

func benchLadder(b *testing.B, pool []Record, k, d, steps, window int) {
	benchLearner(b, pool, "", 0, k, d, steps, window)
}

// benchLearner is benchLadder for a learner; every > 0 sets the gram
// learner's R.
func benchLearner(b *testing.B, pool []Record, learner string, every, k, d, steps, window int) {
	o := &Options{Features: d, Size: k, Steps: steps, Window: window, Seed: 1, Learner: learner}
	l, err := NewLadder(o)
	if err != nil {
		b.Fatal(err)
	}
	if c, ok := l.lrn.(*covLearner); ok && every > 0 {
		c.every = every
	}
	for i := range window {
		_ = l.Add(pool[i%len(pool)])
	}
	base := newBaseline(k, d)
	// The ratio to the gonum baseline is measured on interleaved chunks of
	// 64 records, so that the load of a shared machine hits both alike.
	var tl, tb time.Duration
	b.ReportAllocs()
	b.ResetTimer()
	i := window
	for done := 0; done < b.N; {
		c := min(64, b.N-done)
		t0 := time.Now()
		for range c {
			l.Ready(k / 2) // the record path's read of a member (gram: solved when stale)
			if err := l.Add(pool[i%len(pool)]); err != nil {
				b.Fatal(err)
			}
			i++
		}
		tl += time.Since(t0)
		b.StopTimer()
		t0 = time.Now()
		for range c {
			base.record(pool, steps, window)
		}
		tb += time.Since(t0)
		b.StartTimer()
		done += c
	}
	b.ReportMetric(float64(tl)/float64(tb), "x-gonum")
	// The baseline's ns per record in the same interleaved run (the
	// separate "gonum" line runs at another moment of a shared machine).
	b.ReportMetric(float64(tb.Nanoseconds())/float64(b.N), "gonum-ns/rec")
	// Bytes per window record per model: the features (8d), the label,
	// weight and time (24) and, for SAGA, one gradient per member (8K);
	// the gram learner's sums are 8d² bytes per model, not per record.
	per := 8*d + 24 + 8*k
	if l.Learner() == "gram" {
		per = 8*d + 24
	}
	b.ReportMetric(float64(per), "B/rec")
}

// baseline does, per record, steps×K length-d floats.Dot and
// floats.AddScaled on random window records: the bare vector work of the
// same number of SAGA steps.
type baseline struct {
	r    *rand.Rand
	w, s [][]float64
}

func newBaseline(k, d int) *baseline {
	bl := &baseline{r: rand.New(rand.NewPCG(1, 2)), w: make([][]float64, k), s: make([][]float64, k)}
	for m := range bl.w {
		bl.w[m], bl.s[m] = make([]float64, d), make([]float64, d)
	}
	return bl
}

func (bl *baseline) record(pool []Record, steps, window int) {
	for range steps {
		x := pool[bl.r.IntN(window)].X
		for m := range bl.w {
			e := floats.Dot(x, bl.w[m])
			floats.AddScaled(bl.s[m], 1e-9*e, x)
		}
	}
}

func benchBaseline(b *testing.B, pool []Record, k, d, steps, window int) {
	bl := newBaseline(k, d)
	b.ResetTimer()
	for b.Loop() {
		bl.record(pool, steps, window)
	}
}
