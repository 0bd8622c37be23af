package natstest

import (
	"context"
	"crypto/rand"
	"errors"
	"fmt"
	"strconv"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// PublishOptions tunes PublishAll. The zero value (or nil) gives the
// defaults.
type PublishOptions struct {
	// Window is the most records sent and not yet acknowledged; default
	// 256.
	Window int
	// AckWait is how long a record waits for its acknowledgement before it
	// counts as failed; default 5s.
	AckWait time.Duration
	// Retry is how long PublishAll keeps sending again after failures with
	// no record acknowledged in between; default ClusterReady.
	Retry time.Duration
	// IDPrefix makes record i's Nats-Msg-Id IDPrefix + "." + i; default a
	// random prefix per call. Give two calls the same prefix only to
	// publish the same records again.
	IDPrefix string
}

// PublishResult is what PublishAll did.
type PublishResult struct {
	// Records is the number of records acknowledged, each counted once.
	Records int
	// Duplicates is how many of them the stream acknowledged as duplicates
	// of a message ID it already held: sent again after a failure, they
	// were stored once.
	Duplicates int
	// Resent is the number of records sent again after failures (each
	// failure goes back to the oldest record not acknowledged and sends
	// from there again, in order).
	Resent int
	// Failures is the number of failed sends or acknowledgements.
	Failures int
	// First and Last are the stream sequences of the first and the last
	// record stored.
	First, Last uint64
	// Elapsed is the time from the first send to the last acknowledgement.
	Elapsed time.Duration
}

// PublishAll publishes records 0..n-1 through nc to JetStream, record i on
// the subject and with the payload msg(i) returns (msg is called again for
// a record sent again), with at most Window records awaiting their
// acknowledgement and each with the message ID IDPrefix.i. It returns when
// every record is acknowledged, or with an error when ctx ends or Retry
// passes without progress.
//
// Records are stored in the order of i while nothing fails. A failed send
// or acknowledgement goes back to the oldest record not acknowledged and
// sends from there again, in order; the stream stores a record sent twice
// once (its duplicate window, 2 minutes by default, must cover the
// failure), but a record lost in the failure is stored after the later ones
// that were not: where the order per key matters, check Resent or
// Failures.
func PublishAll(ctx context.Context, nc *nats.Conn, n int, msg func(i int) (subject string, data []byte), o *PublishOptions) (PublishResult, error) {
	p, err := newPublisher(nc, o)
	if err != nil {
		return PublishResult{}, err
	}
	return p.run(ctx, n, msg)
}

// publisher is one PublishAll call.
type publisher struct {
	js     jetstream.JetStream
	opt    PublishOptions
	res    PublishResult
	queue  []sent // sent, not acknowledged, oldest first
	next   int    // the next record to send
	stuck  time.Time
	failed error
}

// sent is a record awaiting its acknowledgement.
type sent struct {
	i int
	f jetstream.PubAckFuture
}

// newPublisher fills in the defaults and opens a JetStream context whose
// acknowledgements time out after AckWait.
func newPublisher(nc *nats.Conn, o *PublishOptions) (*publisher, error) {
	p := &publisher{}
	if o != nil {
		p.opt = *o
	}
	if p.opt.Window <= 0 {
		p.opt.Window = 256
	}
	if p.opt.AckWait <= 0 {
		p.opt.AckWait = 5 * time.Second
	}
	if p.opt.Retry <= 0 {
		p.opt.Retry = ClusterReady
	}
	if p.opt.IDPrefix == "" {
		p.opt.IDPrefix = rand.Text()
	}
	// Records given up after a failure stay pending in the context until
	// their acknowledgement or its timeout: room for them beside a window.
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncTimeout(p.opt.AckWait),
		jetstream.WithPublishAsyncMaxPending(4*p.opt.Window))
	if err != nil {
		return nil, err
	}
	p.js = js
	return p, nil
}

// run sends and collects acknowledgements until every record is stored.
func (p *publisher) run(ctx context.Context, n int, msg func(int) (string, []byte)) (PublishResult, error) {
	start := time.Now()
	for p.res.Records < n {
		for p.next < n && len(p.queue) < p.opt.Window {
			subject, data := msg(p.next)
			m := &nats.Msg{Subject: subject, Data: data, Header: nats.Header{}}
			m.Header.Set(jetstream.MsgIDHeader, p.opt.IDPrefix+"."+strconv.Itoa(p.next))
			f, err := p.js.PublishMsgAsync(m)
			if err != nil {
				p.fail(err)
				break
			}
			p.queue = append(p.queue, sent{p.next, f})
			p.next++
		}
		if len(p.queue) > 0 {
			select {
			case ack := <-p.queue[0].f.Ok():
				p.acked(ack)
			case err := <-p.queue[0].f.Err():
				p.fail(err)
			case <-ctx.Done():
				return p.res, ctx.Err()
			}
		}
		if err := p.recover(ctx); err != nil {
			return p.res, err
		}
	}
	p.res.Elapsed = time.Since(start)
	return p.res, nil
}

// acked records the acknowledgement of the oldest record.
func (p *publisher) acked(ack *jetstream.PubAck) {
	p.queue = p.queue[1:]
	p.res.Records++
	if ack.Duplicate {
		p.res.Duplicates++
	} else {
		if p.res.First == 0 {
			p.res.First = ack.Sequence
		}
		p.res.Last = ack.Sequence
	}
	p.stuck, p.failed = time.Time{}, nil
}

// fail notes a failed send or acknowledgement.
func (p *publisher) fail(err error) {
	p.res.Failures++
	p.failed = err
	if p.stuck.IsZero() {
		p.stuck = time.Now()
	}
}

// recover, after a failure, waits a little and goes back to the oldest
// record not acknowledged; it gives up when Retry passed with no progress.
func (p *publisher) recover(ctx context.Context) error {
	if p.failed == nil {
		return nil
	}
	if time.Since(p.stuck) > p.opt.Retry {
		return fmt.Errorf("natstest: no record acknowledged for %s after record %d: %w", p.opt.Retry, p.res.Records, p.failed)
	}
	if len(p.queue) > 0 {
		p.res.Resent += p.next - p.queue[0].i
		p.next = p.queue[0].i
		p.queue = p.queue[:0]
	}
	err := p.failed
	p.failed = nil
	select {
	case <-time.After(50 * time.Millisecond):
		return nil
	case <-ctx.Done():
		return errors.Join(ctx.Err(), err)
	}
}
