package daemon

import (
	"fmt"
	"io"
	"net/http"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/sink"
	"lariat/sink/natstest"
)

// TestRejects sends one bad record per reason and checks that each is
// counted under its reason, republished on lariat.reject.<model> with the
// reason and the original bytes, and leaves the ladder bit for bit as it was.
func TestRejects(t *testing.T) {
	lin := testModel("rej-lin", "test.rej.lin", config.LossSquared)
	lin.Features = []string{"a", "b", "c"}
	lin.MaxFeatures = 3
	logit := testModel("rej-log", "test.rej.log", config.LossLogistic)
	strict := testModel("rej-strict", "test.rej.strict", config.LossSquared)
	strict.Features = []string{"a", "b"}
	strict.Missing = config.MissingReject
	strict.MaxFeatures = 2
	td := startDaemon(t, testConfig(t, lin, logit, strict), withoutIdle())
	nc := connect(t, td.NATSURL())
	rejects := make(chan *nats.Msg, 64)
	if _, err := nc.ChanSubscribe("lariat.reject.>", rejects); err != nil {
		t.Fatal(err)
	}
	nc.Flush()
	natstest.WaitFor(t, 10*time.Second, td.Ready)

	// Warm every model up with valid records, so there is state to protect.
	for _, m := range []config.Model{lin, logit, strict} {
		for i := range 60 {
			rec := fmt.Sprintf(`{"y":%d,"x":{"a":%d,"b":%d}}`, i%2, i%7, i%5)
			if err := nc.Publish(m.Subject, []byte(rec)); err != nil {
				t.Fatal(err)
			}
		}
	}
	nc.Flush()
	for _, m := range []string{"rej-lin", "rej-log", "rej-strict"} {
		natstest.WaitFor(t, 10*time.Second, func() error {
			if got := metricValue(t, td.Daemon, "lariat_records_accepted_total", map[string]string{"model": m}); got != 60 {
				return fmt.Errorf("%s accepted %v", m, got)
			}
			return nil
		})
	}

	big := `{"y":1,"x":{"a":1},"key":"` + strings.Repeat("k", record.DefaultMaxBytes) + `"}`
	cases := []struct {
		name, model, subject, body, reason string
	}{
		{"malformed json", "rej-lin", lin.Subject, `{"y":1,"x":{"a":1}`, record.ReasonMalformed},
		{"not an object", "rej-lin", lin.Subject, `[1,2,3]`, record.ReasonMalformed},
		{"wrong type", "rej-lin", lin.Subject, `{"y":1,"x":{"a":"high"}}`, record.ReasonType},
		{"overflow to Inf", "rej-lin", lin.Subject, `{"y":1,"x":{"a":1e999}}`, record.ReasonNotFinite},
		{"NaN as a string", "rej-lin", lin.Subject, `{"y":"NaN","x":{"a":1}}`, record.ReasonType},
		{"label outside {0,1}", "rej-log", logit.Subject, `{"y":2,"x":{"a":1}}`, record.ReasonLabel},
		{"missing label", "rej-log", logit.Subject, `{"x":{"a":1}}`, record.ReasonLabel},
		// Past the cap a new name is dropped (TestNameFlood), or under the
		// missing policy reject the record is rejected.
		{"too many features, strict", "rej-strict", strict.Subject, `{"y":1,"x":{"a":1,"b":2,"c":3}}`, record.ReasonTooManyFeatures},
		{"oversized message", "rej-lin", lin.Subject, big, record.ReasonOversize},
		{"wrong v length", "rej-lin", lin.Subject, `{"y":1,"v":[1,2]}`, record.ReasonDimension},
		{"negative weight", "rej-lin", lin.Subject, `{"y":1,"x":{"a":1},"w":-1}`, record.ReasonWeight},
		{"zero weight", "rej-lin", lin.Subject, `{"y":1,"x":{"a":1},"w":0}`, record.ReasonWeight},
		{"zero weight, logistic", "rej-log", logit.Subject, `{"y":1,"x":{"a":1},"w":0.0}`, record.ReasonWeight},
		{"bad time", "rej-lin", lin.Subject, `{"y":1,"x":{"a":1},"t":"yesterday"}`, record.ReasonTime},
		{"time an hour ahead", "rej-lin", lin.Subject, `{"y":1,"x":{"a":1},"t":` + strconv.FormatInt(time.Now().Add(time.Hour).UnixMilli(), 10) + `}`, record.ReasonTime},
		{"far-future time", "rej-lin", lin.Subject, `{"y":1,"x":{"a":1},"t":"9999-12-31T23:59:59Z"}`, record.ReasonTime},
		{"empty channel name", "rej-log", logit.Subject, `{"y":1,"x":{"":1}}`, record.ReasonName},
		{"control character in a name", "rej-log", logit.Subject, `{"y":1,"x":{"a\u0001":1}}`, record.ReasonName},
		{"missing channel, strict", "rej-strict", strict.Subject, `{"y":1,"x":{"a":1}}`, record.ReasonMissingFeature},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			w := td.byName[tc.model]
			prev := snapshotLadder(t, w)
			labels := map[string]string{"model": tc.model, "reason": tc.reason}
			n0 := metricValue(t, td.Daemon, "lariat_records_rejected_total", labels)
			if err := nc.Publish(tc.subject, []byte(tc.body)); err != nil {
				t.Fatal(err)
			}
			nc.Flush()
			select {
			case msg := <-rejects:
				if got := msg.Subject; got != "lariat.reject."+tc.model {
					t.Errorf("reject subject %s", got)
				}
				if got := msg.Header.Get(sink.HeaderReason); got != tc.reason {
					t.Errorf("reason header %q, want %q (detail %q)", got, tc.reason, msg.Header.Get(sink.HeaderDetail))
				}
				if got := msg.Header.Get(sink.HeaderSubject); got != tc.subject {
					t.Errorf("subject header %q, want %q", got, tc.subject)
				}
				want := tc.body
				if len(want) > record.DefaultMaxBytes { // cut, with the original length in a header
					want = want[:record.DefaultMaxBytes]
					if got := msg.Header.Get(sink.HeaderTruncated); got != strconv.Itoa(len(tc.body)) {
						t.Errorf("truncated header %q, want %d", got, len(tc.body))
					}
				}
				if string(msg.Data) != want {
					t.Errorf("body changed: %d bytes, want %d", len(msg.Data), len(want))
				}
			case <-time.After(5 * time.Second):
				t.Fatal("no reject message")
			}
			if got := metricValue(t, td.Daemon, "lariat_records_rejected_total", labels); got != n0+1 {
				t.Errorf("rejected{%s} = %v, want %v", tc.reason, got, n0+1)
			}
			if err := sameBits(prev, snapshotLadder(t, w)); err != nil {
				t.Errorf("ladder changed: %v", err)
			}
		})
	}
	for _, m := range []string{"rej-lin", "rej-log", "rej-strict"} {
		if got := metricValue(t, td.Daemon, "lariat_records_accepted_total", map[string]string{"model": m}); got != 60 {
			t.Errorf("%s accepted %v after the bad records, want 60", m, got)
		}
	}
}

