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
		y2 := append([]float64(nil), y1...)
		axpy(0.7, x, y1)
		axpyGo(0.7, x, y2)
		if !floats.EqualApprox(y1, y2, 1e-13) {
			t.Fatalf("n=%d axpy", n)
		}
		m1, q1, s1 := randVec(r, n, 1), randVec(r, n, 1), randVec(r, n, 1)
		m2, q2, s2 := append([]float64(nil), m1...), append([]float64(nil), q1...), append([]float64(nil), s1...)
		welford(m1, q1, s1, x, 0.25, 2, -1.5)
		welfordGo(m2, q2, s2, x, 0.25, 2, -1.5)
		if !floats.EqualApprox(m1, m2, 1e-13) || !floats.EqualApprox(q1, q2, 1e-12) || !floats.EqualApprox(s1, s2, 1e-13) {
			t.Fatalf("n=%d welford", n)
		}
		for _, bad := range []float64{0, math.NaN(), 2e50, math.Inf(-1)} {
			xi := append([]float64(nil), x...)
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
		z2 := append([]float64(nil), z1...)
		axpy2(0.3, x, -1.1, th, z1)
		axpy2Go(0.3, x, -1.1, th, z2)
		if !floats.EqualApprox(z1, z2, 1e-13) {
			t.Fatalf("n=%d axpy2", n)
		}
		t1, sa1 := randVec(r, n, 1), randVec(r, n, 5)
		t2, sa2 := append([]float64(nil), t1...), append([]float64(nil), sa1...)
		saga(t1, sa1, x, mu, inv, 0.3, -0.2, 0.05, 0.4, 0.9, 0.11)
		sagaGo(t2, sa2, x, mu, inv, 0.3, -0.2, 0.05, 0.4, 0.9, 0.11)
		if !floats.EqualApprox(t1, t2, 1e-13) || !floats.EqualApprox(sa1, sa2, 1e-13) {
			t.Fatalf("n=%d saga\n%v\n%v", n, t1, t2)
		}
		xn := randVec(r, n, 1)
		d1 := sagaDot(t1, sa1, x, mu, inv, xn, 0.3, -0.2, 0.05, 0.4, 0.9, 0.11)
		sagaGo(t2, sa2, x, mu, inv, 0.3, -0.2, 0.05, 0.4, 0.9, 0.11)
		if d2 := dotGo(t2, xn); !floats.EqualApprox(t1, t2, 1e-13) || !floats.EqualApprox(sa1, sa2, 1e-13) || !near(d1, d2, 1e-13) {
			t.Fatalf("n=%d sagaDot %v vs %v", n, d1, d2)
		}
		xa, xo := randVec(r, n, 2), randVec(r, n, 2)
		d1 = sagaArrive(t1, sa1, x, mu, inv, xa, xo, xn, 0.3, -0.2, 0.05, 0.4, 0.9, 0.11, 0.6, -0.8)
		d2 := sagaArriveGo(t2, sa2, x, mu, inv, xa, xo, xn, 0.3, -0.2, 0.05, 0.4, 0.9, 0.11, 0.6, -0.8)
		if !floats.EqualApprox(t1, t2, 1e-12) || !floats.EqualApprox(sa1, sa2, 1e-12) || !near(d1, d2, 1e-12) {
			t.Fatalf("n=%d sagaArrive %v vs %v", n, d1, d2)
		}
		dA, dB := dot2(th, xa, xo)
		if !near(dA, dotGo(th, xa), 1e-13) || !near(dB, dotGo(th, xo), 1e-13) {
			t.Fatalf("n=%d dot2", n)
		}
	}
}
