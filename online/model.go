package online

// Model is an immutable snapshot of one ladder member.
type Model struct {
	Loss         string    // "squared" | "logistic" (Loss.Name())
	Penalty      Penalty   // the penalty family
	Lambda       float64   // the member's λ
	Index        int       // ladder index
	Intercept    float64   // raw units: b − Σ θ_j μ_j / s_j
	Coef         []float64 // raw units: θ_j / s_j (0 where s_j == 0)
	Standardized []float64 // θ
	StdIntercept float64   // b
	Mean, Std    []float64 // the scale the model was fitted with (population std, ddof 0)
	Records      int       // records in the window (Ladder.Len)
	Weight       float64   // Σ w in the window (decay learner: decayed Σ w)
	Seen         uint64    // records ever accepted
}

// Model returns a snapshot of member i. Its scale is the working scale of
// the learner: for SAGA, the window's exact mean and std as of the last
// refresh (at most 32 records old; exact after Converge). Model allocates;
// it is not meant for the per-record path.
func (l *Ladder) Model(i int) Model {
	b, th := l.members[i].params()
	mu, sd, inv := l.scale()
	return l.modelOf(i, b, th, mu, sd, inv)
}

// modelOf returns member i's Model with intercept b and standardized
// coefficients th on the scale mu, sd, inv (all copied).
func (l *Ladder) modelOf(i int, b float64, th, mu, sd, inv []float64) Model {
	m := Model{
		Loss: l.opt.Loss.Name(), Penalty: *l.opt.Penalty, Lambda: l.lambdas[i], Index: i,
		Coef: make([]float64, l.d), Standardized: append([]float64(nil), th...),
		StdIntercept: b, Mean: append([]float64(nil), mu...), Std: append([]float64(nil), sd...),
		Records: l.Len(), Seen: l.seen,
	}
	m.Intercept = b
	for j, t := range th {
		c := t * inv[j]
		m.Coef[j] = c
		m.Intercept -= c * mu[j]
	}
	m.Weight = l.lrn.weight()
	return m
}

// Eta returns the raw-unit linear predictor Intercept + Σ Coef_j x_j; a
// missing value (NaN) is replaced by the feature's mean, so it contributes
// 0 on the standardized scale. It panics if len(x) != len(m.Coef).
func (m *Model) Eta(x []float64) float64 {
	if len(x) != len(m.Coef) {
		panic("online: Model.Eta: wrong number of features")
	}
	eta := m.Intercept
	for j, c := range m.Coef {
		v := x[j]
		if v != v {
			v = m.Mean[j]
		}
		eta += c * v
	}
	return eta
}

// Nonzero returns the number of nonzero coefficients.
func (m *Model) Nonzero() int {
	n := 0
	for _, v := range m.Standardized {
		if v != 0 {
			n++
		}
	}
	return n
}