// TestRejectQueueFull stalls a model goroutine so its queue fills: the
// overflow is counted as queue_full, republished, and never applied.
func TestRejectQueueFull(t *testing.T) {
	m := testModel("rej-queue", "test.rej.queue", config.LossSquared)
	m.Queue = 4
	td := startDaemon(t, testConfigMode(t, config.IntakeCore, m), withoutIdle()) // a full queue rejects only with core intake
	nc := connect(t, td.NATSURL())
	rejects := make(chan *nats.Msg, 64)
	nc.ChanSubscribe("lariat.reject.rej-queue", rejects)
	nc.Flush()
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	w := td.byName["rej-queue"]
	release := make(chan struct{})
	stalled := make(chan struct{})
	go w.exec(func() { close(stalled); <-release }) // the model goroutine waits
	<-stalled
	const sent = 10
	for i := range sent {
		nc.Publish(m.Subject, fmt.Appendf(nil, `{"y":%d,"x":{"a":%d}}`, i, i))
	}
	nc.Flush()
	labels := map[string]string{"model": "rej-queue", "reason": reasonQueueFull}
	natstest.WaitFor(t, 5*time.Second, func() error {
		if got := metricValue(t, td.Daemon, "lariat_records_rejected_total", labels); got != sent-4 {
			return fmt.Errorf("queue_full rejects %v, want %d", got, sent-4)
		}
		return nil
	})
	close(release)
	natstest.WaitFor(t, 5*time.Second, func() error {
		if got := metricValue(t, td.Daemon, "lariat_records_accepted_total", map[string]string{"model": "rej-queue"}); got != 4 {
			return fmt.Errorf("accepted %v, want 4", got)
		}
		return nil
	})
	if got := metricValue(t, td.Daemon, "lariat_queue_dropped_total", map[string]string{"model": "rej-queue"}); got != sent-4 {
		t.Errorf("queue dropped %v, want %d", got, sent-4)
	}
	msg := <-rejects
	if got := msg.Header.Get(sink.HeaderReason); got != reasonQueueFull {
		t.Errorf("reason %q", got)
	}
}

