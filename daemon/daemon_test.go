package daemon

import (
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/sink"
	"lariat/sink/natstest"
)

// TestEndToEnd publishes 20k records with a known sparse truth through a
// plain NATS client and checks that the model served over HTTP and the one
// published on <prefix>.model.<name> both recover the support and signs.
func TestEndToEnd(t *testing.T) {
	if testing.Short() {
		t.Skip("end to end: 20k records per model")
	}
	const n = 20000
	tr := sparseTruth(20)
	for _, tc := range []struct {
		name string
		loss string
	}{
		{"e2e-linear", config.LossSquared},
		{"e2e-logistic", config.LossLogistic},
	} {
		t.Run(tc.loss, func(t *testing.T) {
			m := testModel(tc.name, "test."+tc.name, tc.loss)
			m.Queue = n // the whole burst fits: this test is about recovery, not back-pressure
			td := startDaemon(t, testConfig(t, m))
			nc := connect(t, td.NATSURL())

			var mu sync.Mutex
			var busDoc *sink.ModelDoc
			sub, err := nc.Subscribe("lariat.model."+tc.name, func(msg *nats.Msg) {
				var doc sink.ModelDoc
				if err := json.Unmarshal(msg.Data, &doc); err != nil {
					t.Errorf("bus model: %v", err)
					return
				}
				mu.Lock()
				if busDoc == nil || doc.Version > busDoc.Version {
					busDoc = &doc
				}
				mu.Unlock()
			})
			if err != nil {
				t.Fatal(err)
			}
			defer sub.Unsubscribe()
			natstest.WaitFor(t, 10*time.Second, td.Ready)

			for _, rec := range tr.records(n, tc.loss == config.LossLogistic, 42) {
				if err := nc.Publish(m.Subject, rec); err != nil {
					t.Fatal(err)
				}
			}
			if err := nc.Flush(); err != nil {
				t.Fatal(err)
			}
			labels := map[string]string{"model": tc.name}
			natstest.WaitFor(t, 30*time.Second, func() error {
				if got := metricValue(t, td.Daemon, "lariat_records_accepted_total", labels); got != n {
					return fmt.Errorf("accepted %v of %d", got, n)
				}
				return nil
			})
			var httpDoc *sink.ModelDoc
			natstest.WaitFor(t, 30*time.Second, func() error {
				doc, _, err := getDoc(td.Daemon, tc.name)
				if err != nil {
					return err
				}
				httpDoc = doc
				if doc.Records.Seen != n*4/5 { // every 5th record is held out
					return fmt.Errorf("version %d has seen %d train records, want %d", doc.Version, doc.Records.Seen, n*4/5)
				}
				if doc.Records.Applied != n { // train and held out
					return fmt.Errorf("version %d has applied %d records, want %d", doc.Version, doc.Records.Applied, n)
				}
				return checkSupport(doc, tr)
			})
			natstest.WaitFor(t, 10*time.Second, func() error {
				mu.Lock()
				defer mu.Unlock()
				if busDoc == nil || busDoc.Version < httpDoc.Version {
					return fmt.Errorf("bus has no version >= %d yet", httpDoc.Version)
				}
				return checkSupport(busDoc, tr)
			})
			// The metrics follow the published model.
			if v := metricValue(t, td.Daemon, "lariat_model_version", labels); v < float64(httpDoc.Version) {
				t.Errorf("lariat_model_version %v < %d", v, httpDoc.Version)
			}
			if v := metricValue(t, td.Daemon, "lariat_lambda", labels); !(v > 0) {
				t.Errorf("lariat_lambda %v", v)
			}
			if v := metricValue(t, td.Daemon, "lariat_update_duration_seconds", labels); v != n {
				t.Errorf("update latency observations %v, want %d", v, n)
			}
			t.Logf("%s: version %d, λ index %d, coefficients %v, held-out %+v",
				tc.name, httpDoc.Version, httpDoc.LambdaIndex, httpDoc.Coefficients, httpDoc.Holdout)
		})
	}
}

