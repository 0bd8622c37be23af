package plant

// The simulated plant below is invented for the demo: the machines, channel
// names, coefficients and the fault are made up to exercise the daemon and
// describe no real equipment or data set.

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"time"

	"lariat/daemon/record"
)

// Options configures a simulated plant; the zero value gives the defaults
// shown.
type Options struct {
	// Pumps is the number of machines; default 4.
	Pumps int
	// Rate is records per second over all pumps and both streams; default 200.
	Rate float64
	// FaultAfter is when, after the start, one pump's bearing starts to
	// degrade (the relation of bearing temperature to vibration changes);
	// default 3m, negative means never.
	FaultAfter time.Duration
	// FaultPump is the index of the degrading pump; default 2 (the third).
	FaultPump int
	// Seed seeds the plant's random numbers; the same seed gives the same
	// records.
	Seed uint64
	// TripSubject returns the subject for a pump's trip records (logistic
	// label); default "plant.pump.<id>.trip".
	TripSubject func(pump string) string
	// TempSubject returns the subject for a pump's bearing-temperature
	// records (linear virtual-sensor target); default "plant.pump.<id>.bearing".
	TempSubject func(pump string) string
	// ScoreSubject, when set, returns the subject for unlabeled live
	// readings to score: each trip record is followed by the same reading
	// without its label (the label of a live reading is known only later).
	// Default none.
	ScoreSubject func(pump string) string
}

// Publisher is the part of a NATS connection the plant needs.
type Publisher interface {
	// Publish sends data on subject, as nats.Conn.Publish does.
	Publish(subject string, data []byte) error
}

// channels is the number of channels per pump: 14 named process channels
// and auxiliary channels that carry no information about either target.
const channels = 40

var processChannels = [...]string{
	"suction_kpa", "discharge_kpa", "flow_m3h", "amps_l1", "amps_l2", "amps_l3",
	"vib_x_mms", "vib_y_mms", "vib_axial_mms", "motor_temp_c", "oil_temp_c",
	"ambient_c", "speed_rpm", "valve_pos_pct",
}

// Plant is a simulated plant of several pumps, each with about 40 channels, a
// few of them informative. Each step emits one record: alternately a trip
// record (y = 1 when the pump trips within the next minutes; logistic) and a
// bearing-temperature record (y = bearing temperature in °C; linear), for the
// next pump in turn, plus the unlabeled twin of each trip record when
// ScoreSubject is set. It is invented (see the comment at the top of the
// file).
type Plant struct {
	o     Options
	rng   *rand.Rand
	names []string
	pumps []pumpState
	n     uint64 // messages emitted (drives the clock)
	k     uint64 // labeled records emitted
	score int    // pump whose unlabeled reading is due next, or −1
	start time.Time
	rec   record.Record // the record being encoded; X has one value per channel
	buf   []byte        // the encoded record, reused by the next call
	num   []byte        // scratch for round
}

type pumpState struct {
	id        string
	key       []byte  // id, as the record's key
	load      float64 // latent load in [0, 1], AR(1)
	ambient   float64
	aux       []float64 // AR(1) noise channels
	x         []float64 // current channel values
	tripSubj  string
	tempSubj  string
	scoreSubj string
}

// New returns a plant whose clock starts at start.
func New(o *Options, start time.Time) *Plant {
	var opt Options
	if o != nil {
		opt = *o
	}
	if opt.Pumps <= 0 {
		opt.Pumps = 4
	}
	if opt.Rate <= 0 {
		opt.Rate = 200
	}
	if opt.FaultAfter == 0 {
		opt.FaultAfter = 3 * time.Minute
	}
	if opt.FaultPump <= 0 || opt.FaultPump >= opt.Pumps {
		opt.FaultPump = min(2, opt.Pumps-1)
	}
	if opt.TripSubject == nil {
		opt.TripSubject = func(p string) string { return "plant.pump." + p + ".trip" }
	}
	if opt.TempSubject == nil {
		opt.TempSubject = func(p string) string { return "plant.pump." + p + ".bearing" }
	}
	p := &Plant{o: opt, rng: rand.New(rand.NewPCG(opt.Seed, 0x706c616e74)), start: start, score: -1}
	p.rec.X = make([]float64, channels)
	p.names = append(p.names, processChannels[:]...)
	for i := len(processChannels); i < channels; i++ {
		p.names = append(p.names, fmt.Sprintf("aux_%02d", i-len(processChannels)+1))
	}
	for i := range opt.Pumps {
		id := fmt.Sprintf("p%d", i+1)
		ps := pumpState{
			id: id, key: []byte(id), load: 0.6, ambient: 18 + 4*p.rng.Float64(),
			aux:      make([]float64, channels-len(processChannels)),
			x:        make([]float64, channels),
			tripSubj: opt.TripSubject(id), tempSubj: opt.TempSubject(id),
		}
		if opt.ScoreSubject != nil {
			ps.scoreSubj = opt.ScoreSubject(id)
		}
		p.pumps = append(p.pumps, ps)
	}
	return p
}

// Options returns the plant's options with defaults filled in.
func (p *Plant) Options() Options { return p.o }

// Channels returns the channel names in the order they are written.
func (p *Plant) Channels() []string { return p.names }

// Now returns the plant's simulated time: the start plus one record per
// 1/Rate seconds.
func (p *Plant) Now() time.Time {
	return p.start.Add(time.Duration(float64(p.n) / p.o.Rate * float64(time.Second)))
}

// Faulted reports whether the scheduled bearing fault has begun.
func (p *Plant) Faulted() bool {
	return p.o.FaultAfter > 0 && p.Now().Sub(p.start) >= p.o.FaultAfter
}

