package sink

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// ErrBadName is returned for a model name that cannot be a NATS subject
// token and key-value key (allowed: letters, digits, '_' and '-').
var ErrBadName = errors.New("sink: model name must be non-empty and use only letters, digits, '_' and '-'")

// ErrNoConn is returned by NewPublisher for a nil connection.
var ErrNoConn = errors.New("sink: no NATS connection")

// Reject headers, set on every message on <prefix>.reject.<model>.
const (
	HeaderModel     = "Lariat-Model"     // the model's name
	HeaderReason    = "Lariat-Reason"    // a short label-safe token ("malformed", "label", …)
	HeaderDetail    = "Lariat-Detail"    // human-readable detail, one line, at most MaxDetail bytes
	HeaderSubject   = "Lariat-Subject"   // the subject the record arrived on
	HeaderTruncated = "Lariat-Truncated" // the original length, only if the body had to be cut
)

// MaxDetail is the largest Lariat-Detail header value; longer details are cut.
const MaxDetail = 1024

// DefaultMaxRejectBytes is PublisherOptions.MaxRejectBytes when it is 0:
// the record decoder's default message limit, so that every record that
// could have been accepted is republished whole and only an oversize one
// is cut.
const DefaultMaxRejectBytes = 64 << 10

// PublisherOptions configures a Publisher; the zero value gives the defaults.
type PublisherOptions struct {
	// Prefix is the subject prefix; default "lariat".
	Prefix string
	// Bucket is the JetStream key-value bucket holding the latest model
	// JSON under the model's name; default "lariat_models". It is created
	// (history 1, file storage) if missing.
	Bucket string
	// NoKV disables JetStream: models go to core NATS only.
	NoKV bool
	// Timeout bounds each key-value operation when the context has no
	// deadline; default 5s.
	Timeout time.Duration
	// Metrics, if set, counts failures in lariat_publish_errors_total.
	Metrics *Metrics
	// MaxRejectBytes bounds the body of a republished rejected record;
	// a longer record is cut and Lariat-Truncated carries its length.
	// Default DefaultMaxRejectBytes.
	MaxRejectBytes int
}

// Publisher sends models, alerts and rejected records to NATS. It does not
// own the connection. Its methods are safe for concurrent use, return
// errors and never panic on bad input.
type Publisher struct {
	nc       *nats.Conn
	kv       jetstream.KeyValue
	prefix   string
	timeout  time.Duration
	metrics  *Metrics
	maxBody  int
	failures atomic.Uint64
}

// NewPublisher returns a Publisher on nc, opening (or creating) the model
// bucket unless o.NoKV is set. o may be nil.
func NewPublisher(ctx context.Context, nc *nats.Conn, o *PublisherOptions) (*Publisher, error) {
	if nc == nil {
		return nil, ErrNoConn
	}
	if o == nil {
		o = &PublisherOptions{}
	}
	p := &Publisher{nc: nc, prefix: o.Prefix, timeout: o.Timeout, metrics: o.Metrics, maxBody: o.MaxRejectBytes}
	if p.maxBody <= 0 {
		p.maxBody = DefaultMaxRejectBytes
	}
	if p.prefix == "" {
		p.prefix = "lariat"
	}
	if p.timeout <= 0 {
		p.timeout = 5 * time.Second
	}
	if o.NoKV {
		return p, nil
	}
	bucket := o.Bucket
	if bucket == "" {
		bucket = "lariat_models"
	}
	ctx, cancel := p.withTimeout(ctx)
	defer cancel()
	kv, err := openBucket(ctx, nc, bucket)
	if err != nil {
		p.fail(PublishKindKV)
		return nil, fmt.Errorf("sink: model bucket %s: %w", bucket, err)
	}
	p.kv = kv
	return p, nil
}

// openBucket opens bucket, creating it if it does not exist. An existing
// bucket keeps its configuration.
func openBucket(ctx context.Context, nc *nats.Conn, bucket string) (jetstream.KeyValue, error) {
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, err
	}
	kv, err := js.KeyValue(ctx, bucket)
	if !errors.Is(err, jetstream.ErrBucketNotFound) {
		return kv, err
	}
	kv, err = js.CreateKeyValue(ctx, jetstream.KeyValueConfig{
		Bucket:      bucket,
		Description: "lariat: latest model JSON by model name",
		History:     1,
		Storage:     jetstream.FileStorage,
	})
	if errors.Is(err, jetstream.ErrBucketExists) { // lost a creation race
		return js.KeyValue(ctx, bucket)
	}
	return kv, err
}

// KV returns the model bucket, or nil with NoKV.
func (p *Publisher) KV() jetstream.KeyValue { return p.kv }

// Failures returns the number of failed publishes so far.
func (p *Publisher) Failures() uint64 { return p.failures.Load() }

// Subject returns <prefix>.<kind>.<model>, for kind "model", "alert" or
// "reject".
func (p *Publisher) Subject(kind, model string) string { return p.prefix + "." + kind + "." + model }

// fail counts one failure of the given kind.
func (p *Publisher) fail(kind string) {
	p.failures.Add(1)
	if p.metrics != nil {
		p.metrics.PublishError(kind)
	}
}

