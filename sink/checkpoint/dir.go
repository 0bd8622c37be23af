package checkpoint

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
)

// Store keeps the checkpoints of models by name.
type Store interface {
	// Save stores a framed checkpoint (Encode's output) as the newest of
	// model; the one it replaces stays as the fallback.
	Save(model string, frame []byte) error
	// Load returns the payload and header of model's newest good
	// checkpoint. Bad checkpoints it passed over on the way are returned in
	// skipped, each error naming the checkpoint and why it was refused. err
	// wraps ErrNotFound when the model has no checkpoint at all, and is
	// another error when none of them is good.
	Load(model string) (payload []byte, m Meta, skipped []error, err error)
}

// Dir is a Store in a local directory: model NAME has NAME.ckpt (the
// newest) and NAME.prev.ckpt (the one before). The zero value is not
// usable; build one with NewDir.
type Dir struct {
	path string
}

var _ Store = (*Dir)(nil)

// validName is what a model name may be in a file name (config's model
// names are a subset).
var validName = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9_.-]{0,127}$`)

// tmpName matches the temporary files of Save (os.CreateTemp's random part
// is decimal digits).
var tmpName = regexp.MustCompile(`^\.[A-Za-z0-9][A-Za-z0-9_.-]{0,127}\.[0-9]+\.tmp$`)

// NewDir returns the Store in directory path, creating it (mode 0750) if
// needed. It removes the temporary files of a process that was killed
// while it wrote a checkpoint (each as large as a checkpoint; nothing else
// would ever remove them), best effort: the directory belongs to one
// process at a time.
func NewDir(path string) (*Dir, error) {
	if err := os.MkdirAll(path, 0o750); err != nil {
		return nil, fmt.Errorf("checkpoint: directory: %w", err)
	}
	entries, _ := os.ReadDir(path)
	for _, e := range entries {
		if e.Type().IsRegular() && tmpName.MatchString(e.Name()) {
			os.Remove(filepath.Join(path, e.Name()))
		}
	}
	return &Dir{path: path}, nil
}

// Path returns the directory.
func (d *Dir) Path() string { return d.path }

func (d *Dir) files(model string) (newest, prev string, err error) {
	if !validName.MatchString(model) {
		return "", "", fmt.Errorf("checkpoint: model name %q cannot name a file", model)
	}
	return filepath.Join(d.path, model+".ckpt"), filepath.Join(d.path, model+".prev.ckpt"), nil
}

// Save writes frame as model's newest checkpoint: to a temporary file in
// the directory, synced, then the current newest is renamed to the
// fallback and the temporary file renamed over the newest, and the
// directory synced. A crash at any point leaves at least one complete
// checkpoint (the old newest as newest or as fallback, or the new one).
func (d *Dir) Save(model string, frame []byte) (err error) {
	newest, prev, err := d.files(model)
	if err != nil {
		return err
	}
	f, err := os.CreateTemp(d.path, "."+model+".*.tmp")
	if err != nil {
		return fmt.Errorf("checkpoint: %w", err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			os.Remove(tmp)
		}
	}()
	if _, err = f.Write(frame); err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("checkpoint: writing %s: %w", tmp, err)
	}
	if err = os.Rename(newest, prev); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("checkpoint: keeping the previous checkpoint: %w", err)
	}
	if err = os.Rename(tmp, newest); err != nil {
		return fmt.Errorf("checkpoint: %w", err)
	}
	return syncDir(d.path)
}

// Load implements Store: the newest file, else the fallback.
func (d *Dir) Load(model string) ([]byte, Meta, []error, error) {
	newest, prev, err := d.files(model)
	if err != nil {
		return nil, Meta{}, nil, err
	}
	var skipped []error
	missing := 0
	for _, path := range []string{newest, prev} {
		b, err := os.ReadFile(path)
		if errors.Is(err, fs.ErrNotExist) {
			missing++
			continue
		}
		if err != nil {
			skipped = append(skipped, fmt.Errorf("%s: %w", path, err))
			continue
		}
		payload, m, err := Decode(b)
		if err != nil {
			skipped = append(skipped, fmt.Errorf("%s: %w", path, err))
			continue
		}
		return payload, m, skipped, nil
	}
	if missing == 2 {
		return nil, Meta{}, nil, fmt.Errorf("%w for model %s in %s", ErrNotFound, model, d.path)
	}
	return nil, Meta{}, skipped, fmt.Errorf("checkpoint: no good checkpoint of model %s in %s: %w", model, d.path, errors.Join(skipped...))
}

// syncDir fsyncs a directory so a rename in it is durable.
func syncDir(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return fmt.Errorf("checkpoint: %w", err)
	}
	defer f.Close()
	if err := f.Sync(); err != nil {
		return fmt.Errorf("checkpoint: syncing %s: %w", path, err)
	}
	return nil
}
