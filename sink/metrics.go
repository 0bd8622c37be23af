package sink

import (
	"math"
	"sync"

	"github.com/prometheus/client_golang/prometheus"
)

// Publish error kinds, the values of lariat_publish_errors_total's kind label.
const (
	PublishKindModel  = "model"  // core NATS publish of a model
	PublishKindKV     = "kv"     // key-value put of a model (or bucket setup)
	PublishKindAlert  = "alert"  // alert publish
	PublishKindReject = "reject" // reject republish
)

// Metrics holds lariat's Prometheus metrics (names follow the Prometheus
// naming conventions: base units, _total counters, _seconds durations).
// Per-model children are pre-curried by Model, so the per-record path never
// looks a label up.
type Metrics struct {
	accepted    *prometheus.CounterVec
	rejected    *prometheus.CounterVec
	update      *prometheus.HistogramVec
	dropped     *prometheus.CounterVec
	lambda      *prometheus.GaugeVec
	lambdaIndex *prometheus.GaugeVec
	kkt         *prometheus.GaugeVec
	nonzero     *prometheus.GaugeVec
	holdoutLoss *prometheus.GaugeVec
	version     *prometheus.GaugeVec
	reconnects  prometheus.Counter
	slowDrops   *prometheus.CounterVec
	skipped     *prometheus.CounterVec
	namesOver   *prometheus.CounterVec
	slotsFreed  *prometheus.CounterVec
	checkpoints *prometheus.CounterVec
	unpublished *prometheus.CounterVec
	unreposted  *prometheus.CounterVec
	alerts      *prometheus.CounterVec
	publishErrs *prometheus.CounterVec
	depth       *depthCollector

	mu     sync.Mutex
	models map[string]*ModelMetrics
}

// UpdateBuckets are the buckets of lariat_update_duration_seconds: 1 µs to
// 1 s in a 1-2.5-10 series (a per-record update takes microseconds; a
// retune or a converging idle pass up to milliseconds).
var UpdateBuckets = []float64{1e-6, 2.5e-6, 1e-5, 2.5e-5, 1e-4, 2.5e-4, 1e-3, 2.5e-3, 1e-2, 2.5e-2, 0.1, 0.25, 1}

// NewMetrics creates the metrics and registers them with reg.
func NewMetrics(reg prometheus.Registerer) (*Metrics, error) {
	model := []string{"model"}
	counter := func(name, help string, labels ...string) *prometheus.CounterVec {
		return prometheus.NewCounterVec(prometheus.CounterOpts{Name: name, Help: help}, labels)
	}
	gauge := func(name, help string) *prometheus.GaugeVec {
		return prometheus.NewGaugeVec(prometheus.GaugeOpts{Name: name, Help: help}, model)
	}
	m := &Metrics{
		accepted: counter("lariat_records_accepted_total", "Records accepted for training or holdout.", "model"),
		rejected: counter("lariat_records_rejected_total", "Records rejected, by reason.", "model", "reason"),
		update: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name: "lariat_update_duration_seconds", Help: "Time to apply one record to a model's ladder.", Buckets: UpdateBuckets,
		}, model),
		dropped:     counter("lariat_queue_dropped_total", "Records dropped because the model's queue was full.", "model"),
		lambda:      gauge("lariat_lambda", "Penalty strength λ of the published model."),
		lambdaIndex: gauge("lariat_lambda_index", "Ladder index of the published model's λ (0 = largest)."),
		kkt:         gauge("lariat_model_kkt", "KKT residual of the published model on its train window, standardized scale (NaN if not measured)."),
		nonzero:     gauge("lariat_nonzero_coefficients", "Nonzero coefficients of the published model."),
		holdoutLoss: gauge("lariat_holdout_loss", "Mean held-out loss of the published model."),
		version:     gauge("lariat_model_version", "Version number of the published model."),
		reconnects: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "lariat_nats_reconnects_total", Help: "Reconnections to the NATS server.",
		}),
		slowDrops:   counter("lariat_nats_slow_consumer_drops_total", "Messages the NATS client dropped as a slow consumer.", "model"),
		skipped:     counter("lariat_intake_skipped_total", "Records of a model's stream that retention discarded before the model applied them.", "model"),
		namesOver:   counter("lariat_features_dropped_total", "Channel values dropped because their new name found the feature cap reached and no slot free (the record trained on its known channels).", "model"),
		slotsFreed:  counter("lariat_feature_slots_freed_total", "Feature slots given back by names no record carried for a whole window.", "model"),
		unpublished: counter("lariat_model_publish_failures_total", "Times a model's new version could not be built or stored (the previous version stays served; /readyz says why).", "model"),
		unreposted:  counter("lariat_rejects_not_republished_total", "Rejected records not republished on the reject subject (the model's republish rate was exceeded, or the publisher was not up); each is still counted in lariat_records_rejected_total.", "model"),
		checkpoints: counter("lariat_checkpoints_total", "Checkpoints of a model's state, by result (saved, failed, restored, refused).", "model", "result"),
		alerts:      counter("lariat_alerts_total", "Alerts raised, by kind.", "model", "kind"),
		publishErrs: counter("lariat_publish_errors_total", "Failed publishes, by kind (model, kv, alert, reject).", "kind"),
		depth: &depthCollector{
			desc:  prometheus.NewDesc("lariat_queue_depth", "Records waiting in the model's queue.", model, nil),
			funcs: make(map[string]func() int),
		},
		models: make(map[string]*ModelMetrics),
	}
	for _, c := range []prometheus.Collector{
		m.accepted, m.rejected, m.update, m.dropped, m.lambda, m.lambdaIndex, m.kkt, m.nonzero,
		m.holdoutLoss, m.version, m.reconnects, m.slowDrops, m.skipped, m.namesOver, m.slotsFreed, m.checkpoints, m.unpublished, m.unreposted, m.alerts, m.publishErrs, m.depth,
	} {
		if err := reg.Register(c); err != nil {
			return nil, err
		}
	}
	for _, k := range []string{PublishKindModel, PublishKindKV, PublishKindAlert, PublishKindReject} {
		m.publishErrs.WithLabelValues(k)
	}
	return m, nil
}

