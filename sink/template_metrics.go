package sink

import (
	"fmt"

	"github.com/prometheus/client_golang/prometheus"
)

// TemplateMetrics are the metrics of model templates (one model per
// instance key): instances known and loaded per template, unloads of idle
// instances, and the size of each instance's saved state.
type TemplateMetrics struct {
	// Known is lariat_template_instances{template} (every key seen).
	Known *prometheus.GaugeVec
	// Loaded is lariat_template_instances_loaded{template} (in memory).
	Loaded *prometheus.GaugeVec
	// Unloads is lariat_template_unloads_total{template} (idle instances
	// checkpointed and unloaded).
	Unloads *prometheus.CounterVec
	// StateBytes is lariat_model_state_bytes{model}: the size of the
	// model's state at its last checkpoint (learner, window, held-out
	// ring, detectors), the bulk of what the model holds in memory.
	StateBytes *prometheus.GaugeVec
	// Partitions is lariat_template_partitions_held{template}: the
	// partitions of a shared template this process holds.
	Partitions *prometheus.GaugeVec
	// Takeovers is lariat_template_partition_takeovers_total{template}:
	// partitions this process took (from a process that handed them over,
	// stopped or died, or at first).
	Takeovers *prometheus.CounterVec
	// Rebalance is lariat_template_rebalance_seconds{template}: from a
	// change of the live processes seen here to every partition held here
	// exactly when the balance assigns it here.
	Rebalance *prometheus.HistogramVec
}

// NewTemplateMetrics registers the template metrics on reg.
func NewTemplateMetrics(reg prometheus.Registerer) (*TemplateMetrics, error) {
	m := &TemplateMetrics{
		Known: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "lariat_template_instances", Help: "Instance keys known to a model template (loaded or not).",
		}, []string{"template"}),
		Loaded: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "lariat_template_instances_loaded", Help: "Instances of a model template held in memory.",
		}, []string{"template"}),
		Unloads: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "lariat_template_unloads_total", Help: "Idle instances checkpointed and unloaded.",
		}, []string{"template"}),
		StateBytes: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "lariat_model_state_bytes", Help: "Size of the model's state at its last checkpoint.",
		}, []string{"model"}),
		Partitions: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "lariat_template_partitions_held", Help: "Partitions of a shared model template this process holds.",
		}, []string{"template"}),
		Takeovers: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "lariat_template_partition_takeovers_total", Help: "Partitions of a shared model template this process took.",
		}, []string{"template"}),
		Rebalance: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    "lariat_template_rebalance_seconds",
			Help:    "Time from a change of the processes sharing a template to its partitions held where the balance puts them.",
			Buckets: []float64{0.25, 0.5, 1, 2, 5, 10, 30, 60, 300},
		}, []string{"template"}),
	}
	for _, c := range []prometheus.Collector{m.Known, m.Loaded, m.Unloads, m.StateBytes, m.Partitions, m.Takeovers, m.Rebalance} {
		if err := reg.Register(c); err != nil {
			return nil, fmt.Errorf("sink: template metrics: %w", err)
		}
	}
	return m, nil
}
