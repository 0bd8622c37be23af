package window

import "math"

// Defaults of PageHinkleyOptions. δ = 0.005, λ = 50, α = 0.9999 and 30
// values before a signal are widely used settings (value from memory); the
// Page-Hinkley papers fix none of them, so they are common practice, no
// single source. The tests measure what they give on this package's data.
const (
	DefaultPHDelta        = 0.005
	DefaultPHThreshold    = 50
	DefaultPHAlpha        = 0.9999
	DefaultPHMinInstances = 30
)

// PageHinkleyOptions configures a PageHinkley; nil or the zero value gives
// the defaults shown. A field outside its valid range takes its default.
type PageHinkleyOptions struct {
	// Delta is the magnitude of increase tolerated per value (the drift
	// allowance δ, > 0). Default 0.005.
	Delta float64
	// Threshold is λ (> 0): a change is signalled when the statistic
	// exceeds it. It is in the units of the values, so it must suit their
	// scale: with all defaults, stationary normal values gave no false
	// signal in 2 million for a standard deviation σ <= 0.3, 0.7 per 100k
	// for σ = 0.4 and 2.9 per 100k for σ = 0.5 (measured; see the tests).
	// Default 50.
	Threshold float64
	// Alpha is the fading factor in (0, 1] applied to the cumulative sum
	// before each value (1 = no fading). Default 0.9999.
	Alpha float64
	// MinInstances is the number of values seen before a change can be
	// signalled (>= 1). Default 30.
	MinInstances int
}

// PageHinkley is the Page-Hinkley test for an increase in the mean of a
// stream (Page 1954, "Continuous inspection schemes", Biometrika 41), with
// a fading factor α as used by Gama, Sebastião & Rodrigues (2013), "On
// evaluating stream learning algorithms", Machine Learning 90. Fed a
// model's loss, it signals when the loss goes up. For each value x_t:
//
//	x̄_t  = mean of x_1..x_t (since the start or the last signal)
//	m_t  = α·m_{t−1} + (x_t − x̄_t − δ),   m_0 = 0
//	M_t  = min(α·M_{t−1}, m_t),           M_0 = 0
//	PH_t = m_t − M_t = max(0, α·PH_{t−1} + x_t − x̄_t − δ)
//
// and a change is signalled when t >= MinInstances and PH_t > λ. After a
// signal the test starts afresh at the next Add. With α = 1 this is the
// classic test (with the running mean).
//
// The minimum M fades with m: fading m alone would let m climb back toward
// its faded steady state after a decrease of the mean while M stayed at the
// old low, and signal an "increase" that never happened (a test checks
// this).
type PageHinkley struct {
	delta, lambda, alpha float64
	minN                 int

	n     int
	mean  float64
	ph    float64 // PH_t
	fired bool    // a change was signalled; restart at the next Add
}

// NewPageHinkley returns a PageHinkley configured by o (nil = defaults).
func NewPageHinkley(o *PageHinkleyOptions) *PageHinkley {
	var opt PageHinkleyOptions
	if o != nil {
		opt = *o
	}
	if !(opt.Delta > 0) || math.IsInf(opt.Delta, 0) {
		opt.Delta = DefaultPHDelta
	}
	if !(opt.Threshold > 0) || math.IsInf(opt.Threshold, 0) {
		opt.Threshold = DefaultPHThreshold
	}
	if !(opt.Alpha > 0 && opt.Alpha <= 1) {
		opt.Alpha = DefaultPHAlpha
	}
	if opt.MinInstances < 1 {
		opt.MinInstances = DefaultPHMinInstances
	}
	return &PageHinkley{
		delta:  opt.Delta,
		lambda: opt.Threshold,
		alpha:  opt.Alpha,
		minN:   opt.MinInstances,
	}
}

// Add feeds x and reports whether an increase of the mean was detected. A
// NaN or infinite x is ignored and reports false. Add does not allocate.
func (p *PageHinkley) Add(x float64) (change bool) {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return false
	}
	if p.fired {
		p.Reset()
	}
	p.n++
	p.mean += (x - p.mean) / float64(p.n)
	p.ph = max(0, p.alpha*p.ph+(x-p.mean-p.delta))
	if p.n >= p.minN && p.ph > p.lambda {
		p.fired = true
		return true
	}
	return false
}

// Statistic returns PH_t = m_t − M_t; after Add reported a change it is the
// value that crossed the threshold, until the next Add.
func (p *PageHinkley) Statistic() float64 { return p.ph }

// Threshold returns λ.
func (p *PageHinkley) Threshold() float64 { return p.lambda }

// Count returns the number of values since the start or the last change.
func (p *PageHinkley) Count() int { return p.n }

// Reset forgets all values, keeping the options.
func (p *PageHinkley) Reset() {
	p.n, p.mean, p.ph, p.fired = 0, 0, 0, false
}
