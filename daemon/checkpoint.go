package daemon

import (
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"path/filepath"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"lariat/config"
	"lariat/daemon/pipeline"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
	"lariat/sink/checkpoint"
	"lariat/sink/ckptobj"
)

// checkpointDir is the directory under data_dir that holds the models'
// checkpoints.
const checkpointDir = "checkpoints"

// payloadFormat is the version of a checkpoint's payload: the pipeline's
// state and the model's recent alerts.
const payloadFormat = 1

// arithmetic returns the checkpoint tag of this process's arithmetic.
func arithmetic() checkpoint.Arithmetic {
	if online.Arithmetic() == "avx2" {
		return checkpoint.AVX2
	}
	return checkpoint.Portable
}

// encodePayload joins a pipeline state and the model's recent alerts.
func encodePayload(state []byte, alerts []sink.Alert) ([]byte, error) {
	aj, err := json.Marshal(alerts)
	if err != nil {
		return nil, err
	}
	b := binary.AppendUvarint(nil, payloadFormat)
	b = binary.AppendUvarint(b, uint64(len(state)))
	b = append(b, state...)
	return append(b, aj...), nil
}

// decodePayload splits what encodePayload joined.
func decodePayload(b []byte) (state []byte, alerts []sink.Alert, err error) {
	v, n := binary.Uvarint(b)
	if n <= 0 || v != payloadFormat {
		return nil, nil, fmt.Errorf("checkpoint payload format %d (this build reads %d)", v, payloadFormat)
	}
	b = b[n:]
	l, n := binary.Uvarint(b)
	if n <= 0 || l > uint64(len(b)-n) {
		return nil, nil, errors.New("checkpoint payload truncated")
	}
	state, b = b[n:n+int(l)], b[n+int(l):]
	if err := json.Unmarshal(b, &alerts); err != nil {
		return nil, nil, fmt.Errorf("checkpoint alerts: %w", err)
	}
	return state, alerts, nil
}

// restore replaces the worker's fresh pipeline with its newest good
// checkpoint, if there is one, before any goroutine runs: the model then
// serves its restored version at once and its durable intake continues
// after the checkpoint's stream position. A damaged checkpoint is passed
// over with its reason (the previous one is used); one that cannot be
// restored (made under another learning configuration, say) is logged and
// the model starts fresh. It returns whether a state was restored.
func (w *worker) restore() bool {
	store := w.d.ckpt
	payload, meta, skipped, err := store.Load(w.name)
	for _, s := range skipped {
		w.mm.Checkpoint(sink.CheckpointRefused)
		w.log.Error("checkpoint refused; using the one before it", "reason", s)
	}
	if errors.Is(err, checkpoint.ErrNotFound) {
		return false
	}
	if err != nil {
		w.log.Error("no usable checkpoint; the model starts fresh", "err", err)
		return false
	}
	state, alerts, err := decodePayload(payload)
	var p *pipeline.Pipeline
	if err == nil {
		p, err = pipeline.Restore(w.popts, state)
	}
	if err != nil {
		w.mm.Checkpoint(sink.CheckpointRefused)
		w.log.Error("checkpoint not restored; the model starts fresh", "err", err)
		return false
	}
	if meta.Arithmetic != arithmetic() {
		w.log.Warn("checkpoint made on another arithmetic path: the model continues within rounding, not bit for bit",
			"saved", meta.Arithmetic, "here", arithmetic())
	}
	if p.Upgraded() {
		w.log.Info("checkpoint of learner saga restored as learner gram (learner.kind unset), window kept",
			"records", p.Ladder().Len())
	}
	w.pipe = p
	w.startPos = p.Position()
	w.dec = w.newDecoder(p.Names())
	for _, a := range alerts {
		w.d.store.AddAlert(a)
	}
	applied, _ := p.Counts()
	w.mm.Checkpoint(sink.CheckpointRestored)
	w.log.Info("restored from checkpoint", "written", meta.Written, "version", p.Version(),
		"records", applied, "window", p.Ladder().Len(), "position", p.Position())
	return true
}

// newDecoder returns the worker's record decoder, knowing the feature names
// of a restored model (after the configured ones) so that every name keeps
// its column.
func (w *worker) newDecoder(names []string) *record.Decoder {
	fixed := len(w.cfg.Features)
	return record.NewDecoder(&record.DecoderOptions{
		Features:    w.cfg.Features,
		Learned:     names[min(fixed, len(names)):],
		MaxFeatures: w.dim,
		Logistic:    w.cfg.Logistic(),
		Missing:     w.cfg.Missing,
		FreeAfter:   freeAfter(w.cfg),
	})
}

// saveDue reports whether a checkpoint is due at now.
func (w *worker) saveDue(now time.Time) bool {
	cp := w.d.cfg.Checkpoint
	return w.sinceSave >= cp.Records || w.sinceSave > 0 && now.Sub(w.lastSave) >= cp.Interval.Std()
}

// save writes a checkpoint of the model (on the model goroutine). A failure
// is counted and logged at most once a minute; the model goes on.
func (w *worker) save(now time.Time) {
	w.sinceSave, w.lastSave = 0, now
	if w.mayWrite != nil && !w.mayWrite() {
		// Another process owns the partition now: its checkpoint is the
		// instance's, and this process's state is not written over it.
		w.saveFailed = true
		w.mm.Checkpoint(sink.CheckpointFailed)
		return
	}
	size, err := w.saveErr(now)
	w.saveFailed = err != nil
	if err == nil {
		w.mm.Checkpoint(sink.CheckpointSaved)
		if w.onSaved != nil {
			w.onSaved(w.pipe.Position(), size)
		}
		return
	}
	w.mm.Checkpoint(sink.CheckpointFailed)
	if now.Sub(w.lastSaveLog) >= time.Minute {
		w.lastSaveLog = now
		w.log.Error("checkpoint not saved", "err", err)
	}
}

// saveErr saves a checkpoint and returns the size of the pipeline state.
func (w *worker) saveErr(now time.Time) (int, error) {
	state, err := w.pipe.MarshalBinary()
	if err != nil {
		return 0, err
	}
	payload, err := encodePayload(state, w.d.store.Alerts(w.name))
	if err != nil {
		return 0, err
	}
	return len(state), w.d.ckpt.Save(w.name, checkpoint.Encode(payload, checkpoint.Meta{Arithmetic: arithmetic(), Written: now}))
}

// openCheckpoints opens the checkpoint store: the directory under
// data_dir, or (checkpoint.store bucket) the JetStream object store every
// lariat process on the NATS system reads, which needs the connection:
// it waits for it up to bucketWait.
func (d *Daemon) openCheckpoints() (checkpoint.Store, error) {
	cp := d.cfg.Checkpoint
	if cp.Store != config.CheckpointBucket {
		return checkpoint.NewDir(filepath.Join(d.cfg.DataDir, checkpointDir))
	}
	deadline := time.Now().Add(bucketWait)
	for !d.nc.IsConnected() {
		if time.Now().After(deadline) {
			return nil, fmt.Errorf("checkpoint store bucket %s: NATS not connected after %v", cp.Bucket, bucketWait)
		}
		time.Sleep(50 * time.Millisecond)
	}
	js, err := jetstream.New(d.nc)
	if err != nil {
		return nil, err
	}
	ctx, cancel := context.WithTimeout(context.Background(), bucketWait)
	defer cancel()
	return ckptobj.Open(ctx, js, ckptobj.Options{Bucket: cp.Bucket, Replicas: cp.Replicas})
}

// bucketWait bounds the wait for NATS before the checkpoints in a bucket
// can be read at start.
const bucketWait = 30 * time.Second
