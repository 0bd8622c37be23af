package fit

import (
	"fmt"
	"math"

	"lariat/online"
)

// separationEpochs is the epoch budget after which an unconverged
// unpenalized logistic fit is checked for separated classes.
const separationEpochs = 50

// fitUnpenalized fits λ = 0 on every row (Options.Lambda 0) and fills the
// model part of doc. The unpenalized fit must be unique: the features that
// vary must be linearly independent on the rows (so no more of them than
// rows − 1), else the least-squares or likelihood minimum is a whole
// subspace; and for the logistic loss no hyperplane may separate the
// classes, else the likelihood has no maximum (Albert & Anderson 1984,
// "On the existence of maximum likelihood estimates in logistic regression
// models", Biometrika 71(1)). Each case is a one-line error.
func (s *fitSpec) fitUnpenalized(t *table, seed uint64, doc *fitDoc) error {
	p, err := s.pipelineFor(t, t.rows(), 0, 0, 0, seed, true)
	if err != nil {
		return err
	}
	if err := s.feed(t, p); err != nil {
		return err
	}
	l := p.Ladder()
	if err := identifiable(l, doc.Input); err != nil {
		return err
	}
	budget := s.maxEpochs
	if s.loss.Domain() == online.ZeroOne {
		// Separated classes never converge: look after a short budget.
		first := min(budget, separationEpochs)
		if !p.Converge(s.tol, first) {
			if err := diverged(l, t, doc.Input); err != nil {
				return err
			}
		}
		budget -= first
	}
	doc.Converged = p.Converge(s.tol, max(budget, 0))
	doc.KKT, doc.Tol = l.KKT(0), s.tol
	doc.LambdaMax = l.LambdaMax()
	doc.Unpenalized = true
	doc.fill(l.Model(0), t.names)
	return nil
}

// identifiable returns an *Error when the window's varying features are
// linearly dependent (rank of the standardized Gram matrix below their
// number, online.Rank).
func identifiable(l *online.Ladder, file string) error {
	m := l.Model(0)
	vary := 0
	for _, sd := range m.Std {
		if sd > 0 {
			vary++
		}
	}
	r := online.Rank(l.Spectrum())
	if r >= vary {
		return nil
	}
	if n := l.Len(); n-1 < vary {
		return &Error{File: file, Msg: fmt.Sprintf("cannot fit λ = 0: %d features vary but there are only %d rows "+
			"(at most %d independent directions), so the unpenalized fit is not unique; give --lambda > 0 or leave it out to choose λ", vary, n, n-1)}
	}
	return &Error{File: file, Msg: fmt.Sprintf("cannot fit λ = 0: the features are collinear (rank %d for %d varying features), "+
		"so the unpenalized fit is not unique; give --lambda > 0 or leave it out to choose λ", r, vary)}
}

// saturated is the |η| beyond which a logistic probability is 1 to within
// 10⁻¹⁵ (σ(35) = 1 − 6·10⁻¹⁶): a row there contributes nothing the
// arithmetic can see to the gradient.
const saturated = 35

// diverged returns an *Error when the unconverged unpenalized logistic fit
// in l shows that its maximum does not exist: every row strictly on its
// own class's side (complete separation, the fit's hyperplane is the
// certificate), or some row's |η| beyond saturated while the optimality
// conditions still fail (the coefficients growing without bound, as they
// do under quasi-complete separation; a fit that reaches its tolerance is
// never refused). Albert & Anderson (1984) for both cases.
func diverged(l *online.Ladder, t *table, file string) error {
	all, top := true, 0.0
	for i := range t.rows() {
		eta := l.Eta(0, t.row(i))
		if (t.y[i] == 1) != (eta > 0) || eta == 0 {
			all = false
		}
		top = max(top, math.Abs(eta))
	}
	const tail = "so the unpenalized logistic fit does not exist (its coefficients grow without bound); give --lambda > 0 or leave it out to choose λ"
	switch {
	case all:
		return &Error{File: file, Msg: "cannot fit λ = 0: a hyperplane of the features separates the two classes, " + tail}
	case top > saturated:
		return &Error{File: file, Msg: fmt.Sprintf("cannot fit λ = 0: after %d epochs the fit is not converged and a row has |η| = %.3g "+
			"(probability 1 to 15 digits): the classes are separated or nearly so, %s", separationEpochs, top, tail)}
	}
	return nil
}
