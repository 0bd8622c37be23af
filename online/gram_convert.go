package online

import "fmt"

// GramFrom returns a gram ladder (Options.Learner "gram") that takes over
// the SAGA ladder s of the squared loss, which is not changed: the same
// options but the learner, the same width, records seen and λ grid (with
// its anchor, extension and ridge spectrum bookkeeping), and the same
// train window, whose records (features, labels, weights and times, oldest
// first) are copied into the gram learner's window. The window's sums and
// scale are rebuilt from those records, the grid is re-anchored on them,
// and every member is solved from the sums, warm from the SAGA member of
// its λ: the members are then what a gram ladder fed those records gives
// at those λ. It is how a model saved under the SAGA learner continues
// under the gram learner without losing its window (an upgrade). It
// returns an error wrapping ErrOptions for another learner or loss.
func GramFrom(s *Ladder) (*Ladder, error) {
	sl, ok := s.lrn.(*sagaLearner)
	if !ok || !s.opt.Loss.Quadratic() {
		return nil, fmt.Errorf("%w: a gram ladder is made from a SAGA ladder of the squared loss, not %s with %s",
			ErrOptions, s.opt.Learner, s.opt.Loss.Name())
	}
	opt := s.opt
	opt.Learner, opt.Features = "gram", s.d
	l, err := NewLadder(&opt)
	if err != nil {
		return nil, err
	}
	l.seen, l.lmax, l.anchor = s.seen, s.lmax, s.anchor
	copy(l.lambdas, s.lambdas)
	copy(l.fresh, s.fresh)
	l.nfresh = s.nfresh
	g, sg := &l.grid, &s.grid
	g.ratio, g.ext, g.df, g.rank = sg.ratio, sg.ext, sg.df, sg.rank
	g.specAt, g.specLen, g.respec = sg.specAt, sg.specLen, sg.respec
	l.applyLambdas()
	c := l.lrn.(*covLearner)
	from := sl.ts
	for i, slot := range from.order() {
		m := from.ring.At(i)
		x := from.row(slot)
		copy(c.ts.row(c.ts.push(x, m.y, m.w, m.t, 0, 0)), x)
	}
	c.rebuild()
	c.prepare()
	for k, m := range c.ms {
		_, th := sl.ms[k].params()
		for j, v := range c.ts.inv {
			if v != 0 {
				m.theta[j] = th[j]
			}
		}
	}
	c.solved = true // the warm starts are the SAGA members, not the member above
	if c.ts.ring.Len() > 0 {
		l.reanchor(c.lambdaMax(l.alpha0))
	}
	c.solve()
	return l, nil
}