// withTimeout applies the default timeout if ctx has no deadline.
func (p *Publisher) withTimeout(ctx context.Context) (context.Context, context.CancelFunc) {
	if _, ok := ctx.Deadline(); ok {
		return ctx, func() {}
	}
	return context.WithTimeout(ctx, p.timeout)
}

// validName reports whether name is a safe subject token and KV key.
func validName(name string) bool {
	if name == "" {
		return false
	}
	for _, c := range name {
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '_' || c == '-') {
			return false
		}
	}
	return true
}

// PublishModel publishes doc's JSON on <prefix>.model.<name> and puts it
// into the model bucket under the model's name. Both are attempted; the
// returned error joins their failures.
func (p *Publisher) PublishModel(ctx context.Context, doc *ModelDoc) error {
	if !validName(doc.Model) {
		p.fail(PublishKindModel)
		return fmt.Errorf("%w: %q", ErrBadName, doc.Model)
	}
	b, err := json.Marshal(doc)
	if err != nil {
		p.fail(PublishKindModel)
		return fmt.Errorf("sink: encoding model %s: %w", doc.Model, err)
	}
	var errs []error
	if err := p.nc.Publish(p.Subject("model", doc.Model), b); err != nil {
		p.fail(PublishKindModel)
		errs = append(errs, fmt.Errorf("sink: publishing model %s: %w", doc.Model, err))
	}
	if p.kv != nil {
		ctx, cancel := p.withTimeout(ctx)
		defer cancel()
		if _, err := p.kv.Put(ctx, doc.Model, b); err != nil {
			p.fail(PublishKindKV)
			errs = append(errs, fmt.Errorf("sink: storing model %s: %w", doc.Model, err))
		}
	}
	return errors.Join(errs...)
}

// PublishAlert validates a and publishes its JSON on <prefix>.alert.<model>.
func (p *Publisher) PublishAlert(a *Alert) error {
	err := a.Validate()
	if err == nil && !validName(a.Model) {
		err = fmt.Errorf("%w: %q", ErrBadName, a.Model)
	}
	var b []byte
	if err == nil {
		b, err = json.Marshal(a)
	}
	if err == nil {
		err = p.nc.Publish(p.Subject("alert", a.Model), b)
	}
	if err != nil {
		p.fail(PublishKindAlert)
		return fmt.Errorf("sink: publishing alert of %s: %w", a.Model, err)
	}
	return nil
}

// Reject is a record that a model refused.
type Reject struct {
	// Model is the model's name.
	Model string
	// Subject is the subject the record arrived on.
	Subject string
	// Reason is a short label-safe token (the decoder's or learner's reason).
	Reason string
	// Detail is a human-readable explanation.
	Detail string
	// Data is the record's original bytes.
	Data []byte
}

// PublishReject republishes a rejected record on <prefix>.reject.<model>:
// the body is the original bytes unchanged, and the headers Lariat-Model,
// Lariat-Reason, Lariat-Detail and Lariat-Subject say why and from where. A
// body longer than PublisherOptions.MaxRejectBytes, or one that with the
// headers would exceed the server's max payload, is cut to the limit and
// Lariat-Truncated carries the original length.
func (p *Publisher) PublishReject(r *Reject) error {
	if !validName(r.Model) {
		p.fail(PublishKindReject)
		return fmt.Errorf("%w: %q", ErrBadName, r.Model)
	}
	msg := nats.NewMsg(p.Subject("reject", r.Model))
	msg.Header.Set(HeaderModel, r.Model)
	msg.Header.Set(HeaderReason, headerValue(r.Reason, 128))
	msg.Header.Set(HeaderDetail, headerValue(r.Detail, MaxDetail))
	msg.Header.Set(HeaderSubject, headerValue(r.Subject, 512))
	msg.Data = r.Data
	limit := int64(p.maxBody)
	if room := p.nc.MaxPayload() - headerSize(msg.Header) - 64; room > 0 {
		limit = min(limit, room)
	}
	if int64(len(r.Data)) > limit {
		msg.Header.Set(HeaderTruncated, strconv.Itoa(len(r.Data)))
		msg.Data = r.Data[:limit]
	}
	if err := p.nc.PublishMsg(msg); err != nil {
		p.fail(PublishKindReject)
		return fmt.Errorf("sink: publishing reject of %s: %w", r.Model, err)
	}
	return nil
}

// headerValue makes s a single-line header value of at most n bytes of
// valid UTF-8.
func headerValue(s string, n int) string {
	s = strings.Map(func(c rune) rune {
		if c == '\r' || c == '\n' || c < ' ' || c == 0x7f {
			return ' '
		}
		return c
	}, s)
	if len(s) > n {
		s = strings.ToValidUTF8(s[:n], "")
	}
	return s
}

// headerSize over-estimates the encoded size of h.
func headerSize(h nats.Header) int64 {
	n := int64(len("NATS/1.0\r\n\r\n"))
	for k, vs := range h {
		for _, v := range vs {
			n += int64(len(k) + len(v) + 4)
		}
	}
	return n
}
