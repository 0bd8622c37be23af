package daemon

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/pipeline"
	"lariat/sink"
	"lariat/sink/natstest"
)

// TestThresholdFile checks the overrides file: missing, written atomically
// and read back, several models, a corrupt file (an error naming the file;
// the next save replaces it) and an invalid entry.
func TestThresholdFile(t *testing.T) {
	dir := t.TempDir()
	got, err := readThresholdOverrides(dir)
	if err != nil || got != nil {
		t.Fatalf("missing file: %v, %v", got, err)
	}
	if err := saveThresholdOverride(dir, "a", thresholdOverride{Mode: "fpr", Target: 0.02}); err != nil {
		t.Fatal(err)
	}
	if err := saveThresholdOverride(dir, "b", thresholdOverride{Mode: "fixed", Target: 0.4}); err != nil {
		t.Fatal(err)
	}
	got, err = readThresholdOverrides(dir)
	if err != nil || len(got) != 2 || got["a"].Target != 0.02 || got["b"].Mode != "fixed" {
		t.Fatalf("read back %v, %v", got, err)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("temporary files left: %v", entries)
	}
	path := filepath.Join(dir, thresholdFile)
	if err := os.WriteFile(path, []byte(`{"models": {"a": `), 0o600); err != nil {
		t.Fatal(err)
	}
	_, err = readThresholdOverrides(dir)
	var syn *json.SyntaxError
	if err == nil || !errors.As(err, &syn) || !strings.Contains(err.Error(), path) {
		t.Errorf("corrupt file: error %v, want a syntax error naming %s", err, path)
	}
	if err := saveThresholdOverride(dir, "c", thresholdOverride{Mode: "precision", Target: 0.9}); err != nil {
		t.Fatalf("save over a corrupt file: %v", err)
	}
	if got, err = readThresholdOverrides(dir); err != nil || len(got) != 1 {
		t.Errorf("after replacing the corrupt file: %v, %v", got, err)
	}
}

// TestThresholdSetter drives Daemon.SetThresholdTarget directly on a
// running daemon: errors for an unknown or linear model and a bad target;
// the change reaches the model goroutine (model JSON) and the file, and a
// daemon restarted on the same data_dir starts from it.
func TestThresholdSetter(t *testing.T) {
	const name = "setter"
	m := testModel(name, "test."+name, config.LossLogistic)
	m.Queue = 4000
	lin := testModel("setter-linear", "test.setter-linear", config.LossSquared)
	cfg := testConfig(t, m, lin)
	names := featureNames(6)
	run := func(seed uint64, check func(td *testDaemon), opts ...Option) {
		td := startDaemon(t, cfg, opts...)
		nc := connect(t, td.NATSURL())
		natstest.WaitFor(t, 10*time.Second, td.Ready)
		for _, r := range logisticRecords(names, 2000, seed) {
			nc.Publish(m.Subject, r)
		}
		nc.Flush()
		check(td)
		if err := td.stop(t); err != nil {
			t.Fatal(err)
		}
	}
	want := func(td *testDaemon, mode string, target float64) {
		natstest.WaitFor(t, 10*time.Second, func() error {
			doc, _, err := getDoc(td.Daemon, name)
			if err != nil {
				return err
			}
			if th := doc.Threshold; th == nil || th.Mode != mode || th.Target != target {
				return fmt.Errorf("threshold %+v, want %s %v", th, mode, target)
			}
			return nil
		})
	}
	run(71, func(td *testDaemon) {
		for _, tc := range []struct {
			model, mode string
			target      float64
			is          error
		}{
			{"nope", "fpr", 0.1, sink.ErrUnknownModel},
			{"setter-linear", "fpr", 0.1, sink.ErrUnknownModel},
			{name, "fpr", 2, pipeline.ErrThreshold},
			{name, "fixed", 0, pipeline.ErrThreshold},
		} {
			if err := td.SetThresholdTarget(tc.model, tc.mode, tc.target); !errors.Is(err, tc.is) {
				t.Errorf("SetThresholdTarget(%s, %s, %v) = %v, want %v", tc.model, tc.mode, tc.target, err, tc.is)
			}
		}
		want(td, "fixed", 0.5)
		if err := td.SetThresholdTarget(name, "precision", 0.7); err != nil {
			t.Fatal(err)
		}
		want(td, "precision", 0.7)
	})
	run(72, func(td *testDaemon) { want(td, "precision", 0.7) })
	// A corrupt file: logged, and the configuration applies.
	if err := os.WriteFile(filepath.Join(cfg.DataDir, thresholdFile), []byte("{not json"), 0o600); err != nil {
		t.Fatal(err)
	}
	var logs syncBuffer
	run(73, func(td *testDaemon) { want(td, "fixed", 0.5) },
		WithLogger(slog.New(slog.NewTextHandler(&logs, nil))))
	if s := logs.String(); !strings.Contains(s, "corrupt") || !strings.Contains(s, thresholdFile) {
		t.Errorf("no clear log line about the corrupt file:\n%s", s)
	}
}

// syncBuffer is a bytes.Buffer safe for concurrent writes (a logger's).
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}
