package online

import (
	"fmt"
	"math"
	"testing"
	"time"
)

// BenchmarkExactPath compares, in one run on the same records (squared
// loss, K = 12, window 10,000 unless named, 8 informative features of d,
// benchPool), three ways to keep the models of a window current:
//
//   - stream: today's learner, 2 SAGA steps per record; the model read
//     is the streaming member.
//   - exact: the same learner plus, every 500 records (a retune), the exact
//     fit of every member (Ladder.Optimum from the member, KKT 1e-6): the
//     published model and the members scored.
//   - refit: what a user would do instead: the whole path refitted every
//     500 records by the project's batch solver (Ladder.Optimum from a cold
//     start at the largest λ, then warm down the path, Friedman, Hastie &
//     Tibshirani 2010 §2.5), the records only appended to the window.
//
// It reports ns per record of each, the ratios, and the mean relative
// distance ‖θ − θ*‖/‖θ*‖ of member 8 from the window's optimum θ* (Optimum
// to KKT 1e-10), sampled every 100 records: for stream the member, for
// exact its last fit (up to 500 records old at the samples between
// retunes, 0 just after one), for refit the last refit.
func BenchmarkExactPath(b *testing.B) {
	for _, c := range []struct{ d, n int }{{16, 10000}, {64, 10000}, {128, 10000}, {16, 1000}, {16, 100000}} {
		b.Run(fmt.Sprintf("d%d/n%d", c.d, c.n), func(b *testing.B) { benchExact(b, c.d, c.n) })
	}
}

func benchExact(b *testing.B, d, n int) {
	const k, every, member = 12, 500, 8
	pool := benchPool(n+8192, d)
	l, err := NewLadder(&Options{Features: d, Size: k, Window: n, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	for i := range n {
		_ = l.Add(pool[i%len(pool)])
	}
	fits := make([]Model, k)
	refit := make([]Model, k)
	exactPath := func() {
		for i := range k {
			fits[i] = l.Optimum(i, nil, nil).Model
		}
	}
	refitPath := func() {
		var warm *Model
		for i := range k {
			if warm == nil {
				z := l.Model(i)
				clear(z.Standardized)
				z.StdIntercept = 0
				warm = &z
			}
			refit[i] = l.Optimum(i, warm, nil).Model
			warm = &refit[i]
		}
	}
	var tStream, tExact, tRefit time.Duration
	var dStream, dExact, dRefit float64
	samples := 0
	timed := func(f func()) time.Duration { t0 := time.Now(); f(); return time.Since(t0) }
	tExact += timed(exactPath)
	tRefit += timed(refitPath)
	b.ResetTimer()
	i := n
	for done := 0; done < b.N; done++ {
		r := pool[i%len(pool)]
		i++
		tStream += timed(func() { _ = l.Add(r) })
		if done%every == every-1 {
			tExact += timed(exactPath)
			tRefit += timed(refitPath)
		}
		if done%100 == 50 {
			b.StopTimer()
			ref := l.Optimum(member, nil, &ExactOptions{Tol: 1e-10, Rounds: 100}).Model
			dStream += relDist(l.Model(member).Standardized, ref.Standardized)
			dExact += relDist(fits[member].Standardized, ref.Standardized)
			dRefit += relDist(refit[member].Standardized, ref.Standardized)
			samples++
			b.StartTimer()
		}
	}
	N := float64(b.N)
	nsStream := float64(tStream.Nanoseconds()) / N
	nsExact := nsStream + float64(tExact.Nanoseconds())/N
	nsRefit := float64(tRefit.Nanoseconds()) / N
	b.ReportMetric(nsStream, "stream-ns/rec")
	b.ReportMetric(nsExact, "exact-ns/rec")
	b.ReportMetric(nsRefit, "refit-ns/rec")
	b.ReportMetric(nsExact/nsStream, "exact/stream")
	b.ReportMetric(nsRefit/nsExact, "refit/exact")
	if samples > 0 {
		s := float64(samples)
		b.ReportMetric(dStream/s, "dist-stream")
		b.ReportMetric(dExact/s, "dist-exact")
		b.ReportMetric(dRefit/s, "dist-refit")
	}
}

// relDist returns ‖a − b‖/‖b‖ (‖a − b‖ when b is 0).
func relDist(a, b []float64) float64 {
	var num, den float64
	for j := range a {
		num += (a[j] - b[j]) * (a[j] - b[j])
		den += b[j] * b[j]
	}
	if den == 0 {
		return math.Sqrt(num)
	}
	return math.Sqrt(num / den)
}
