package online

import "math"

// Penalty is the elastic-net family λ(α‖θ‖₁ + (1−α)/2‖θ‖²) on the
// standardized coefficients; the intercept is never penalized. Mix is α:
// 1 is the lasso, 0 ridge, anything between an elastic net.
type Penalty struct {
	// Mix is α in [0, 1].
	Mix float64
}

// Lasso returns the L1 penalty (α = 1).
func Lasso() Penalty { return Penalty{Mix: 1} }

// Ridge returns the squared L2 penalty (α = 0).
func Ridge() Penalty { return Penalty{Mix: 0} }

// ElasticNet returns the penalty with mix α; it panics if α is outside [0, 1].
func ElasticNet(mix float64) Penalty {
	if !(mix >= 0 && mix <= 1) {
		panic("online: elastic-net mix outside [0, 1]")
	}
	return Penalty{Mix: mix}
}

// Kind returns "lasso", "ridge" or "elastic-net".
func (p Penalty) Kind() string {
	switch p.Mix {
	case 1:
		return "lasso"
	case 0:
		return "ridge"
	}
	return "elastic-net"
}

// Value returns λ(α‖θ‖₁ + (1−α)/2‖θ‖²).
func (p Penalty) Value(theta []float64, lambda float64) float64 {
	var l1, l2 float64
	for _, v := range theta {
		l1 += math.Abs(v)
		l2 += v * v
	}
	return lambda * (p.Mix*l1 + (1-p.Mix)/2*l2)
}

// Prox returns the proximal operator of t·(α|u| + (1−α)/2 u²) at z, that is
// argmin_u ½(u − z)² + t(α|u| + (1−α)/2 u²): soft-threshold z by tα, then
// divide by 1 + t(1−α) (Parikh & Boyd 2014, §6.5.2). t is the step times λ.
func (p Penalty) Prox(z, t float64) float64 {
	a := t * p.Mix
	var u float64
	switch {
	case z > a:
		u = z - a
	case z < -a:
		u = z + a
	default:
		return 0
	}
	return u / (1 + t*(1-p.Mix))
}
