// Package online is the numerical core of lariat: losses, the elastic-net
// penalty and its proximal operator, online standardization, the learners
// and the λ ladder they train, held-out scoring and λ selection.
//
// A Ladder holds K penalized generalized linear models (squared, logistic
// or any other type implementing Loss) on a log grid of λ and keeps them current on a stream of
// Records. With the default windowed proximal SAGA learner (Defazio, Bach &
// Lacoste-Julien 2014) every member minimizes exactly
//
//	F(b, θ) = (1/W) Σ w_i ℓ(y_i, b + x̃_iᵀθ) + λ(α‖θ‖₁ + (1−α)/2‖θ‖²),  W = Σ w_i,
//
// over the records now in the train window, with x̃ the features
// standardized by the window's mean and population standard deviation and
// the intercept b unpenalized (the convention of Friedman, Hastie &
// Tibshirani 2010). The members share the window: the records are stored
// once, as float64, and each member keeps one scalar gradient per record.
// Each arriving record costs a bounded number of O(d) steps per member,
// independent of the window length; Idle adds steps on a quiet stream and
// Converge finishes to a KKT tolerance. The same seed and records give
// bit-identical models on a given machine. The "decay" learner
// (FTRL-Proximal, McMahan et al. 2013) keeps no window and forgets with a
// half-life in records.
//
// Missing values (NaN in Record.X) are imputed with the feature's current
// window mean, which is 0 on the standardized scale. Constant features get
// coefficient 0. Invalid records are rejected with an error and change
// nothing.
//
// A Ladder, a Holdout and a Chooser save their whole state with
// MarshalBinary (a versioned binary format, floats as their exact bits)
// and restore it with UnmarshalLadder or UnmarshalBinary; a restored value
// continues bit-identically on a machine that takes the same arithmetic
// path (assembly kernels or -tags purego). A defective encoding is refused
// with an error wrapping ErrState.
//
// Nothing in this package is safe for concurrent use: one goroutine owns a
// Ladder (and a Holdout) and drives it.
package online