// TestRejectNoModel routes a record through a subject no model is fed by
// (possible only with a shared durable intake): it is counted and
// republished under the _unrouted name.
func TestRejectNoModel(t *testing.T) {
	td := startDaemon(t, testConfig(t, testModel("rej-none", "test.rej.none", config.LossSquared)))
	nc := connect(t, td.NATSURL())
	rejects := make(chan *nats.Msg, 4)
	nc.ChanSubscribe("lariat.reject."+unrouted, rejects)
	nc.Flush()
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	h := td.handler("orphan.subject", nil)
	h(&nats.Msg{Subject: "orphan.subject", Data: []byte(`{"y":1,"x":{"a":1}}`)})
	select {
	case msg := <-rejects:
		if got := msg.Header.Get(sink.HeaderReason); got != reasonNoModel {
			t.Errorf("reason %q", got)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("no reject message")
	}
	if got := metricValue(t, td.Daemon, "lariat_records_rejected_total", map[string]string{"model": unrouted, "reason": reasonNoModel}); got != 1 {
		t.Errorf("no_model rejects %v, want 1", got)
	}
}

// TestBadNameKeepsPublishing: a record with an empty channel name used to
// be learned, and the model document then refused the name, so the model
// never published again. It is now rejected with reason "name", and the
// model goes on publishing new versions.
func TestBadNameKeepsPublishing(t *testing.T) {
	m := testModel("bad-name", "test.bad.name", config.LossSquared)
	m.Retune.Every = 50
	td := startDaemon(t, testConfig(t, m), withoutIdle())
	nc := connect(t, td.NATSURL())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	recs := sparseTruth(4).records(600, false, 16)
	for _, r := range recs[:300] {
		nc.Publish(m.Subject, r)
	}
	nc.Flush()
	var before uint64
	natstest.WaitFor(t, 20*time.Second, func() error {
		doc, _, err := getDoc(td.Daemon, m.Name)
		if err != nil {
			return err
		}
		before = doc.Version
		return nil
	})
	nc.Publish(m.Subject, []byte(`{"y":1,"x":{"":1,"x00":2}}`))
	for _, r := range recs[300:] {
		nc.Publish(m.Subject, r)
	}
	nc.Flush()
	natstest.WaitFor(t, 20*time.Second, func() error {
		doc, _, err := getDoc(td.Daemon, m.Name)
		if err != nil {
			return err
		}
		if doc.Version <= before || doc.Records.Applied < 600 {
			return fmt.Errorf("version %d (was %d), %d applied", doc.Version, before, doc.Records.Applied)
		}
		for _, f := range doc.Features {
			if f == "" {
				return fmt.Errorf("the empty name was learned: %q", doc.Features)
			}
		}
		return nil
	})
	if got := metricValue(t, td.Daemon, "lariat_records_rejected_total", map[string]string{"model": m.Name, "reason": record.ReasonName}); got != 1 {
		t.Errorf("rejected{name} = %v, want 1", got)
	}
}

// TestPublishFailureIsVisible: when a model cannot publish a new version
// (forced here on the model goroutine with the error the document builder
// gives for a bad feature name, which the decoder no longer lets through),
// the failure is counted, /readyz answers 503 naming the model and the
// reason, the status page shows it, the last version stays served, and it
// all clears when a version goes out again.
func TestPublishFailureIsVisible(t *testing.T) {
	m := testModel("unpublished", "test.unpublished", config.LossSquared)
	m.Retune.Every = 50
	td := startDaemon(t, testConfig(t, m), withoutIdle())
	nc := connect(t, td.NATSURL())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	for _, r := range sparseTruth(4).records(300, false, 17) {
		nc.Publish(m.Subject, r)
	}
	nc.Flush()
	natstest.WaitFor(t, 20*time.Second, func() error { _, _, err := getDoc(td.Daemon, m.Name); return err })
	w := td.byName[m.Name]
	w.exec(func() {
		w.publishFailed(time.Now(), fmt.Errorf("cannot build a new version: %w", sink.ErrFeatureNames))
	})
	err := td.Ready()
	if err == nil || !strings.Contains(err.Error(), "degraded: model unpublished") || !strings.Contains(err.Error(), "feature") {
		t.Errorf("Ready() = %v, want degraded naming the model and the reason", err)
	}
	if c := metricValue(t, td.Daemon, "lariat_model_publish_failures_total", map[string]string{"model": m.Name}); c != 1 {
		t.Errorf("lariat_model_publish_failures_total = %v, want 1", c)
	}
	resp, err2 := http.Get("http://" + td.HTTPAddr() + "/")
	if err2 != nil {
		t.Fatal(err2)
	}
	page, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	if !strings.Contains(string(page), "cannot build a new version") {
		t.Error("the status page does not show the problem")
	}
	if _, _, err := getDoc(td.Daemon, m.Name); err != nil {
		t.Errorf("the last version is no longer served: %v", err)
	}
	w.exec(func() { w.publish(time.Now(), true) })
	natstest.WaitFor(t, 5*time.Second, td.Ready)
	if p := td.store.Problem(m.Name); p != "" {
		t.Errorf("problem %q after a version went out", p)
	}
}