// Reconnected counts one reconnection to NATS (call it from the
// connection's reconnect handler).
func (m *Metrics) Reconnected() { m.reconnects.Inc() }

// PublishError counts one failed publish of the given kind (PublishKind*).
func (m *Metrics) PublishError(kind string) { m.publishErrs.WithLabelValues(kind).Inc() }

// ModelMetrics holds one model's metric children. The exported fields may be
// used directly on the hot path; none of them looks up a label.
type ModelMetrics struct {
	// Accepted counts records accepted (lariat_records_accepted_total).
	Accepted prometheus.Counter
	// UpdateSeconds observes the time to apply one record
	// (lariat_update_duration_seconds).
	UpdateSeconds prometheus.Observer
	// QueueDropped counts records dropped at a full queue
	// (lariat_queue_dropped_total).
	QueueDropped prometheus.Counter
	// SlowConsumerDrops counts messages the NATS client dropped
	// (lariat_nats_slow_consumer_drops_total).
	SlowConsumerDrops prometheus.Counter
	// Skipped counts records of the model's stream that retention discarded
	// before the model applied them (lariat_intake_skipped_total).
	Skipped prometheus.Counter
	// FeaturesDropped counts channel values dropped past the feature cap
	// (lariat_features_dropped_total).
	FeaturesDropped prometheus.Counter
	// SlotsFreed counts feature slots given back by names unseen for a
	// whole window (lariat_feature_slots_freed_total).
	SlotsFreed prometheus.Counter
	// PublishFailed counts new versions that could not be built or stored
	// (lariat_model_publish_failures_total).
	PublishFailed prometheus.Counter
	// NotRepublished counts rejected records that were counted but not
	// republished on the reject subject
	// (lariat_rejects_not_republished_total).
	NotRepublished prometheus.Counter

	name        string
	parent      *Metrics
	rejected    sync.Map // reason → prometheus.Counter
	alerts      [len(alertKinds)]prometheus.Counter
	lambda      prometheus.Gauge
	lambdaIndex prometheus.Gauge
	kkt         prometheus.Gauge
	nonzero     prometheus.Gauge
	holdoutLoss prometheus.Gauge
	version     prometheus.Gauge
}

// Checkpoint results, the label values of lariat_checkpoints_total.
const (
	CheckpointSaved    = "saved"    // a checkpoint was written
	CheckpointFailed   = "failed"   // writing a checkpoint failed
	CheckpointRestored = "restored" // the model started from a checkpoint
	CheckpointRefused  = "refused"  // a checkpoint was corrupt, truncated or foreign and was passed over
)

