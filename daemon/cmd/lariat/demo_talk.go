package main

// This file narrates `lariat demo` (run in demo_run.go): a line per model
// every few seconds, each drift alert as it arrives, and the alert counts
// and fault detection for the summary.

import (
	"encoding/json"
	"fmt"
	"io"
	"slices"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/sink"
)

// alertKinds are the alert kinds in the order the summary shows them.
var alertKinds = []sink.AlertKind{sink.KindPerformance, sink.KindData, sink.KindModel, sink.KindPrediction}

// faultDetection is a model's first performance alert whose triggering
// record was published after the fault began.
type faultDetection struct {
	wall    time.Duration // from the fault's start (wall clock) to the alert's arrival
	records uint64        // plant records between the fault's start and the triggering record
}

// narrator prints the demo's progress on w. Alerts arrive on a plain NATS
// subscription to <prefix>.alert.>, which sees every alert in order; the
// per-model lines read the daemon's store.
type narrator struct {
	w       io.Writer
	models  func() []*sink.ModelDoc
	start   time.Time // wall clock at the plant's start
	rate    float64   // plant records per second
	fault   time.Time // the fault's start on the plant's clock (= wall at start); zero if none
	faultIn time.Duration

	nc   *nats.Conn
	sub  *nats.Subscription
	msgs chan *nats.Msg

	mu      sync.Mutex
	counts  map[string]map[sink.AlertKind]int
	order   []string // models in the order their first alert arrived
	predNew map[string]int
	after   map[string]*faultDetection // first performance alert after the fault, by model
	seen    map[string]docMark         // the document shown at the last line
}

// docMark is where a model's document stood: its records applied and its
// publication time, and the rate computed when it was first shown.
type docMark struct {
	applied uint64
	updated time.Time
	rate    string
}

// newNarrator subscribes to prefix.alert.> on the NATS server at url; the
// plant starts at start. Call schedule before run.
func newNarrator(w io.Writer, url, prefix string, models func() []*sink.ModelDoc, start time.Time) (*narrator, error) {
	n := &narrator{
		w: w, models: models, start: start,
		msgs:    make(chan *nats.Msg, 4096),
		counts:  map[string]map[sink.AlertKind]int{},
		predNew: map[string]int{},
		after:   map[string]*faultDetection{},
		seen:    map[string]docMark{},
	}
	nc, err := nats.Connect(url, nats.Name("lariat-demo-narrator"))
	if err != nil {
		return nil, fmt.Errorf("demo: narrator: %w", err)
	}
	sub, err := nc.ChanSubscribe(prefix+".alert.>", n.msgs) // the channel bounds the backlog
	if err == nil {
		err = nc.Flush()
	}
	if err != nil {
		nc.Close()
		return nil, fmt.Errorf("demo: narrator: %w", err)
	}
	n.nc, n.sub = nc, sub
	return n, nil
}

// schedule sets the plant's rate (records per second) and when its fault
// begins (≤ 0: never).
func (n *narrator) schedule(rate float64, faultAfter time.Duration) {
	n.rate, n.faultIn = rate, faultAfter
	if faultAfter > 0 {
		n.fault = n.start.Add(faultAfter)
	}
}

// run prints a line per model every period and each drift alert as it
// arrives, until stop is closed; it then handles the alerts already
// received and closes the connection.
func (n *narrator) run(period time.Duration, stop <-chan struct{}) {
	t := time.NewTicker(period)
	defer t.Stop()
	for {
		select {
		case m := <-n.msgs:
			n.alert(m.Data, time.Now())
		case now := <-t.C:
			n.lines(now)
		case <-stop:
			for {
				select {
				case m := <-n.msgs:
					n.alert(m.Data, time.Now())
				default:
					n.nc.Close()
					return
				}
			}
		}
	}
}

// elapsed formats the time since the start as m:ss.
func (n *narrator) elapsed(now time.Time) string {
	s := int(now.Sub(n.start).Round(time.Second).Seconds())
	return fmt.Sprintf("%d:%02d", s/60, s%60)
}

