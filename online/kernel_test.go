package online

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/floats"
)

func randVec(r *rand.Rand, n int, scale float64) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = scale * r.NormFloat64()
	}
	return v
}

func near(a, b, tol float64) bool {
	return math.Abs(a-b) <= tol*(1+math.Abs(a)+math.Abs(b))
}

func clone(v []float64) []float64 { return append([]float64(nil), v...) }

// bitsEqual reports whether a and b hold the same float64 bit patterns.
func bitsEqual(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// TestKernelsAgree checks the assembly kernels against the portable Go ones
// on every length from 0 to 40 (all tail cases). Reference: the Go versions
// themselves, written from the formulas in kernel.go.
func TestKernelsAgree(t *testing.T) {
	if !useAVX {
		t.Skip("no AVX2+FMA kernels on this machine or build")
	}
	r := rand.New(rand.NewPCG(1, 2))
	for n := 0; n <= 40; n++ {
		th, x, mu, inv := randVec(r, n, 1), randVec(r, n, 3), randVec(r, n, 1), randVec(r, n, 1)
		if a, b := stdDot(th, x, mu, inv), stdDotGo(th, x, mu, inv); !near(a, b, 1e-13) {
			t.Fatalf("n=%d stdDot %v vs %v", n, a, b)
		}
		if a, b := stdSq(x, mu, inv), stdSqGo(x, mu, inv); !near(a, b, 1e-13) {
			t.Fatalf("n=%d stdSq %v vs %v", n, a, b)
		}
		y1 := randVec(r, n, 1)
		y2 := clone(y1)
		axpy(0.7, x, y1)
		axpyGo(0.7, x, y2)
		if !floats.EqualApprox(y1, y2, 1e-13) {
			t.Fatalf("n=%d axpy", n)
		}
		m1, q1, s1 := randVec(r, n, 1), randVec(r, n, 1), randVec(r, n, 1)
		m2, q2, s2 := clone(m1), clone(q1), clone(s1)
		welford(m1, q1, s1, x, 0.25, 2, -1.5)
		welfordGo(m2, q2, s2, x, 0.25, 2, -1.5)
		if !floats.EqualApprox(m1, m2, 1e-13) || !floats.EqualApprox(q1, q2, 1e-12) || !floats.EqualApprox(s1, s2, 1e-13) {
			t.Fatalf("n=%d welford", n)
		}
		for _, bad := range []float64{0, math.NaN(), 2e50, math.Inf(-1)} {
			xi := clone(x)
			if n > 0 {
				xi[n/2] = bad
			}
			i1, i2 := make([]float64, n), make([]float64, n)
			ok1, ok2 := impute(i1, xi, mu, 1e50), imputeGo(i2, xi, mu, 1e50)
			if ok1 != ok2 || (ok1 && !floats.Equal(i1, i2)) {
				t.Fatalf("n=%d impute %v: %v %v", n, bad, ok1, ok2)
			}
		}
		r1, r2 := make([]float64, n), make([]float64, n)
		stdRow(r1, x, mu, inv)
		stdRowGo(r2, x, mu, inv)
		if !floats.EqualApprox(r1, r2, 1e-14) {
			t.Fatalf("n=%d stdRow", n)
		}
		if a, b := dot(th, x), dotGo(th, x); !near(a, b, 1e-13) {
			t.Fatalf("n=%d dot %v vs %v", n, a, b)
		}
		z1 := randVec(r, n, 1)
		z2 := clone(z1)
		axpy2(0.3, x, -1.1, th, z1)
		axpy2Go(0.3, x, -1.1, th, z2)
		if !floats.EqualApprox(z1, z2, 1e-13) {
			t.Fatalf("n=%d axpy2", n)
		}
		checkStepKernels(t, r, n, th, x, mu, inv)
	}
}

// checkStepKernels: the proximal SAGA step kernels (single and batched)
// against sagaGo and its Go variants.
func checkStepKernels(t *testing.T, r *rand.Rand, n int, th, x, mu, inv []float64) {
	t.Helper()
	const e, h, c, thr, sh, delta, a, b = 0.3, -0.2, 0.05, 0.4, 0.9, 0.11, 0.6, -0.8
	t1, sa1 := clone(th), randVec(r, n, 5)
	t2, sa2 := clone(t1), clone(sa1)
	saga(t1, sa1, x, mu, inv, e, h, c, thr, sh, delta)
	sagaGo(t2, sa2, x, mu, inv, e, h, c, thr, sh, delta)
	if !floats.EqualApprox(t1, t2, 1e-13) || !floats.EqualApprox(sa1, sa2, 1e-13) {
		t.Fatalf("n=%d saga\n%v\n%v", n, t1, t2)
	}
	xn := randVec(r, n, 1)
	d1 := sagaDotRaw(t1, sa1, x, mu, inv, xn, e, h, c, thr, sh, delta)
	d2 := sagaDotRawGo(t2, sa2, x, mu, inv, xn, e, h, c, thr, sh, delta)
	if !floats.EqualApprox(t1, t2, 1e-13) || !floats.EqualApprox(sa1, sa2, 1e-13) || !near(d1, d2, 1e-13) {
		t.Fatalf("n=%d sagaDotRaw %v vs %v", n, d1, d2)
	}
	xa, xo := randVec(r, n, 2), randVec(r, n, 2)
	o1, o2 := clone(xo), clone(xo)
	// dst aliases xo, as when the new record takes the evicted one's slot.
	sagaArrive0(t1, sa1, x, mu, inv, xa, o1, o1, e, h, c, thr, sh, delta, a, b)
	sagaArrive0Go(t2, sa2, x, mu, inv, xa, o2, o2, e, h, c, thr, sh, delta, a, b)
	if !floats.EqualApprox(t1, t2, 1e-12) || !floats.EqualApprox(sa1, sa2, 1e-12) || !floats.Equal(o1, xa) || !floats.Equal(o2, xa) {
		t.Fatalf("n=%d sagaArrive0", n)
	}
	o1, o2 = clone(xo), clone(xo)
	d1 = sagaArriveRaw(t1, sa1, x, mu, inv, xa, o1, xn, o1, e, h, c, thr, sh, delta, a, b)
	d2 = sagaArriveRawGo(t2, sa2, x, mu, inv, xa, o2, xn, o2, e, h, c, thr, sh, delta, a, b)
	if !floats.EqualApprox(t1, t2, 1e-12) || !floats.EqualApprox(sa1, sa2, 1e-12) || !near(d1, d2, 1e-12) || !floats.Equal(o1, xa) {
		t.Fatalf("n=%d sagaArriveRaw %v vs %v", n, d1, d2)
	}
	// Batched, K = 3 members with their own scalars, every variant.
	const k = 3
	for _, v := range []struct{ arrive, dot bool }{{false, false}, {false, true}, {true, false}, {true, true}} {
		tA, sA := randVec(r, k*n, 1), randVec(r, k*n, 5)
		tB, sB := clone(tA), clone(sA)
		pA := make([]stepParam, k)
		for i := range pA {
			pA[i] = stepParam{e: r.NormFloat64(), h: r.NormFloat64(), t: 0.1 * float64(i), r: 1 / (1 + 0.1*float64(i)), delta: r.NormFloat64(), a: r.NormFloat64(), b: r.NormFloat64()}
		}
		pB := append([]stepParam(nil), pA...)
		var ya, yo, yn []float64
		if v.arrive {
			ya, yo = xa, xo
		}
		if v.dot {
			yn = xn
		}
		sagaAll(tA, sA, x, mu, inv, ya, yo, yn, pA, c)
		sagaAllGo(tB, sB, x, mu, inv, ya, yo, yn, pB, c)
		if !floats.EqualApprox(tA, tB, 1e-12) || !floats.EqualApprox(sA, sB, 1e-12) {
			t.Fatalf("n=%d sagaAll %+v", n, v)
		}
		for i := range pA {
			if !near(pA[i].dot, pB[i].dot, 1e-12) {
				t.Fatalf("n=%d sagaAll %+v member %d dot %v vs %v", n, v, i, pA[i].dot, pB[i].dot)
			}
		}
	}
	tA := randVec(r, k*n, 1)
	out := make([]float64, 2*k)
	dot2All(tA, xa, xo, out)
	for i := range k {
		if !near(out[2*i], dotGo(tA[i*n:(i+1)*n], xa), 1e-13) || !near(out[2*i+1], dotGo(tA[i*n:(i+1)*n], xo), 1e-13) {
			t.Fatalf("n=%d dot2All member %d", n, i)
		}
	}
}

// TestFusedKernelsExact: the fused arrival kernels do exactly the
// arithmetic of the passes they replace, so the models they produce are
// the same to the bit: welford2 is welford twice, stdPrep's sums are
// stdSq's and its rows stdRow's, sumRows is axpy row by row, on both
// builds. Reference: the unfused
// kernels of this package.
func TestFusedKernelsExact(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	for n := 0; n <= 40; n++ {
		xo, xn := randVec(r, n, 3), randVec(r, n, 3)
		m1, q1, s1 := randVec(r, n, 1), randVec(r, n, 1), randVec(r, n, 1)
		m2, q2, s2 := clone(m1), clone(q1), clone(s1)
		welford2(m1, q1, s1, xo, xn, -0.1, -0.9, 0.4, 0.125, 1.1, -2)
		welford(m2, q2, s2, xo, -0.1, -0.9, 0.4)
		welford(m2, q2, s2, xn, 0.125, 1.1, -2)
		if !bitsEqual(m1, m2) || !bitsEqual(q1, q2) || !bitsEqual(s1, s2) {
			t.Fatalf("n=%d welford2 differs from two welford passes", n)
		}
		x, row, mu, inv, rmu, rinv := randVec(r, n, 3), randVec(r, n, 3), randVec(r, n, 1), randVec(r, n, 1), randVec(r, n, 1), randVec(r, n, 1)
		xa, xt := make([]float64, n), make([]float64, n)
		sqR, sqW := stdPrep(xa, xt, x, row, mu, inv, rmu, rinv)
		ra, rt := make([]float64, n), make([]float64, n)
		stdRow(ra, x, mu, inv)
		stdRow(rt, row, mu, inv)
		if !bitsEqual(xa, ra) || !bitsEqual(xt, rt) || sqR != stdSq(x, rmu, rinv) || sqW != stdSq(x, mu, inv) {
			t.Fatalf("n=%d stdPrep differs from stdRow and stdSq", n)
		}
		const k, rows = 3, 7
		xs, g := randVec(r, rows*n, 2), randVec(r, rows*k, 1)
		g[4], g[k+1] = 0, 0 // skipped rows
		s1 = randVec(r, k*n, 1)
		s2 = clone(s1)
		sumRows(s1, xs, g, n, k)
		for m := range k {
			for i := range rows {
				if v := g[i*k+m]; v != 0 {
					axpy(v, xs[i*n:(i+1)*n], s2[m*n:(m+1)*n])
				}
			}
		}
		if !bitsEqual(s1, s2) {
			t.Fatalf("n=%d sumRows differs from axpy row by row", n)
		}
		th := randVec(r, n, 1)
		sqR1, sqW1, da, dt := stdPrep1(th, x, row, mu, inv, rmu, rinv)
		if sqR1 != sqR || sqW1 != sqW || !near(da, dotGo(th, ra), 1e-13) || !near(dt, dotGo(th, rt), 1e-13) {
			t.Fatalf("n=%d stdPrep1: %v %v %v %v", n, sqR1, sqW1, da, dt)
		}
	}
}

// clamp returns z limited to [lo, hi], as the AVX kernels do with VMAXPD
// then VMINPD (they may differ in the sign of a zero; NaN cannot reach
// either from validated input).
func clamp(z, lo, hi float64) float64 {
	if z < lo {
		z = lo
	}
	if z > hi {
		z = hi
	}
	return z
}

// TestSoftThreshold: the kernels' soft threshold equals
// max(z−t, 0) + min(z+t, 0), the prox of t|·| (Parikh & Boyd 2014,
// §6.5.2), for finite z and t ≥ 0: the AVX form z − clamp(z, −t, t) to the
// bit, zeros included; the portable softThreshold in value, and to the bit
// where it is not zero; and the step kernel of this build (through saga
// with a zero step) in value.
func TestSoftThreshold(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	zs := []float64{0, math.Copysign(0, -1), 1, -1, 0.5, -0.5, 1e-300, -1e-300, 3e300, -3e300, math.MaxFloat64, -math.MaxFloat64, 5e-324, -5e-324}
	ts := []float64{0, 0.5, 1, 1e-300, 2e300, 5e-324}
	for range 2000 {
		zs = append(zs, r.NormFloat64()*math.Pow(10, float64(r.IntN(20)-10)))
		ts = append(ts, math.Abs(r.NormFloat64()))
	}
	same := func(got, want float64) bool {
		return got == want && (want == 0 || math.Float64bits(got) == math.Float64bits(want))
	}
	for _, tv := range ts {
		for _, z := range append(clone(zs), tv, -tv) {
			want := max(z-tv, 0) + min(z+tv, 0)
			if got := z - clamp(z, -tv, tv); math.Float64bits(got) != math.Float64bits(want) {
				t.Fatalf("clamp form: z=%v t=%v: %v, want %v", z, tv, got, want)
			}
			if got := softThreshold(z, tv); !same(got, want) {
				t.Fatalf("softThreshold: z=%v t=%v: %v, want %v", z, tv, got, want)
			}
		}
		// With c = 0 and r = 1 a step is θ = soft(θ, t).
		th := append(clone(zs), tv, -tv)
		one := make([]float64, len(th))
		saga(th, make([]float64, len(th)), one, one, one, 0, 0, 0, tv, 1, 0)
		for i, z := range append(clone(zs), tv, -tv) {
			if want := max(z-tv, 0) + min(z+tv, 0); th[i] != want {
				t.Fatalf("saga kernel: z=%v t=%v: %v, want %v", z, tv, th[i], want)
			}
		}
	}
}

// TestKernelPathsAllocs: every step path allocates nothing per record: the
// single-member kernels (K = 1) and the batched ones, with one and several
// steps, through evictions, refreshes and resyncs (testing.AllocsPerRun).
func TestKernelPathsAllocs(t *testing.T) {
	p := makeProblem(19, 64, 6, 3, false, false)
	for _, tc := range []struct{ size, steps int }{{1, 1}, {1, 3}, {3, 1}, {3, 3}} {
		l, _ := NewLadder(&Options{Features: 6, Window: 40, Size: tc.size, Steps: tc.steps})
		i := 0
		add := func() {
			_ = l.Add(p.record(i % 64))
			i++
		}
		for range 200 {
			add()
		}
		if a := testing.AllocsPerRun(1000, add); a != 0 {
			t.Errorf("K=%d steps=%d: %v allocs per Add", tc.size, tc.steps, a)
		}
	}
}
