package online

import "math"

// Loss is a per-record loss ℓ(y, η) of a generalized linear model, where η is
// the linear predictor b + x̃ᵀθ.
type Loss interface {
	// Value returns ℓ(y, η).
	Value(y, eta float64) float64
	// Deriv returns ∂ℓ/∂η at (y, η).
	Deriv(y, eta float64) float64
	// Curvature returns an upper bound on ∂²ℓ/∂η² over all y and η.
	Curvature() float64
	// Name returns the loss's configuration name: "squared" or "logistic".
	Name() string
}

// Squared is the squared loss ℓ = ½(y − η)² of linear regression.
type Squared struct{}

// Logistic is the logistic loss ℓ = log(1 + e^η) − yη of logistic regression
// with y ∈ {0, 1}, evaluated without overflow for any finite η.
type Logistic struct{}

var (
	_ Loss = Squared{}
	_ Loss = Logistic{}
)

// Value returns ½(y − η)².
func (Squared) Value(y, eta float64) float64 { r := y - eta; return 0.5 * r * r }

// Deriv returns η − y.
func (Squared) Deriv(y, eta float64) float64 { return eta - y }

// Curvature returns 1.
func (Squared) Curvature() float64 { return 1 }

// Name returns "squared".
func (Squared) Name() string { return "squared" }

// Value returns softplus(η) − yη.
func (Logistic) Value(y, eta float64) float64 { return Softplus(eta) - y*eta }

// Deriv returns σ(η) − y.
func (Logistic) Deriv(y, eta float64) float64 { return Sigmoid(eta) - y }

// Curvature returns 1/4, the maximum of σ(η)(1 − σ(η)).
func (Logistic) Curvature() float64 { return 0.25 }

// Name returns "logistic".
func (Logistic) Name() string { return "logistic" }

// Softplus returns log(1 + e^x) without overflow: for x > 0 it evaluates
// x + log1p(e^−x), so e is never raised to a large positive power.
func Softplus(x float64) float64 {
	if x > 0 {
		return x + math.Log1p(math.Exp(-x))
	}
	return math.Log1p(math.Exp(x))
}

// Sigmoid returns 1/(1 + e^−x) without overflow for any finite x.
func Sigmoid(x float64) float64 {
	if x >= 0 {
		return 1 / (1 + math.Exp(-x))
	}
	e := math.Exp(x)
	return e / (1 + e)
}

// LossByName returns the loss for a configuration name ("squared" or
// "logistic") and false for any other name.
func LossByName(name string) (Loss, bool) {
	switch name {
	case "squared":
		return Squared{}, true
	case "logistic":
		return Logistic{}, true
	}
	return nil, false
}
