package sink

import (
	"strings"
	"testing"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
)

func TestMetricsExposition(t *testing.T) {
	reg := prometheus.NewPedanticRegistry()
	m, err := NewMetrics(reg)
	if err != nil {
		t.Fatal(err)
	}
	mm := m.Model("pump")
	if m.Model("pump") != mm {
		t.Error("Model returns a new value for a known name")
	}
	mm.Accepted.Add(3)
	mm.Rejected("malformed")
	mm.Rejected("malformed")
	mm.Rejected("label")
	mm.UpdateSeconds.Observe(2e-6)
	mm.UpdateSeconds.Observe(0.5)
	mm.QueueDropped.Inc()
	mm.SlowConsumerDrops.Add(4)
	mm.NotRepublished.Add(2)
	mm.Alert(KindData)
	mm.Alert("nonsense")
	mm.QueueDepthFunc(func() int { return 17 })
	doc := testDoc(t, "pump", "logistic", 12)
	kkt := 2e-7 // the published model's KKT residual goes out as a gauge
	doc.KKT, doc.KKTTolerance = &kkt, 1e-6
	mm.Published(doc)
	m.Reconnected()
	m.PublishError(PublishKindKV)

	// Expected exposition text (Prometheus text format 0.0.4).
	const want = `
# HELP lariat_alerts_total Alerts raised, by kind.
# TYPE lariat_alerts_total counter
lariat_alerts_total{kind="data",model="pump"} 1
lariat_alerts_total{kind="model",model="pump"} 0
lariat_alerts_total{kind="performance",model="pump"} 0
lariat_alerts_total{kind="prediction",model="pump"} 0
# HELP lariat_feature_slots_freed_total Feature slots given back by names no record carried for a whole window.
# TYPE lariat_feature_slots_freed_total counter
lariat_feature_slots_freed_total{model="pump"} 0
# HELP lariat_features_dropped_total Channel values dropped because their new name found the feature cap reached and no slot free (the record trained on its known channels).
# TYPE lariat_features_dropped_total counter
lariat_features_dropped_total{model="pump"} 0
# HELP lariat_holdout_loss Mean held-out loss of the published model.
# TYPE lariat_holdout_loss gauge
lariat_holdout_loss{model="pump"} 0.7
# HELP lariat_intake_skipped_total Records of a model's stream that retention discarded before the model applied them.
# TYPE lariat_intake_skipped_total counter
lariat_intake_skipped_total{model="pump"} 0
# HELP lariat_lambda Penalty strength λ of the published model.
# TYPE lariat_lambda gauge
lariat_lambda{model="pump"} 0.05
# HELP lariat_lambda_index Ladder index of the published model's λ (0 = largest).
# TYPE lariat_lambda_index gauge
lariat_lambda_index{model="pump"} 3
# HELP lariat_model_kkt KKT residual of the published model on its train window, standardized scale (NaN if not measured).
# TYPE lariat_model_kkt gauge
lariat_model_kkt{model="pump"} 2e-07
# HELP lariat_model_publish_failures_total Times a model's new version could not be built or stored (the previous version stays served; /readyz says why).
# TYPE lariat_model_publish_failures_total counter
lariat_model_publish_failures_total{model="pump"} 0
# HELP lariat_model_version Version number of the published model.
# TYPE lariat_model_version gauge
lariat_model_version{model="pump"} 12
# HELP lariat_nats_reconnects_total Reconnections to the NATS server.
# TYPE lariat_nats_reconnects_total counter
lariat_nats_reconnects_total 1
# HELP lariat_nats_slow_consumer_drops_total Messages the NATS client dropped as a slow consumer.
# TYPE lariat_nats_slow_consumer_drops_total counter
lariat_nats_slow_consumer_drops_total{model="pump"} 4
# HELP lariat_nonzero_coefficients Nonzero coefficients of the published model.
# TYPE lariat_nonzero_coefficients gauge
lariat_nonzero_coefficients{model="pump"} 2
# HELP lariat_publish_errors_total Failed publishes, by kind (model, kv, alert, reject).
# TYPE lariat_publish_errors_total counter
lariat_publish_errors_total{kind="alert"} 0
lariat_publish_errors_total{kind="kv"} 1
lariat_publish_errors_total{kind="model"} 0
lariat_publish_errors_total{kind="reject"} 0
# HELP lariat_queue_depth Records waiting in the model's queue.
# TYPE lariat_queue_depth gauge
lariat_queue_depth{model="pump"} 17
# HELP lariat_queue_dropped_total Records dropped because the model's queue was full.
# TYPE lariat_queue_dropped_total counter
lariat_queue_dropped_total{model="pump"} 1
# HELP lariat_records_accepted_total Records accepted for training or holdout.
# TYPE lariat_records_accepted_total counter
lariat_records_accepted_total{model="pump"} 3
# HELP lariat_records_rejected_total Records rejected, by reason.
# TYPE lariat_records_rejected_total counter
lariat_records_rejected_total{model="pump",reason="label"} 1
lariat_records_rejected_total{model="pump",reason="malformed"} 2
# HELP lariat_rejects_not_republished_total Rejected records not republished on the reject subject (the model's republish rate was exceeded, or the publisher was not up); each is still counted in lariat_records_rejected_total.
# TYPE lariat_rejects_not_republished_total counter
lariat_rejects_not_republished_total{model="pump"} 2
# HELP lariat_update_duration_seconds Time to apply one record to a model's ladder.
# TYPE lariat_update_duration_seconds histogram
lariat_update_duration_seconds_bucket{model="pump",le="1e-06"} 0
lariat_update_duration_seconds_bucket{model="pump",le="2.5e-06"} 1
lariat_update_duration_seconds_bucket{model="pump",le="1e-05"} 1
lariat_update_duration_seconds_bucket{model="pump",le="2.5e-05"} 1
lariat_update_duration_seconds_bucket{model="pump",le="0.0001"} 1
lariat_update_duration_seconds_bucket{model="pump",le="0.00025"} 1
lariat_update_duration_seconds_bucket{model="pump",le="0.001"} 1
lariat_update_duration_seconds_bucket{model="pump",le="0.0025"} 1
lariat_update_duration_seconds_bucket{model="pump",le="0.01"} 1
lariat_update_duration_seconds_bucket{model="pump",le="0.025"} 1
lariat_update_duration_seconds_bucket{model="pump",le="0.1"} 1
lariat_update_duration_seconds_bucket{model="pump",le="0.25"} 1
lariat_update_duration_seconds_bucket{model="pump",le="1"} 2
lariat_update_duration_seconds_bucket{model="pump",le="+Inf"} 2
lariat_update_duration_seconds_sum{model="pump"} 0.500002
lariat_update_duration_seconds_count{model="pump"} 2
`
	if err := testutil.GatherAndCompare(reg, strings.NewReader(want)); err != nil {
		t.Error(err)
	}
	if n, err := testutil.GatherAndLint(reg); err != nil || len(n) > 0 {
		t.Errorf("lint: %v %v", n, err)
	}

	// Removing the depth function removes the series.
	mm.QueueDepthFunc(nil)
	if n := testutil.CollectAndCount(m.depth); n != 0 {
		t.Errorf("queue depth series after removal: %d", n)
	}
}