// Next advances the plant by one record and returns its subject and JSON
// encoding. The returned bytes are reused by the next call.
func (p *Plant) Next() (subject string, msg []byte) {
	if p.score >= 0 { // the unlabeled twin of the last trip record
		ps := &p.pumps[p.score]
		p.score = -1
		now := p.Now()
		p.n++
		return ps.scoreSubj, p.encode(ps, math.NaN(), now)
	}
	i := int(p.k/2) % len(p.pumps)
	ps := &p.pumps[i]
	trip := p.k%2 == 0
	p.step(ps)
	now := p.Now()
	p.n++
	p.k++
	var y float64
	if trip {
		y = p.tripLabel(ps)
		subject = ps.tripSubj
		if ps.scoreSubj != "" {
			p.score = i
		}
	} else {
		y = p.bearingTemp(ps, i == p.o.FaultPump && p.Faulted())
		subject = ps.tempSubj
	}
	return subject, p.encode(ps, y, now)
}

// step moves a pump's latent state and channels one sample forward.
func (p *Plant) step(ps *pumpState) {
	r := p.rng
	ps.load = clamp(ps.load+0.05*(0.65-ps.load)+0.05*r.NormFloat64(), 0.05, 1)
	ps.ambient += 0.01 * r.NormFloat64()
	l := ps.load
	x := ps.x
	x[0] = 300 - 40*l + 5*r.NormFloat64()   // suction_kpa
	x[1] = 900 + 400*l + 15*r.NormFloat64() // discharge_kpa
	x[2] = 50 + 80*l + 3*r.NormFloat64()    // flow_m3h
	for k := 3; k <= 5; k++ {
		x[k] = 20 + 45*l + 1.5*r.NormFloat64() // amps
	}
	x[6] = 1.5 + 2.5*l + 0.6*r.NormFloat64() // vib_x_mms
	x[7] = 0.9*x[6] + 0.4*r.NormFloat64()    // vib_y_mms, correlated with x
	x[8] = 0.8 + 0.5*r.NormFloat64()         // vib_axial_mms
	x[9] = 55 + 30*l + 3*r.NormFloat64()     // motor_temp_c
	x[10] = 45 + 15*l + 2*r.NormFloat64()    // oil_temp_c
	x[11] = ps.ambient + 0.3*r.NormFloat64() // ambient_c
	x[12] = 1480 - 20*l + 5*r.NormFloat64()  // speed_rpm
	x[13] = 30 + 60*l + 4*r.NormFloat64()    // valve_pos_pct
	for k := range ps.aux {
		ps.aux[k] = 0.95*ps.aux[k] + 0.3*r.NormFloat64()
		x[len(processChannels)+k] = ps.aux[k]
	}
}

// bearingTemp is the linear target: mostly vibration, oil temperature and
// ambient. After the fault the bearing runs hotter per unit of vibration.
func (p *Plant) bearingTemp(ps *pumpState, faulted bool) float64 {
	x := ps.x
	vibGain := 6.0
	if faulted {
		vibGain = 14.0
	}
	return 20 + vibGain*x[6] + 0.5*x[10] + 0.8*x[11] - 0.02*(x[0]-300) + 1.0*p.rng.NormFloat64()
}

// tripLabel is the logistic target: trips grow likelier with vibration and
// motor temperature and with low suction pressure (cavitation).
func (p *Plant) tripLabel(ps *pumpState) float64 {
	x := ps.x
	eta := -3 + 1.2*(x[6]-3) + 0.15*(x[9]-70) - 0.06*(x[0]-280)
	if p.rng.Float64() < 1/(1+math.Exp(-eta)) {
		return 1
	}
	return 0
}

// encode writes the record of pump ps with label y (NaN: an unlabeled
// reading) at time t with record.AppendJSON, the one encoder of the wire
// format, into the plant's reused buffer. The values are rounded first,
// channels to 3 decimals and labels to 6 significant digits, so the records
// read as the short, fixed-precision readings the demo has always sent.
func (p *Plant) encode(ps *pumpState, y float64, t time.Time) []byte {
	r := &p.rec
	for k, v := range ps.x {
		r.X[k] = p.round(v, 'f', 3)
	}
	r.Y = y
	if !math.IsNaN(y) {
		r.Y = p.round(y, 'g', 6)
	}
	r.T, r.HasT, r.Key = t.UnixMilli(), true, ps.key
	p.buf = record.AppendJSON(p.buf[:0], p.names, r)
	return p.buf
}

// round returns the number v reads as when written with strconv's format
// and precision.
func (p *Plant) round(v float64, format byte, prec int) float64 {
	p.num = strconv.AppendFloat(p.num[:0], v, format, prec, 64)
	r, err := strconv.ParseFloat(string(p.num), 64)
	if err != nil {
		panic("plant: " + err.Error()) // the plant's values are finite
	}
	return r
}

// Run publishes records at the plant's rate until ctx is done and returns the
// number published. Publishing is paced by a ticker in small batches, so a
// rate of a few hundred per second costs little CPU.
func (p *Plant) Run(ctx context.Context, pub Publisher) (uint64, error) {
	const tick = 20 * time.Millisecond
	t := time.NewTicker(tick)
	defer t.Stop()
	begin := time.Now()
	var sent uint64
	for {
		select {
		case <-ctx.Done():
			return sent, nil
		case now := <-t.C:
			due := uint64(now.Sub(begin).Seconds() * p.o.Rate)
			for sent < due {
				subj, msg := p.Next()
				if err := pub.Publish(subj, msg); err != nil {
					return sent, fmt.Errorf("plant: publish: %w", err)
				}
				sent++
			}
		}
	}
}

func clamp(v, lo, hi float64) float64 { return math.Max(lo, math.Min(hi, v)) }