// Checkpoint counts one checkpoint event of the model with result (one of
// the Checkpoint* constants).
func (mm *ModelMetrics) Checkpoint(result string) {
	mm.parent.checkpoints.WithLabelValues(mm.name, result).Inc()
}

// Model returns the metrics of model name, creating its children (at zero)
// on the first call; later calls return the same value.
func (m *Metrics) Model(name string) *ModelMetrics {
	m.mu.Lock()
	defer m.mu.Unlock()
	if mm := m.models[name]; mm != nil {
		return mm
	}
	mm := &ModelMetrics{
		Accepted:          m.accepted.WithLabelValues(name),
		UpdateSeconds:     m.update.WithLabelValues(name),
		QueueDropped:      m.dropped.WithLabelValues(name),
		SlowConsumerDrops: m.slowDrops.WithLabelValues(name),
		Skipped:           m.skipped.WithLabelValues(name),
		FeaturesDropped:   m.namesOver.WithLabelValues(name),
		SlotsFreed:        m.slotsFreed.WithLabelValues(name),
		PublishFailed:     m.unpublished.WithLabelValues(name),
		NotRepublished:    m.unreposted.WithLabelValues(name),
		name:              name,
		parent:            m,
		lambda:            m.lambda.WithLabelValues(name),
		lambdaIndex:       m.lambdaIndex.WithLabelValues(name),
		kkt:               m.kkt.WithLabelValues(name),
		nonzero:           m.nonzero.WithLabelValues(name),
		holdoutLoss:       m.holdoutLoss.WithLabelValues(name),
		version:           m.version.WithLabelValues(name),
	}
	for i, k := range alertKinds {
		mm.alerts[i] = m.alerts.WithLabelValues(name, string(k))
	}
	m.models[name] = mm
	return mm
}

// Rejected counts one rejected record with the given reason (a short
// label-safe token such as "malformed"). After the first record of a reason
// it allocates nothing.
func (mm *ModelMetrics) Rejected(reason string) {
	if c, ok := mm.rejected.Load(reason); ok {
		c.(prometheus.Counter).Inc()
		return
	}
	c, _ := mm.rejected.LoadOrStore(reason, mm.parent.rejected.WithLabelValues(mm.name, reason))
	c.(prometheus.Counter).Inc()
}

// Alert counts one alert of the given kind; unknown kinds are ignored
// (Alert.Validate rejects them before publishing).
func (mm *ModelMetrics) Alert(kind AlertKind) {
	if i := kindIndex(kind); i >= 0 {
		mm.alerts[i].Inc()
	}
}

// Published sets the gauges of a newly published model version: λ, its
// ladder index, its KKT residual (NaN if not measured), the number of
// nonzero coefficients, the held-out loss (NaN
// if undefined) and the version.
func (mm *ModelMetrics) Published(doc *ModelDoc) {
	mm.lambda.Set(doc.Penalty.Lambda)
	mm.lambdaIndex.Set(float64(doc.LambdaIndex))
	mm.kkt.Set(math.NaN())
	if doc.KKT != nil {
		mm.kkt.Set(*doc.KKT)
	}
	mm.nonzero.Set(float64(doc.Nonzero()))
	mm.holdoutLoss.Set(float64(doc.Holdout.Loss))
	mm.version.Set(float64(doc.Version))
}

// QueueDepthFunc makes lariat_queue_depth{model} read f at scrape time
// (for example func() int { return len(queue) }); nil removes it. f must be
// safe to call from any goroutine and cheap.
func (mm *ModelMetrics) QueueDepthFunc(f func() int) {
	d := mm.parent.depth
	d.mu.Lock()
	defer d.mu.Unlock()
	if f == nil {
		delete(d.funcs, mm.name)
		return
	}
	d.funcs[mm.name] = f
}

// depthCollector reports each model's queue depth from a function read at
// scrape time.
type depthCollector struct {
	desc  *prometheus.Desc
	mu    sync.Mutex
	funcs map[string]func() int
}

var _ prometheus.Collector = (*depthCollector)(nil)

// Describe sends the one descriptor.
func (d *depthCollector) Describe(ch chan<- *prometheus.Desc) { ch <- d.desc }

// Collect reads every registered depth function.
func (d *depthCollector) Collect(ch chan<- prometheus.Metric) {
	d.mu.Lock()
	defer d.mu.Unlock()
	for name, f := range d.funcs {
		ch <- prometheus.MustNewConstMetric(d.desc, prometheus.GaugeValue, float64(f()), name)
	}
}