func TestMetricsRegisterTwice(t *testing.T) {
	reg := prometheus.NewPedanticRegistry()
	if _, err := NewMetrics(reg); err != nil {
		t.Fatal(err)
	}
	if _, err := NewMetrics(reg); err == nil {
		t.Error("second registration on the same registry succeeded")
	}
}

// TestMetricsHotPathAllocs checks the per-record calls allocate nothing
// (DEVELOPERS.md: allocations per record are asserted, 0).
func TestMetricsHotPathAllocs(t *testing.T) {
	m, err := NewMetrics(prometheus.NewPedanticRegistry())
	if err != nil {
		t.Fatal(err)
	}
	mm := m.Model("pump")
	mm.Rejected("malformed")
	for name, f := range map[string]func(){
		"accepted": func() { mm.Accepted.Inc() },
		"update":   func() { mm.UpdateSeconds.Observe(3e-6) },
		"rejected": func() { mm.Rejected("malformed") },
		"dropped":  func() { mm.QueueDropped.Inc() },
		"alert":    func() { mm.Alert(KindPerformance) },
	} {
		if n := testing.AllocsPerRun(100, f); n != 0 {
			t.Errorf("%s: %v allocs per call", name, n)
		}
	}
}

func BenchmarkModelMetricsRecord(b *testing.B) {
	m, err := NewMetrics(prometheus.NewRegistry())
	if err != nil {
		b.Fatal(err)
	}
	mm := m.Model("pump")
	b.ReportAllocs()
	for b.Loop() {
		mm.Accepted.Inc()
		mm.UpdateSeconds.Observe(3e-6)
	}
}
