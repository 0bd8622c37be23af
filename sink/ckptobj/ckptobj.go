// Package ckptobj keeps lariat's model checkpoints in a JetStream object
// store, where every lariat process on the same NATS system can read them:
// a second implementation of checkpoint.Store beside the local directory,
// for a process that takes over another's models.
//
// Each model has two slots, objects <model>.a and <model>.b, each holding
// one framed checkpoint (checkpoint.Encode) and a generation number in its
// metadata. Save overwrites the slot with the older generation (so the
// newest two are kept, like checkpoint.Dir), Load reads the newer one and
// falls back to the older when the newer is damaged. The object store
// writes an object's chunks before its metadata, so a writer that dies
// mid-Save leaves the slot's previous object in place.
//
// A Bucket is safe for concurrent use by different models; calls for one
// model must not overlap (one process owns a model at a time).
package ckptobj

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"strconv"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"lariat/sink/checkpoint"
)

// genKey is the metadata key of a slot's generation.
const genKey = "lariat-generation"

// Bucket is a checkpoint.Store in a JetStream object store.
type Bucket struct {
	obs     jetstream.ObjectStore
	name    string
	timeout time.Duration
}

var _ checkpoint.Store = (*Bucket)(nil)

// Options configure Open.
type Options struct {
	// Bucket is the object store's name (created if missing).
	Bucket string
	// Replicas is the number of servers that hold it (1, or 3 on a
	// cluster). 0 means 1.
	Replicas int
	// Timeout bounds each Save and Load. 0 means 30 s.
	Timeout time.Duration
}

// Open creates or binds the object store named o.Bucket.
func Open(ctx context.Context, js jetstream.JetStream, o Options) (*Bucket, error) {
	if o.Bucket == "" {
		return nil, errors.New("ckptobj: no bucket name")
	}
	obs, err := js.CreateOrUpdateObjectStore(ctx, jetstream.ObjectStoreConfig{
		Bucket:      o.Bucket,
		Description: "lariat: model checkpoints (two per model)",
		Replicas:    max(o.Replicas, 1),
		Storage:     jetstream.FileStorage,
	})
	if err != nil {
		return nil, fmt.Errorf("ckptobj: object store %s: %w", o.Bucket, err)
	}
	t := o.Timeout
	if t <= 0 {
		t = 30 * time.Second
	}
	return &Bucket{obs: obs, name: o.Bucket, timeout: t}, nil
}

// slot is one of a model's two objects.
type slot struct {
	name string
	gen  uint64 // 0: empty
}

// slots returns model's two slots, the newer first.
func (b *Bucket) slots(ctx context.Context, model string) ([2]slot, error) {
	s := [2]slot{{name: model + ".a"}, {name: model + ".b"}}
	for i := range s {
		info, err := b.obs.GetInfo(ctx, s[i].name)
		if errors.Is(err, jetstream.ErrObjectNotFound) {
			continue
		}
		if err != nil {
			return s, fmt.Errorf("ckptobj: %s/%s: %w", b.name, s[i].name, err)
		}
		// A slot without a readable generation is older than any.
		s[i].gen, _ = strconv.ParseUint(info.Metadata[genKey], 10, 64)
		if s[i].gen == 0 {
			s[i].gen = 1
		}
	}
	if s[1].gen > s[0].gen {
		s[0], s[1] = s[1], s[0]
	}
	return s, nil
}

// Save implements checkpoint.Store: frame replaces the older slot.
func (b *Bucket) Save(model string, frame []byte) error {
	ctx, cancel := context.WithTimeout(context.Background(), b.timeout)
	defer cancel()
	s, err := b.slots(ctx, model)
	if err != nil {
		return err
	}
	gen := s[0].gen + 1
	// The object store writes the chunks, then the metadata with the
	// generation: a slot is never newer than its content.
	meta := jetstream.ObjectMeta{Name: s[1].name, Metadata: map[string]string{genKey: strconv.FormatUint(gen, 10)}}
	if _, err := b.obs.Put(ctx, meta, bytes.NewReader(frame)); err != nil {
		return fmt.Errorf("ckptobj: %s/%s: %w", b.name, s[1].name, err)
	}
	return nil
}

// Load implements checkpoint.Store: the newer slot's checkpoint, else the
// older one's.
func (b *Bucket) Load(model string) ([]byte, checkpoint.Meta, []error, error) {
	ctx, cancel := context.WithTimeout(context.Background(), b.timeout)
	defer cancel()
	s, err := b.slots(ctx, model)
	if err != nil {
		return nil, checkpoint.Meta{}, nil, err
	}
	var skipped []error
	for _, sl := range s {
		if sl.gen == 0 {
			continue
		}
		data, err := b.obs.GetBytes(ctx, sl.name)
		if err != nil {
			skipped = append(skipped, fmt.Errorf("%s/%s: %w", b.name, sl.name, err))
			continue
		}
		payload, m, err := checkpoint.Decode(data)
		if err != nil {
			skipped = append(skipped, fmt.Errorf("%s/%s: %w", b.name, sl.name, err))
			continue
		}
		return payload, m, skipped, nil
	}
	if s[0].gen == 0 {
		return nil, checkpoint.Meta{}, nil, fmt.Errorf("%w for model %s in object store %s", checkpoint.ErrNotFound, model, b.name)
	}
	return nil, checkpoint.Meta{}, skipped, fmt.Errorf("ckptobj: no good checkpoint of model %s in %s: %w", model, b.name, errors.Join(skipped...))
}
