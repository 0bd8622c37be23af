package main

import (
	"bytes"
	"context"
	"fmt"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func freePort(t *testing.T) int {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	return ln.Addr().(*net.TCPAddr).Port
}

// TestRun runs `lariat run -c FILE` in-process on the example configuration
// with the listen addresses and data directory moved to free ports and a
// temp dir, waits for /readyz, cancels (as SIGINT would) and expects a
// clean exit.
func TestRun(t *testing.T) {
	example, err := os.ReadFile("../../../config/example.yaml")
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	httpAddr := fmt.Sprintf("127.0.0.1:%d", freePort(t))
	cfg := strings.NewReplacer(
		"listen: 127.0.0.1:4222", "listen: 127.0.0.1:-1",
		"listen: 127.0.0.1:8080", "listen: "+httpAddr,
		"data_dir: ./lariat-data", "data_dir: "+filepath.Join(dir, "data"),
	).Replace(string(example))
	file := filepath.Join(dir, "lariat.yaml")
	os.WriteFile(file, []byte(cfg), 0o600)

	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var out, errb bytes.Buffer
	root := newRootCmd()
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs([]string{"run", "-c", file, "--log-format", "json", "--log-level", "debug"})
	done := make(chan error, 1)
	go func() { done <- root.ExecuteContext(ctx) }()
	deadline := time.Now().Add(10 * time.Second)
	for {
		resp, err := http.Get("http://" + httpAddr + "/readyz")
		if err == nil {
			resp.Body.Close()
			if resp.StatusCode == http.StatusOK {
				break
			}
		}
		if time.Now().After(deadline) {
			t.Fatalf("not ready: %v\n%s", err, errb.String())
		}
		time.Sleep(20 * time.Millisecond)
	}
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("run: %v\n%s", err, errb.String())
		}
	case <-time.After(15 * time.Second):
		t.Fatal("run did not stop")
	}
	logs := errb.String()
	for _, want := range []string{`"msg":"lariat running"`, `"level":"DEBUG"`, `"msg":"stopped"`} {
		if !strings.Contains(logs, want) {
			t.Errorf("logs lack %s:\n%s", want, logs)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "data", "jetstream")); err != nil {
		t.Errorf("no JetStream store under the data dir: %v", err)
	}
}

func TestRunBadConfig(t *testing.T) {
	bad := filepath.Join(t.TempDir(), "bad.yaml")
	os.WriteFile(bad, []byte("models: []\n"), 0o600)
	_, errOut, err := run(t, "run", "-c", bad)
	if err == nil || !strings.Contains(errOut, "bad.yaml") {
		t.Fatalf("err %v, stderr %q", err, errOut)
	}
}