// TestETag checks the model endpoint's ETag and 304 answer.
func TestETag(t *testing.T) {
	tr := sparseTruth(6)
	m := testModel("etag", "test.etag", config.LossSquared)
	td := startDaemon(t, testConfig(t, m))
	nc := connect(t, td.NATSURL())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	for _, rec := range tr.records(300, false, 1) {
		nc.Publish(m.Subject, rec)
	}
	nc.Flush()
	var etag string
	natstest.WaitFor(t, 10*time.Second, func() error {
		_, h, err := getDoc(td.Daemon, "etag")
		if err != nil {
			return err
		}
		etag = h.Get("ETag")
		return nil
	})
	if etag == "" {
		t.Fatal("no ETag")
	}
	req, _ := http.NewRequest(http.MethodGet, "http://"+td.HTTPAddr()+"/v1/models/etag", nil)
	req.Header.Set("If-None-Match", etag)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	// The heartbeat (1s) may publish a newer version between the two
	// requests; then 200 with a new ETag is right, so retry once.
	if resp.StatusCode == http.StatusOK && resp.Header.Get("ETag") != etag {
		req.Header.Set("If-None-Match", resp.Header.Get("ETag"))
		resp, err = http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
	}
	if resp.StatusCode != http.StatusNotModified {
		t.Errorf("If-None-Match %s: status %d, want 304", etag, resp.StatusCode)
	}
	resp, err = http.Get("http://" + td.HTTPAddr() + "/v1/models/nope")
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusNotFound {
		t.Errorf("unknown model: status %d, want 404", resp.StatusCode)
	}
}

// TestReadiness runs the daemon against an external NATS URL whose server
// starts later: /readyz is 503 before and 200 after it is up, 503 again
// while it restarts, and the reconnect is counted.
func TestReadiness(t *testing.T) {
	port := freePort(t)
	cfg := testConfig(t, testModel("ready", "test.ready", config.LossSquared))
	cfg.NATS.URL = fmt.Sprintf("nats://127.0.0.1:%d", port)
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	td := startDaemon(t, cfg)
	readyz := func() int {
		resp, err := http.Get("http://" + td.HTTPAddr() + "/readyz")
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	if code := readyz(); code != http.StatusServiceUnavailable {
		t.Fatalf("before NATS is up: /readyz %d, want 503", code)
	}
	resp, err := http.Get("http://" + td.HTTPAddr() + "/healthz")
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		t.Errorf("/healthz %d, want 200 while NATS is down", resp.StatusCode)
	}
	store := t.TempDir() // the restarted server keeps its JetStream store, as a real one does
	srv := runServer(t, port, store)
	ready := func() error {
		if code := readyz(); code != http.StatusOK {
			return fmt.Errorf("/readyz %d", code)
		}
		return nil
	}
	natstest.WaitFor(t, 15*time.Second, ready)
	// The server restarts: not ready meanwhile, a counted reconnect after.
	srv.Shutdown()
	srv.WaitForShutdown()
	natstest.WaitFor(t, 5*time.Second, func() error {
		if code := readyz(); code != http.StatusServiceUnavailable {
			return fmt.Errorf("/readyz %d while NATS is down", code)
		}
		return nil
	})
	runServer(t, port, store)
	natstest.WaitFor(t, 15*time.Second, ready)
	if got := metricValue(t, td.Daemon, "lariat_nats_reconnects_total", nil); got < 1 {
		t.Errorf("lariat_nats_reconnects_total %v after a server restart", got)
	}
	// Records flow once connected.
	nc := connect(t, cfg.NATS.URL)
	for _, rec := range sparseTruth(4).records(100, false, 3) {
		nc.Publish("test.ready", rec)
	}
	nc.Flush()
	natstest.WaitFor(t, 10*time.Second, func() error {
		if got := metricValue(t, td.Daemon, "lariat_records_accepted_total", map[string]string{"model": "ready"}); got != 100 {
			return fmt.Errorf("accepted %v of 100", got)
		}
		return nil
	})
}

// TestGracefulShutdown stops the daemon with records in flight, with core
// intake: every record the subscription received is applied (or rejected)
// before Run returns, and the ladder and holdout account for every
// accepted one. (With the durable intake, what is not applied stays in the
// stream for the next start: TestDurableRestart.)
func TestGracefulShutdown(t *testing.T) {
	const n = 8000
	m := testModel("drain", "test.drain", config.LossSquared)
	m.Queue = n
	td := startDaemon(t, testConfigMode(t, config.IntakeCore, m))
	nc := connect(t, td.NATSURL())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	final := make(chan *sink.ModelDoc, 100)
	sub, _ := nc.Subscribe("lariat.model.drain", func(msg *nats.Msg) {
		var doc sink.ModelDoc
		if json.Unmarshal(msg.Data, &doc) == nil {
			final <- &doc
		}
	})
	defer sub.Unsubscribe()
	w := td.byName["drain"]
	// Hold the model goroutine so records pile up in its queue, publish,
	// start the shutdown, and only then let the model go on.
	release := make(chan struct{})
	stalled := make(chan struct{})
	go w.exec(func() { close(stalled); <-release })
	<-stalled
	for _, rec := range sparseTruth(8).records(n, false, 5) {
		nc.Publish(m.Subject, rec)
	}
	if err := nc.Flush(); err != nil { // the server has every record
		t.Fatal(err)
	}
	natstest.WaitFor(t, 10*time.Second, func() error {
		if q := len(w.queue); q < n/2 {
			return fmt.Errorf("%d records queued", q)
		}
		return nil
	})
	start := time.Now()
	go func() { time.Sleep(100 * time.Millisecond); close(release) }()
	if err := td.stop(t); err != nil {
		t.Fatalf("Run: %v", err)
	}
	if took := time.Since(start); took > ShutdownTimeout {
		t.Errorf("shutdown took %s", took)
	}
	if err := td.stop(t); err != nil { // a second stop is harmless
		t.Errorf("second stop: %v", err)
	}
	<-w.done // happens-after every write of the model goroutine
	accepted := metricValue(t, td.Daemon, "lariat_records_accepted_total", map[string]string{"model": "drain"})
	rejected := float64(w.rejected.Load())
	if accepted+rejected != n {
		t.Errorf("accepted %v + rejected %v != published %d", accepted, rejected, n)
	}
	seen := w.pipe.Ladder().Seen()
	_, held := w.pipe.Counts()
	if got := seen + held; float64(got) != accepted {
		t.Errorf("ladder seen %d + held out %d = %d, accepted %v", seen, held, got, accepted)
	}
	// The final document went out before the connection closed.
	var last *sink.ModelDoc
	timeout := time.After(5 * time.Second)
	for last == nil || last.Records.Seen != seen {
		select {
		case last = <-final:
		case <-timeout:
			t.Fatalf("no final model on the bus; last %+v", last)
		}
	}
}

