package sink

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
)

// nextMsg waits for one message on sub.
func nextMsg(t *testing.T, sub *nats.Subscription) *nats.Msg {
	t.Helper()
	m, err := sub.NextMsg(5 * time.Second)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func TestPublisher(t *testing.T) {
	s := runServerJS(t, true)
	nc := connect(t, s)
	reader := connect(t, s)
	sub, err := reader.SubscribeSync("plant.>")
	if err != nil {
		t.Fatal(err)
	}
	if err := reader.Flush(); err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	p, err := NewPublisher(ctx, nc, &PublisherOptions{Prefix: "plant"})
	if err != nil {
		t.Fatal(err)
	}

	t.Run("model", func(t *testing.T) {
		for v := uint64(1); v <= 3; v++ {
			if err := p.PublishModel(ctx, testDoc(t, "pump-7", "logistic", v)); err != nil {
				t.Fatal(err)
			}
		}
		for v := uint64(1); v <= 3; v++ {
			m := nextMsg(t, sub)
			var doc ModelDoc
			if err := json.Unmarshal(m.Data, &doc); err != nil {
				t.Fatal(err)
			}
			if m.Subject != "plant.model.pump-7" || doc.Version != v || doc.Model != "pump-7" {
				t.Errorf("got %s version %d", m.Subject, doc.Version)
			}
		}
		// The bucket holds the latest version only (history 1).
		entry, err := p.KV().Get(ctx, "pump-7")
		if err != nil {
			t.Fatal(err)
		}
		var doc ModelDoc
		if err := json.Unmarshal(entry.Value(), &doc); err != nil || doc.Version != 3 {
			t.Errorf("kv holds version %d (%v), want 3", doc.Version, err)
		}
	})

	t.Run("alert", func(t *testing.T) {
		prob := 0.93
		a := &Alert{Model: "pump-7", Kind: KindPrediction, Severity: SeverityWarning, Statistic: prob, Threshold: 0.8,
			Windows: AlertWindows{Train: 1000, Holdout: 200, Detector: 1}, Features: []string{"a"},
			Time: time.Date(2026, 3, 4, 5, 6, 7, 89e6, time.UTC), Seq: 42, Message: "p = 0.93 ≥ 0.8",
			Probability: &prob, Contributions: map[string]float64{"a": 1.5}}
		if err := p.PublishAlert(a); err != nil {
			t.Fatal(err)
		}
		m := nextMsg(t, sub)
		var back Alert
		if err := json.Unmarshal(m.Data, &back); err != nil {
			t.Fatal(err)
		}
		if m.Subject != "plant.alert.pump-7" || back.Seq != 42 || *back.Probability != prob || !back.Time.Equal(a.Time) {
			t.Errorf("got %s %+v", m.Subject, back)
		}
		if !strings.Contains(string(m.Data), `"time":"2026-03-04T05:06:07.089Z"`) {
			t.Errorf("alert time not RFC 3339: %s", m.Data)
		}
	})

	t.Run("reject", func(t *testing.T) {
		orig := []byte(`{"y": "yes", "x": {"a": 1}}`)
		r := &Reject{Model: "pump-7", Subject: "plant.pump7.records", Reason: "label", Detail: "y must be 0/1\nnot \"yes\"", Data: orig}
		if err := p.PublishReject(r); err != nil {
			t.Fatal(err)
		}
		m := nextMsg(t, sub)
		if m.Subject != "plant.reject.pump-7" || !bytes.Equal(m.Data, orig) {
			t.Errorf("got %s %q", m.Subject, m.Data)
		}
		for k, want := range map[string]string{
			HeaderModel: "pump-7", HeaderReason: "label", HeaderSubject: "plant.pump7.records",
			HeaderDetail: `y must be 0/1 not "yes"`, HeaderTruncated: "",
		} {
			if got := m.Header.Get(k); got != want {
				t.Errorf("header %s = %q, want %q", k, got, want)
			}
		}
	})

	t.Run("reject truncated", func(t *testing.T) {
		orig := bytes.Repeat([]byte("x"), int(nc.MaxPayload())-10)
		if err := p.PublishReject(&Reject{Model: "pump-7", Reason: "oversize", Data: orig}); err != nil {
			t.Fatal(err)
		}
		m := nextMsg(t, sub)
		if n, _ := strconv.Atoi(m.Header.Get(HeaderTruncated)); n != len(orig) || len(m.Data) != DefaultMaxRejectBytes {
			t.Errorf("truncated header %q, body %d bytes of %d, want %d", m.Header.Get(HeaderTruncated), len(m.Data), len(orig), DefaultMaxRejectBytes)
		}
	})

	// The body limit of rejects: at the limit whole, one byte over cut.
	small, err := NewPublisher(ctx, nc, &PublisherOptions{Prefix: "plant", NoKV: true, MaxRejectBytes: 100})
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		size       int
		body, orig string // orig: the Lariat-Truncated header
	}{
		{99, strings.Repeat("r", 99), ""},
		{100, strings.Repeat("r", 100), ""},
		{101, strings.Repeat("r", 100), "101"},
		{5000, strings.Repeat("r", 100), "5000"},
	} {
		t.Run(fmt.Sprintf("reject of %d bytes, limit 100", tc.size), func(t *testing.T) {
			if err := small.PublishReject(&Reject{Model: "pump-7", Reason: "malformed", Data: bytes.Repeat([]byte("r"), tc.size)}); err != nil {
				t.Fatal(err)
			}
			m := nextMsg(t, sub)
			if string(m.Data) != tc.body || m.Header.Get(HeaderTruncated) != tc.orig {
				t.Errorf("body of %d bytes, Lariat-Truncated %q; want %d and %q", len(m.Data), m.Header.Get(HeaderTruncated), len(tc.body), tc.orig)
			}
		})
	}

	if n := p.Failures(); n != 0 {
		t.Errorf("Failures = %d after successful publishes", n)
	}
}