// lines prints one line per published model: version, λ index, nonzero
// count, held-out loss and AUC or R², records per second since the last
// line and prediction alerts since the last line (logistic). The rate is
// that of records applied between the documents shown (their publication
// times), so it does not depend on when in a publication cycle a line
// falls; an unchanged document keeps the rate shown before, and the first
// has none ("n/a").
func (n *narrator) lines(now time.Time) {
	n.mu.Lock()
	defer n.mu.Unlock()
	for _, doc := range n.models() {
		applied := doc.Records.Applied
		if applied == 0 {
			applied = doc.Records.Seen
		}
		mark, ok := n.seen[doc.Model]
		rate := "n/a"
		switch dt := doc.Updated.Sub(mark.updated).Seconds(); {
		case ok && dt <= 0:
			rate = mark.rate
		case ok && applied >= mark.applied:
			rate = fmt.Sprintf("%.0f", float64(applied-mark.applied)/dt)
		}
		n.seen[doc.Model] = docMark{applied: applied, updated: doc.Updated, rate: rate}
		h := doc.Holdout
		var score string
		if doc.Logistic() {
			score = "AUC " + metric(h.AUC)
		} else {
			score = "R² " + metric(h.R2)
		}
		fmt.Fprintf(n.w, "%s %-13s v%d λ#%d nonzero %d loss %s %s, %s rec/s",
			n.elapsed(now), doc.Model, doc.Version, doc.LambdaIndex, len(doc.Coefficients), metric(h.Loss), score, rate)
		if doc.Logistic() {
			fmt.Fprintf(n.w, ", %d flagged", n.predNew[doc.Model])
			n.predNew[doc.Model] = 0
		}
		fmt.Fprintln(n.w)
	}
}

// alert counts one alert message and prints it unless it is a prediction
// alert; the first performance alert whose record came after the fault's
// start is the fault's detection.
func (n *narrator) alert(data []byte, now time.Time) {
	var a sink.Alert
	if err := json.Unmarshal(data, &a); err != nil {
		return // not an alert document: ignore
	}
	n.mu.Lock()
	defer n.mu.Unlock()
	c, ok := n.counts[a.Model]
	if !ok {
		c = map[sink.AlertKind]int{}
		n.counts[a.Model] = c
		n.order = append(n.order, a.Model)
	}
	c[a.Kind]++
	if a.Kind == sink.KindPrediction {
		n.predNew[a.Model]++
		return
	}
	fmt.Fprintf(n.w, "%s alert %s %s %s: %s\n", n.elapsed(now), a.Model, a.Kind, a.Severity, a.Message)
	if a.Kind != sink.KindPerformance || n.after[a.Model] != nil || n.fault.IsZero() ||
		a.Time.IsZero() || a.Time.Before(n.fault) {
		return
	}
	// The plant's clock advances 1/rate per record from the start, so the
	// alert's record time counts the records since the fault began.
	f := &faultDetection{wall: now.Sub(n.fault), records: uint64(a.Time.Sub(n.fault).Seconds()*n.rate + 0.5)}
	n.after[a.Model] = f
	if a.Model == demoBearing {
		fmt.Fprintf(n.w, "%s fault detected by %s: %s after it began, %d records\n",
			n.elapsed(now), a.Model, f.wall.Round(100*time.Millisecond), f.records)
	}
}

// summary writes the alerts by kind per model (models in names' order,
// then any other) and the fault's detection.
func (n *narrator) summary(w io.Writer, names []string, end time.Time) {
	n.mu.Lock()
	defer n.mu.Unlock()
	for _, m := range n.order {
		if !slices.Contains(names, m) {
			names = append(names, m)
		}
	}
	for _, m := range names {
		parts := make([]string, 0, len(alertKinds))
		for _, k := range alertKinds {
			parts = append(parts, fmt.Sprintf("%s %d", k, n.counts[m][k]))
		}
		fmt.Fprintf(w, "  alerts %-13s %s\n", m, strings.Join(parts, ", "))
	}
	switch f := n.after[demoBearing]; {
	case n.fault.IsZero():
		fmt.Fprintf(w, "  fault: none scheduled\n")
	case end.Before(n.fault):
		fmt.Fprintf(w, "  fault: scheduled after %s, not reached\n", n.faultIn)
	case f != nil:
		fmt.Fprintf(w, "  fault: began after %s, detected by %s %s later (%d records)\n",
			n.faultIn, demoBearing, f.wall.Round(100*time.Millisecond), f.records)
	default:
		fmt.Fprintf(w, "  fault: began after %s, not detected in the %s since\n",
			n.faultIn, end.Sub(n.fault).Round(100*time.Millisecond))
	}
	// The fault changes bearing temperature only (see package plant): a
	// performance alert of another model after it began is not a detection.
	for _, m := range names {
		if f := n.after[m]; f != nil && m != demoBearing {
			fmt.Fprintf(w, "  note: %s raised a performance alert %s after the fault began (%d records); the fault does not change its target\n",
				m, f.wall.Round(100*time.Millisecond), f.records)
		}
	}
}
