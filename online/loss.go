package online

import "math"

// Loss is a per-record loss ℓ(y, η) of a generalized linear model, where η is
// the linear predictor b + x̃ᵀθ: the negative log-likelihood, up to terms
// free of η, of a label whose mean is Mean(η) (McCullagh & Nelder 1989,
// ch. 2). It is everything package online asks of a loss (the learners, the
// finishing pass, label validation, held-out scoring), so a new loss is one
// type implementing it; the learners compute the derivative of the built-in
// losses inline (lossKind) and call Deriv for any other.
type Loss interface {
	// Value returns ℓ(y, η).
	Value(y, eta float64) float64
	// Deriv returns ∂ℓ/∂η at (y, η).
	Deriv(y, eta float64) float64
	// SecondDeriv returns ∂²ℓ/∂η² at (y, η), the weights of the Newton
	// steps of Ladder.Converge.
	SecondDeriv(y, eta float64) float64
	// Curvature returns an upper bound on ∂²ℓ/∂η² over all y and η; it
	// sets the SAGA step.
	Curvature() float64
	// Quadratic reports whether ℓ is quadratic in η (SecondDeriv constant),
	// so that one Newton step minimizes it exactly and Converge takes the
	// step without a line search.
	Quadratic() bool
	// Mean returns the prediction on the label's scale, μ(η) (the inverse
	// link): Ladder.HoldoutPredictions returns it, and Score measures the
	// Brier score or the residuals y − μ(η) with it.
	Mean(eta float64) float64
	// Domain returns the labels the loss accepts; it also selects Score's
	// metrics.
	Domain() Domain
	// Name returns the loss's configuration name: "squared" or "logistic".
	Name() string
}

// Domain is the set of labels a loss accepts. Every loss also requires a
// finite label within the input bound (±1e50), whatever its domain.
type Domain int

const (
	// Reals is any finite label. Score reports RMSE, MAE and R².
	Reals Domain = iota
	// ZeroOne is a class label, 0 or 1. Score reports AUC, Brier score and
	// log loss (Value is then the Bernoulli negative log-likelihood).
	ZeroOne
)

// Contains reports whether label y lies in d.
func (d Domain) Contains(y float64) bool { return d != ZeroOne || y == 0 || y == 1 }

// String returns the domain as the error messages state it.
func (d Domain) String() string {
	if d == ZeroOne {
		return "0 or 1"
	}
	return "any finite number"
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

// SecondDeriv returns 1.
func (Squared) SecondDeriv(_, _ float64) float64 { return 1 }

// Curvature returns 1.
func (Squared) Curvature() float64 { return 1 }

// Quadratic returns true.
func (Squared) Quadratic() bool { return true }

// Mean returns η (identity link).
func (Squared) Mean(eta float64) float64 { return eta }

// Domain returns Reals.
func (Squared) Domain() Domain { return Reals }

// Name returns "squared".
func (Squared) Name() string { return "squared" }

// Value returns softplus(η) − yη.
func (Logistic) Value(y, eta float64) float64 { return Softplus(eta) - y*eta }

// Deriv returns σ(η) − y.
func (Logistic) Deriv(y, eta float64) float64 { return Sigmoid(eta) - y }

// SecondDeriv returns σ(η)(1 − σ(η)).
func (Logistic) SecondDeriv(_, eta float64) float64 {
	p := Sigmoid(eta)
	return p * (1 - p)
}

// Curvature returns 1/4, the maximum of σ(η)(1 − σ(η)).
func (Logistic) Curvature() float64 { return 0.25 }

// Quadratic returns false.
func (Logistic) Quadratic() bool { return false }

// Mean returns the probability σ(η) (logit link).
func (Logistic) Mean(eta float64) float64 { return Sigmoid(eta) }

// Domain returns ZeroOne.
func (Logistic) Domain() Domain { return ZeroOne }

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

// lossKind names the built-in losses whose derivative the learners
// compute inline (sagaLearner.deriv, decayLearner.deriv), so that the
// per-record path makes no interface call for them. It is a speed-up only:
// any other loss is lossOther, and the learners call its Deriv.
type lossKind int

const (
	lossOther lossKind = iota
	lossSquared
	lossLogistic
)

// kindOf returns the lossKind of loss.
func kindOf(loss Loss) lossKind {
	switch loss.(type) {
	case Squared:
		return lossSquared
	case Logistic:
		return lossLogistic
	}
	return lossOther
}