// TestConcurrentModels feeds three models at once (run with -race) while
// an HTTP client reads and predicts: every answer is 200 or 503 (a model
// that has not published yet), and the version a model shows never goes
// down.
func TestConcurrentModels(t *testing.T) {
	const n = 3000
	tr := sparseTruth(10)
	models := []config.Model{
		testModel("conc-a", "test.conc.a", config.LossSquared),
		testModel("conc-b", "test.conc.b", config.LossLogistic),
		testModel("conc-c", "test.conc.*", config.LossSquared), // wildcard, overlaps a and b (core intake only)
	}
	for i := range models {
		models[i].Queue = 2 * n // this test is about concurrency, not back-pressure
	}
	td := startDaemon(t, testConfigMode(t, config.IntakeCore, models...))
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	var wg sync.WaitGroup
	for i, m := range models[:2] {
		nc := connect(t, td.NATSURL())
		wg.Go(func() {
			for _, rec := range tr.records(n, m.Loss == config.LossLogistic, uint64(i)) {
				nc.Publish(m.Subject, rec)
			}
			nc.Flush()
		})
	}
	stopReaders := make(chan struct{})
	readerErr := make(chan error, 1) // the reader's first failure, if any
	wg.Go(func() {
		body := tr.records(1, false, 99)[0]
		base := "http://" + td.HTTPAddr() + "/v1/models/"
		seen := map[string]uint64{} // highest version read per model
		check := func(what string, resp *http.Response) ([]byte, error) {
			defer resp.Body.Close()
			b, _ := io.ReadAll(resp.Body)
			if resp.StatusCode != http.StatusOK && resp.StatusCode != http.StatusServiceUnavailable {
				return nil, fmt.Errorf("%s: %s: %s (want 200 or 503)", what, resp.Status, b)
			}
			if resp.StatusCode != http.StatusOK {
				return nil, nil
			}
			return b, nil
		}
		read := func(name string) error {
			resp, err := http.Get(base + name)
			if err != nil {
				return err
			}
			b, err := check("GET "+name, resp)
			if err != nil || b == nil {
				return err
			}
			var doc sink.ModelDoc
			if err := json.Unmarshal(b, &doc); err != nil {
				return fmt.Errorf("GET %s: %v", name, err)
			}
			if doc.Version < seen[name] {
				return fmt.Errorf("GET %s: version %d after %d", name, doc.Version, seen[name])
			}
			seen[name] = doc.Version
			resp, err = http.Post(base+name+"/predict", "application/json", bytesReader(body))
			if err != nil {
				return err
			}
			_, err = check("POST "+name+"/predict", resp)
			return err
		}
		for {
			select {
			case <-stopReaders:
				return
			default:
			}
			for _, m := range models {
				if err := read(m.Name); err != nil {
					readerErr <- err
					return
				}
			}
			time.Sleep(5 * time.Millisecond)
		}
	})
	want := map[string]float64{"conc-a": n, "conc-b": n, "conc-c": 2 * n}
	natstest.WaitFor(t, 60*time.Second, func() error {
		for name, v := range want {
			if got := metricValue(t, td.Daemon, "lariat_records_accepted_total", map[string]string{"model": name}); got != v {
				return fmt.Errorf("%s accepted %v of %v", name, got, v)
			}
		}
		return nil
	})
	close(stopReaders)
	wg.Wait()
	select {
	case err := <-readerErr:
		t.Error(err)
	default:
	}
}
