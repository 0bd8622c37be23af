package daemon

import (
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"sync"
	"time"

	"lariat/config"
	"lariat/daemon/pipeline"
)

// thresholdFile is the file in data_dir that keeps the threshold changes
// made at runtime, by model:
//
//	{"models": {"pump-trip": {"mode": "fpr", "target": 0.02, "updated": "2026-03-04T05:06:07Z"}}}
//
// An entry replaces the model's configured threshold mode and target at
// start. Remove the entry (or the file) to go back to the configuration.
const thresholdFile = "thresholds.json"

// thresholdFileMu serializes the read-modify-write of threshold files and
// the hand-over that follows (one process may run several daemons; the
// lock is coarse because changes are rare).
var thresholdFileMu sync.Mutex

// thresholdOverride is one model's saved threshold change.
type thresholdOverride struct {
	Mode    string    `json:"mode"`
	Target  float64   `json:"target"`
	Updated time.Time `json:"updated"`
}

// thresholdOverrides is the content of the threshold file.
type thresholdOverrides struct {
	Models map[string]thresholdOverride `json:"models"`
}

// readThresholdOverrides reads dir's threshold file. A missing file gives
// no overrides and no error; an unreadable or corrupt file gives no
// overrides and an error that says which file and why.
func readThresholdOverrides(dir string) (map[string]thresholdOverride, error) {
	path := filepath.Join(dir, thresholdFile)
	b, err := os.ReadFile(path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("reading threshold overrides %s: %w", path, err)
	}
	var f thresholdOverrides
	if err := json.Unmarshal(b, &f); err != nil {
		return nil, fmt.Errorf("threshold overrides %s are corrupt: %w", path, err)
	}
	return f.Models, nil
}

// thresholdOverrideFor returns the valid saved override of model m in
// dir, or nil; a problem with the file or the entry is logged and the
// configured threshold is used.
func thresholdOverrideFor(dir string, m *config.Model, log *slog.Logger) *pipeline.Threshold {
	if !m.Logistic() {
		return nil
	}
	all, err := readThresholdOverrides(dir)
	if err != nil {
		log.Error("threshold overrides ignored; using the configured threshold", "err", err)
		return nil
	}
	ov, ok := all[m.Name]
	if !ok {
		return nil
	}
	if err := pipeline.CheckThreshold(ov.Mode, ov.Target); err != nil {
		log.Error("saved threshold override ignored; using the configured threshold",
			"file", filepath.Join(dir, thresholdFile), "err", err)
		return nil
	}
	log.Info("threshold from the saved override", "mode", ov.Mode, "target", ov.Target, "updated", ov.Updated)
	return &pipeline.Threshold{Mode: ov.Mode, Target: ov.Target}
}

// saveThresholdOverride sets model's entry in dir's threshold file. The
// file is replaced atomically: written to a temporary file in dir, synced,
// renamed over the old one, and the directory synced, so a crash leaves
// either the old or the new file. A corrupt old file is replaced (its
// entries are lost; the corruption was logged at start). The caller holds
// thresholdFileMu.
func saveThresholdOverride(dir, model string, ov thresholdOverride) error {
	all, err := readThresholdOverrides(dir)
	if err != nil && !errors.Is(err, fs.ErrNotExist) {
		var syn *json.SyntaxError
		var typ *json.UnmarshalTypeError
		if !errors.As(err, &syn) && !errors.As(err, &typ) {
			return err
		}
	}
	if all == nil {
		all = make(map[string]thresholdOverride)
	}
	all[model] = ov
	b, err := json.MarshalIndent(thresholdOverrides{Models: all}, "", "  ")
	if err != nil {
		return err
	}
	return writeFileAtomic(dir, thresholdFile, append(b, '\n'))
}

// writeFileAtomic replaces dir/name with data: temporary file, fsync,
// rename, fsync of the directory.
func writeFileAtomic(dir, name string, data []byte) (err error) {
	if err := os.MkdirAll(dir, 0o750); err != nil {
		return err
	}
	f, err := os.CreateTemp(dir, "."+name+".*.tmp")
	if err != nil {
		return err
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			os.Remove(tmp)
		}
	}()
	if _, err = f.Write(data); err != nil {
		f.Close()
		return err
	}
	if err = f.Sync(); err != nil {
		f.Close()
		return err
	}
	if err = f.Close(); err != nil {
		return err
	}
	if err = os.Rename(tmp, filepath.Join(dir, name)); err != nil {
		return err
	}
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	return d.Sync()
}
