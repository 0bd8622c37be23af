package online

import (
	"fmt"
	"math"
	"testing"
	"time"
)

// BenchmarkExactPath compares, in one run on the same records (K = 12, 8
// informative features of d, benchPool; window n), for the SAGA learner
// and, for the squared loss, the gram learner, the costs and the distance
// from the window's optimum of:
//
//   - stream: the member's prediction of the record before it learns from
//     it (Ladder.Ready and Eta, the pipeline's test-then-train read) and
//     Ladder.Add: 2 SAGA steps per record, or the gram learner's rank-one
//     update, with the read member solved when it is stale (every
//     solveEvery records); the model read is the member.
//   - pub: one exact fit (Ladder.Optimum from the member, KKT 1e-6) of the
//     published member per publication, a publication every 500 records;
//     the published model then stays out until the next publication.
//   - check: the published fit's KKT measured on the records
//     (Ladder.ModelKKT, one pass), which the pipeline adds to a gram
//     learner's publication; not in the ratios.
//   - retune: exact fits of all K members every 500 records
//     (Ladder.OptimumPath: from the window's Gram matrix for the squared
//     loss, one Optimum per member for the logistic, where the pipeline
//     fits at most 5, the members that decide the choice: an upper bound).
//   - refit: what a user would do instead: the whole path refitted every
//     500 records by the project's batch solver on the window's records
//     (for the gram run, on a SAGA ladder fed the same records, untimed) (Ladder.Optimum from zero
//     at the largest λ, then warm down the path, Friedman, Hastie &
//     Tibshirani 2010 §2.5).
//
// It reports ns per record of each (pub, retune and refit amortized over
// the 500 records), and the mean relative distance ‖θ − θ*‖/‖θ*‖ of
// member 8 from the window's current optimum θ* (Optimum to KKT 1e-10),
// sampled every 100 records, for the streaming member, the last
// published fit and the last refit (both up to 500 records old).
func BenchmarkExactPath(b *testing.B) {
	for _, c := range []struct {
		loss Loss
		d, n int
	}{
		{Squared{}, 16, 10000}, {Squared{}, 64, 10000}, {Squared{}, 128, 10000},
		{Squared{}, 16, 1000}, {Squared{}, 16, 100000},
		{Logistic{}, 16, 1000}, {Logistic{}, 16, 100000},
	} {
		learners := []string{"saga"}
		if c.loss.Quadratic() {
			learners = append(learners, "gram")
		}
		for _, lr := range learners {
			b.Run(fmt.Sprintf("%s/%s/d%d/n%d", lr, c.loss.Name(), c.d, c.n), func(b *testing.B) { benchExact(b, c.loss, lr, c.d, c.n) })
		}
	}
}

func benchExact(b *testing.B, loss Loss, learner string, d, n int) {
	const k, every, member = 12, 500, 8
	pool := benchPool(n+8192, d)
	if loss.Name() == "logistic" { // the same generator with logistic labels
		p := makeProblem(11, n+8192, d, min(d, 8), true, false)
		for i := range pool {
			pool[i] = p.record(i)
		}
	}
	mk := func(learner string) *Ladder {
		l, err := NewLadder(&Options{Loss: loss, Features: d, Size: k, Window: n, Seed: 1, Learner: learner})
		if err != nil {
			b.Fatal(err)
		}
		for i := range n {
			_ = l.Add(pool[i%len(pool)])
		}
		return l
	}
	l := mk(learner)
	// The refit is the batch solver on the window's records (exact.go),
	// which the gram learner does not use: a SAGA ladder on the same
	// records holds the window for it (its own cost is not counted).
	batch := l
	if learner == "gram" {
		batch = mk("saga")
	}
	var pub Model
	refit := make([]Model, k)
	publish := func() { pub = l.Optimum(member, nil, nil).Model }
	check := func() { _ = l.ModelKKT(&pub) } // the records' check of a publication
	var path []Optimum
	retune := func() { path = l.OptimumPath(nil, path) }
	refitPath := func() {
		var warm *Model
		for i := range k {
			if warm == nil {
				z := batch.Model(i)
				clear(z.Standardized)
				z.StdIntercept = 0
				warm = &z
			}
			refit[i] = batch.Optimum(i, warm, nil).Model
			warm = &refit[i]
		}
	}
	var tStream, tPub, tCheck, tRetune, tRefit time.Duration
	var dStream, dPub, dRefit float64
	samples := 0
	timed := func(f func()) time.Duration { t0 := time.Now(); f(); return time.Since(t0) }
	publish()
	refitPath()
	b.ResetTimer()
	i := n
	for done := 0; done < b.N; done++ {
		r := pool[i%len(pool)]
		i++
		tStream += timed(func() { l.Ready(member); _ = l.Eta(member, r.X) })
		sample := done%100 == 50
		var mem Model
		if sample { // the member as read (fresh: Ready just solved it)
			b.StopTimer()
			mem = l.Model(member)
			b.StartTimer()
		}
		tStream += timed(func() { _ = l.Add(r) })
		if batch != l {
			b.StopTimer()
			_ = batch.Add(r)
			b.StartTimer()
		}
		if done%every == every-1 {
			tPub += timed(publish)
			tCheck += timed(check)
			tRetune += timed(retune)
			tRefit += timed(refitPath)
		}
		if sample {
			b.StopTimer()
			// Each model against the optimum at its own λ on the current
			// window (the two ladders' grids agree to rounding only).
			ref := l.Optimum(member, nil, &ExactOptions{Tol: 1e-10, Rounds: 100}).Model
			dStream += relDist(mem.Standardized, ref.Standardized)
			dPub += relDist(pub.Standardized, ref.Standardized)
			if batch != l {
				ref = batch.Optimum(member, nil, &ExactOptions{Tol: 1e-10, Rounds: 100}).Model
			}
			dRefit += relDist(refit[member].Standardized, ref.Standardized)
			samples++
			b.StartTimer()
		}
	}
	ns := func(t time.Duration) float64 { return float64(t.Nanoseconds()) / float64(b.N) }
	b.ReportMetric(ns(tStream), "stream-ns/rec")
	b.ReportMetric(ns(tPub), "pub-ns/rec")
	b.ReportMetric(ns(tCheck), "check-ns/rec")
	b.ReportMetric(ns(tRetune), "retune-ns/rec")
	b.ReportMetric(ns(tRefit), "refit-ns/rec")
	b.ReportMetric(ns(tRefit)/(ns(tStream)+ns(tPub)), "refit/(stream+pub)")
	b.ReportMetric(ns(tRefit)/(ns(tStream)+ns(tPub)+ns(tRetune)), "refit/(stream+pub+retune)")
	b.ReportMetric((ns(tStream)+ns(tPub)+ns(tRetune))/ns(tStream), "all/stream")
	if samples > 0 {
		s := float64(samples)
		b.ReportMetric(dStream/s, "dist-stream")
		b.ReportMetric(dPub/s, "dist-pub")
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
