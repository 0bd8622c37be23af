package deploy_test

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"lariat/config"
	"lariat/sink/natstest"
)

// TestDeployRun follows the README of this directory on loopback: the
// cluster from the server files, the model bucket created beforehand with
// three replicas, lariat-1.yaml with only its addresses, secrets' paths and
// data_dir changed, "lariat check", then "lariat run" as a process. The
// sensors publish 600 records for 12 pumps; lariat applies each once, and
// after SIGTERM it exits 0 with every pump's checkpoint in the bucket,
// which has three replicas, and the model bucket still has three.
func TestDeployRun(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the lariat binary and runs it against a three-node cluster")
	}
	c, fileOpts := startCluster(t)
	lc, err := config.Load(lariatFiles(t)[0])
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	lariat, sensors := user(fileOpts[0], "lariat"), user(fileOpts[0], "sensors")
	ljs := connect(t, c.ConnectURL(), lariat.Username, lariat.Password, nil)
	if _, err := ljs.CreateKeyValue(ctx, jetstream.KeyValueConfig{
		Bucket: "lariat_models", History: 1, Replicas: nodes, Storage: jetstream.FileStorage,
	}); err != nil {
		t.Fatal(err)
	}

	bin := buildLariat(t)
	dir := t.TempDir()
	cfg := rewrite(t, lariatFiles(t)[0], filepath.Join(dir, "lariat.yaml"), map[string]string{
		"url:":              fmt.Sprintf("url: %q", c.ConnectURL()),
		"password_file:":    "password_file: " + writeFile(t, dir, "nats.password", lariat.Password+"\n"),
		"admin_token_file:": "admin_token_file: " + writeFile(t, dir, "admin.token", "test-admin-token\n"),
		"listen:":           "listen: 127.0.0.1:0",
		"data_dir:":         "data_dir: " + filepath.Join(dir, "data"),
	})
	if out, err := exec.Command(bin, "check", "-c", cfg).CombinedOutput(); err != nil {
		t.Fatalf("lariat check: %v\n%s", err, out)
	}
	logf, err := os.Create(filepath.Join(dir, "lariat.log"))
	if err != nil {
		t.Fatal(err)
	}
	defer logf.Close()
	cmd := exec.Command(bin, "run", "-c", cfg)
	cmd.Stdout, cmd.Stderr = logf, logf
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	exited := make(chan error, 1)
	go func() { exited <- cmd.Wait() }()
	running := true
	defer func() {
		if running {
			cmd.Process.Kill()
			<-exited
		}
		if t.Failed() {
			log, _ := os.ReadFile(logf.Name())
			t.Logf("lariat's log:\n%s", log)
		}
	}()
	var base string
	natstest.WaitFor(t, time.Minute, func() error {
		addr, err := httpAddr(logf.Name())
		base = "http://" + addr
		return err
	})
	natstest.WaitFor(t, time.Minute, func() error { return get(base + "/readyz") })

	const pumps, n = 12, 600
	snc, err := nats.Connect(c.URL(1), nats.UserInfo(sensors.Username, sensors.Password))
	if err != nil {
		t.Fatal(err)
	}
	defer snc.Close()
	res, err := natstest.PublishAll(ctx, snc, n, pumpRecord(pumps), nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.Records != n {
		t.Fatalf("%d of %d records acknowledged", res.Records, n)
	}
	natstest.WaitFor(t, time.Minute, func() error {
		got, err := accepted(base+"/metrics", lc.Models[0].Name+".")
		if err == nil && got != n {
			err = fmt.Errorf("%d of %d records accepted", got, n)
		}
		return err
	})

	cmd.Process.Signal(syscall.SIGTERM)
	select {
	case err := <-exited:
		running = false
		if err != nil {
			t.Fatalf("lariat exited after SIGTERM: %v", err)
		}
	case <-time.After(2 * time.Minute):
		t.Fatal("lariat did not exit within 2 minutes of SIGTERM")
	}

	obs, err := ljs.ObjectStore(ctx, lc.Checkpoint.Bucket)
	if err != nil {
		t.Fatal(err)
	}
	st, err := obs.Status(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if st.Replicas() != nodes {
		t.Errorf("checkpoint bucket has %d replicas, want %d", st.Replicas(), nodes)
	}
	for p := range pumps {
		name := fmt.Sprintf("%s.p%02d", lc.Models[0].Name, p)
		if _, errA := obs.GetInfo(ctx, name+".a"); errA != nil {
			if _, errB := obs.GetInfo(ctx, name+".b"); errB != nil {
				t.Errorf("no checkpoint of %s in the bucket: %v; %v", name, errA, errB)
			}
		}
	}
	// A key-value bucket is the stream KV_<bucket>.
	kvs, err := ljs.Stream(ctx, "KV_lariat_models")
	if err != nil {
		t.Fatal(err)
	}
	if r := kvs.CachedInfo().Config.Replicas; r != nodes {
		t.Errorf("model bucket has %d replicas after lariat ran, want %d", r, nodes)
	}
}

// pumpRecord returns record i of a logistic stream over pumps pumps: the
// pump's subject, three readings and a trip label that rises with the
// vibration.
func pumpRecord(pumps int) func(i int) (string, []byte) {
	return func(i int) (string, []byte) {
		vib := float64(i%17) / 4
		y := 0
		if vib > 3 {
			y = 1
		}
		return fmt.Sprintf("plant.p%02d.trip", i%pumps),
			fmt.Appendf(nil, `{"x":{"vibration_mm_s":%g,"flow_m3h":%d,"suction_kpa":%d},"y":%d}`, vib, 40+i%7, 180+i%11, y)
	}
}

// rewrite copies the lariat file src to dst with each line whose trimmed
// text starts with a key of repl replaced (indentation kept) by its value;
// each key must match exactly one line.
func rewrite(t *testing.T, src, dst string, repl map[string]string) string {
	t.Helper()
	data, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(data), "\n")
	hits := map[string]int{}
	for i, line := range lines {
		trimmed := strings.TrimLeft(line, " ")
		for k, v := range repl {
			if strings.HasPrefix(trimmed, k) {
				lines[i] = line[:len(line)-len(trimmed)] + v
				hits[k]++
			}
		}
	}
	for k := range repl {
		if hits[k] != 1 {
			t.Fatalf("%s: %d lines start with %q, want 1", src, hits[k], k)
		}
	}
	if err := os.WriteFile(dst, []byte(strings.Join(lines, "\n")), 0o600); err != nil {
		t.Fatal(err)
	}
	return dst
}

