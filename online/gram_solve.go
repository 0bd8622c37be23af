package online

import "math"

// gramSweeps caps the coordinate-descent sweeps of one gramSolver.solve;
// a solve that runs out reports its KKT violation above the target.
const gramSweeps = 2000

// gramSolver minimizes the penalized quadratic
//
//	½ θᵀGθ − cᵀθ + λ(α‖θ‖₁ + (1−α)/2‖θ‖²)
//
// (F of the squared loss on standardized data, up to a constant, with the
// intercept at the weighted mean label) by cyclic coordinate descent with
// covariance updates: the negative gradient r = c − Gθ is kept current,
// a move of θ_j costs one axpy of G's row j (Friedman, Hastie & Tibshirani
// 2010, §2.2). Sweeps alternate between the active set (the nonzeros) and
// a full sweep that admits violators, and every few active sweeps a
// Newton step on the active set with the signs held (a Cholesky solve of
// (G_AA + λ(1−α)I)θ_A = c_A − λα·sign θ_A) is tried, kept only when every
// sign survives: coordinate descent alone approaches that point slowly
// when features are strongly correlated. It allocates nothing.
type gramSolver struct {
	d    int
	g, c []float64 // the system: G (d×d, both triangles) and c
	r    []float64 // c − Gθ
	a    []float64 // scratch: the active set's matrix and its Cholesky factor
	rhs  []float64 // scratch: right-hand side and solution
	act  []int     // scratch: the active set
}

func newGramSolver(d int) gramSolver {
	return gramSolver{d: d, g: make([]float64, d*d), c: make([]float64, d), r: make([]float64, d),
		a: make([]float64, d*d), rhs: make([]float64, d), act: make([]int, 0, d)}
}

// residual sets r = c − Gθ.
func (s *gramSolver) residual(theta []float64) {
	d := s.d
	copy(s.r, s.c)
	for k, t := range theta {
		if t != 0 {
			axpy(-t, s.g[k*d:(k+1)*d], s.r)
		}
	}
}

// violation returns the largest KKT violation of θ on (G, c) for λ and
// α, recomputing r: for θ_j ≠ 0 |−r_j + λα·sign θ_j + λ(1−α)θ_j|, else
// max(0, |r_j| − λα); a feature with G_jj = 0 (constant) is skipped.
func (s *gramSolver) violation(theta []float64, lam, alpha float64) float64 {
	s.residual(theta)
	la, lr := lam*alpha, lam*(1-alpha)
	var worst float64
	for j, t := range theta {
		if s.g[j*s.d+j] == 0 {
			continue
		}
		if t != 0 {
			worst = max(worst, math.Abs(-s.r[j]+la*math.Copysign(1, t)+lr*t))
		} else {
			worst = max(worst, math.Abs(s.r[j])-la)
		}
	}
	return worst
}

// coord moves θ_j to its minimizer with the others held and returns its
// KKT violation before the move.
func (s *gramSolver) coord(theta []float64, j int, la, lr float64) float64 {
	d := s.d
	gjj := s.g[j*d+j]
	if gjj == 0 {
		return 0
	}
	old, rj := theta[j], s.r[j]
	viol := math.Abs(rj) - la
	if old != 0 {
		viol = math.Abs(-rj + la*math.Copysign(1, old) + lr*old)
	}
	nw := softThreshold(rj+gjj*old, la) / (gjj + lr)
	if dv := nw - old; dv != 0 {
		theta[j] = nw
		axpy(-dv, s.g[j*d:(j+1)*d], s.r)
	}
	return viol
}

// solve minimizes from θ (in place) until the KKT violation is at most
// target or gramSweeps sweeps are spent, and returns the violation,
// measured on a freshly computed r.
func (s *gramSolver) solve(theta []float64, lam, alpha, target float64) float64 {
	la, lr := lam*alpha, lam*(1-alpha)
	s.residual(theta)
	for sweeps := 0; sweeps < gramSweeps; {
		worst := 0.0
		for j := range theta {
			worst = max(worst, s.coord(theta, j, la, lr))
		}
		sweeps++
		if worst <= target {
			if v := s.violation(theta, lam, alpha); v <= target {
				return v
			}
		}
		// The Newton step costs about m³/3 for m nonzeros, an active sweep
		// m·d: take it at once, before the first active sweep, while it
		// costs less than about ten sweeps (with warm starts the support
		// rarely changes, and the step then lands on the optimum), else
		// after every tenth active sweep.
		nnz := 0
		for _, t := range theta {
			if t != 0 {
				nnz++
			}
		}
		if nnz > 0 && nnz*nnz <= 30*s.d {
			s.newton(theta, la, lr)
		}
		for inner := 0; sweeps < gramSweeps; inner++ {
			worst = 0
			for j, t := range theta {
				if t != 0 {
					worst = max(worst, s.coord(theta, j, la, lr))
				}
			}
			sweeps++
			if worst <= target {
				break
			}
			if inner%10 == 9 {
				s.newton(theta, la, lr)
			}
		}
	}
	return s.violation(theta, lam, alpha)
}

// newton replaces θ on its support A by the solution of
// (G_AA + λ(1−α)I)θ_A = c_A − λα·sign θ_A when it is finite and keeps every
// sign, and then recomputes r; otherwise θ is unchanged.
func (s *gramSolver) newton(theta []float64, la, lr float64) {
	d := s.d
	s.act = s.act[:0]
	for j, t := range theta {
		if t != 0 {
			s.act = append(s.act, j)
		}
	}
	m := len(s.act)
	if m == 0 {
		return
	}
	a, b := s.a[:m*m], s.rhs[:m]
	for p, j := range s.act {
		b[p] = s.c[j] - la*math.Copysign(1, theta[j])
		for q, k := range s.act {
			a[p*m+q] = s.g[j*d+k]
		}
		a[p*m+p] += lr
	}
	if !cholSolve(a, b, m) {
		return
	}
	for p, j := range s.act {
		if v := b[p]; math.IsNaN(v) || math.IsInf(v, 0) || v == 0 || math.Signbit(v) != math.Signbit(theta[j]) {
			return
		}
	}
	for p, j := range s.act {
		theta[j] = b[p]
	}
	s.residual(theta)
}

// cholSolve solves A x = b for a symmetric positive definite m×m matrix A
// (row-major, both triangles; overwritten by its Cholesky factor) in
// place of b, and reports false when A is not numerically positive
// definite (Golub & Van Loan, Matrix Computations, 4th ed. 2013, §4.2).
func cholSolve(a, b []float64, m int) bool {
	for j := range m {
		v := a[j*m+j] - dot(a[j*m:j*m+j], a[j*m:j*m+j])
		if !(v > 1e-12*a[j*m+j]) || !(v > 0) {
			return false
		}
		v = math.Sqrt(v)
		a[j*m+j] = v
		for i := j + 1; i < m; i++ {
			a[i*m+j] = (a[i*m+j] - dot(a[i*m:i*m+j], a[j*m:j*m+j])) / v
		}
	}
	for i := range m { // L y = b
		b[i] = (b[i] - dot(a[i*m:i*m+i], b[:i])) / a[i*m+i]
	}
	for i := m - 1; i >= 0; i-- { // Lᵀ x = y
		v := b[i]
		for k := i + 1; k < m; k++ {
			v -= a[k*m+i] * b[k]
		}
		b[i] = v / a[i*m+i]
	}
	return true
}