func TestPublisherErrors(t *testing.T) {
	s := runServerJS(t, true)
	nc := connect(t, s)
	reg := prometheus.NewPedanticRegistry()
	metrics, err := NewMetrics(reg)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	if _, err := NewPublisher(ctx, nil, nil); !errors.Is(err, ErrNoConn) {
		t.Errorf("nil conn: %v", err)
	}
	p, err := NewPublisher(ctx, nc, &PublisherOptions{Metrics: metrics, Bucket: "models_test"})
	if err != nil {
		t.Fatal(err)
	}
	// A second publisher opens the existing bucket.
	if _, err := NewPublisher(ctx, nc, &PublisherOptions{Bucket: "models_test"}); err != nil {
		t.Fatalf("reopening the bucket: %v", err)
	}
	for _, tc := range []struct {
		name string
		call func() error
		want error
		kind string
	}{
		{"model name with a dot", func() error { return p.PublishModel(ctx, testDoc(t, "a.b", "squared", 1)) }, ErrBadName, PublishKindModel},
		{"alert without kind", func() error { return p.PublishAlert(&Alert{Model: "m", Severity: SeverityInfo}) }, ErrBadAlert, PublishKindAlert},
		{"reject with wildcard", func() error { return p.PublishReject(&Reject{Model: "m.*"}) }, ErrBadName, PublishKindReject},
	} {
		t.Run(tc.name, func(t *testing.T) {
			before := testutil.ToFloat64(metrics.publishErrs.WithLabelValues(tc.kind))
			if err := tc.call(); !errors.Is(err, tc.want) {
				t.Fatalf("err = %v, want %v", err, tc.want)
			}
			if got := testutil.ToFloat64(metrics.publishErrs.WithLabelValues(tc.kind)); got != before+1 {
				t.Errorf("publish errors{kind=%s} = %v, want %v", tc.kind, got, before+1)
			}
		})
	}
	nc.Close()
	if err := p.PublishModel(ctx, testDoc(t, "m", "squared", 1)); !errors.Is(err, nats.ErrConnectionClosed) {
		t.Errorf("closed connection: %v", err)
	}
	if got := p.Failures(); got != 5 { // 3 above, then the model publish and the KV put
		t.Errorf("Failures = %d, want 5", got)
	}
}

func TestPublisherNoKV(t *testing.T) {
	// A server without JetStream: NoKV works, the default fails clearly.
	s := runServerJS(t, false)
	nc := connect(t, s)
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	if _, err := NewPublisher(ctx, nc, nil); err == nil || !strings.Contains(err.Error(), "lariat_models") {
		t.Errorf("without JetStream: err = %v, want a bucket error", err)
	}
	p, err := NewPublisher(ctx, nc, &PublisherOptions{NoKV: true})
	if err != nil {
		t.Fatal(err)
	}
	if p.KV() != nil {
		t.Error("KV with NoKV")
	}
	if got := p.Subject("model", "x"); got != "lariat.model.x" {
		t.Errorf("default subject %q", got)
	}
	if err := p.PublishModel(ctx, testDoc(t, "x", "squared", 1)); err != nil {
		t.Error(err)
	}
}