// buildLariat builds the lariat command into a temporary directory.
func buildLariat(t *testing.T) string {
	t.Helper()
	goBin, err := exec.LookPath("go")
	if err != nil {
		t.Skipf("go not found: %v", err)
	}
	bin := filepath.Join(t.TempDir(), "lariat")
	if out, err := exec.Command(goBin, "build", "-o", bin, "lariat/daemon/cmd/lariat").CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	return bin
}

// httpAddr finds the HTTP address lariat logged when it started (the
// "lariat running" line of its JSON log).
func httpAddr(logFile string) (string, error) {
	data, err := os.ReadFile(logFile)
	if err != nil {
		return "", err
	}
	for line := range strings.Lines(string(data)) {
		var l struct{ Msg, HTTP string }
		if json.Unmarshal([]byte(line), &l) == nil && l.Msg == "lariat running" && l.HTTP != "" {
			return l.HTTP, nil
		}
	}
	return "", errors.New(`no "lariat running" line with the HTTP address in the log yet`)
}

// get returns nil if url answers 200.
func get(url string) error {
	r, err := http.Get(url)
	if err != nil {
		return err
	}
	defer r.Body.Close()
	if r.StatusCode != http.StatusOK {
		return fmt.Errorf("%s: %s", url, r.Status)
	}
	return nil
}

// accepted sums lariat_records_accepted_total over the models whose name
// starts with prefix, from the Prometheus text at url.
func accepted(url, prefix string) (int, error) {
	r, err := http.Get(url)
	if err != nil {
		return 0, err
	}
	defer r.Body.Close()
	sum := 0
	sc := bufio.NewScanner(r.Body)
	head := `lariat_records_accepted_total{model="` + prefix
	for sc.Scan() {
		line := sc.Text()
		if !strings.HasPrefix(line, head) {
			continue
		}
		v, err := strconv.ParseFloat(line[strings.LastIndexByte(line, ' ')+1:], 64)
		if err != nil {
			return 0, fmt.Errorf("%q: %w", line, err)
		}
		sum += int(v)
	}
	return sum, sc.Err()
}
