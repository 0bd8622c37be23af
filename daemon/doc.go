// Package daemon wires lariat together and runs it: an embedded or external
// NATS connection, one subscription per model subject, the bounded queues,
// one goroutine per model that owns the model's pipeline.Pipeline (every
// piece of per-model state and policy lives there), publication of the
// current models on NATS, into the key-value bucket and over HTTP, metrics,
// and the lifecycle. It holds wiring only: the per-model logic is
// daemon/pipeline, the wire record daemon/record, and the lariat command
// with its tools daemon/cmd/lariat.
//
// # Data path
//
// A subscription's callback (nats.go runs one goroutine per subscription)
// decodes each message with the model's record.Decoder, which that goroutine
// owns, and puts the record on the model's bounded queue without blocking.
// Rejected records (bad input, a full queue) are counted by model and reason
// and republished with the reason on <prefix>.reject.<model> (the body cut
// to 64 KiB, at most 100 a second per model after a burst of 200: see
// rejectlimit.go); they never reach a model. The model goroutine is a thin loop: it hands each record
// to its pipeline (pipeline.Pipeline.Apply: every k-th record to the
// holdout, the rest to the ladder, a retune every retune.every records,
// the drift watch and the threshold), sends the alerts the record raised,
// and every 100 ms runs learner.idle_steps idle steps
// if its queue is empty (spare time goes into converging on the current
// window, so a quiet stream converges fully and a busy one spends nothing)
// and checks whether to publish.
// Nothing is published before the first retune has chosen λ (a fixed-λ
// model publishes from its first record). A new version goes out when the
// support, λ or a coefficient moved beyond publish.tolerance (sink.Changed),
// at most once a second, and at least every publish.heartbeat; the model
// goroutine stores it for HTTP and hands it to one publisher goroutine,
// which sends it on <prefix>.model.<name> and into the key-value bucket, so
// a slow bus never stalls learning. Versions are monotone per model, also
// across restarts (the last version is read back from the bucket).
//
// # Intake and checkpoints
//
// With the durable intake (intake.mode durable, or auto where JetStream
// answers) each model reads a JetStream stream of its own from the position
// of its last checkpoint (stream.go); a reader waits for room in the queue.
// At start, before any goroutine runs, each model is restored from its
// newest good checkpoint under data_dir/checkpoints (checkpoint.go) and
// published at once; the model goroutine saves a checkpoint every
// checkpoint.records records or checkpoint.interval, and at shutdown.
//
// Core NATS drops messages for a client that falls behind (a slow
// consumer). The per-subscription pending limits are raised to
// nats.pending_msgs / nats.pending_bytes, the drops are counted in
// lariat_nats_slow_consumer_drops_total and a slow consumer is logged.
//
// # Shutdown order
//
// Run returns after ctx is done and these steps, bounded by
// ShutdownTimeout (10 s) as a whole:
//
//  1. stop intake: drain every core subscription (messages the client holds
//     are still delivered; nothing new arrives) and stop the stream readers
//     (what a reader held and did not queue is read again at the next start:
//     a model's stream position only moves when it has applied a record);
//  2. drain the queues: each model goroutine applies every queued record,
//     publishes its final document, saves its checkpoint and returns;
//  3. publish the final documents (bus and key-value bucket), flush and
//     close the NATS connection, shut the embedded server down;
//  4. shut the HTTP server down.
//
// Shutdown is safe to reach twice (only the first runs). Signals are handled
// only in the command (signal.NotifyContext in main).
//
// # Concurrency
//
// A Daemon's exported methods are safe for concurrent use; each model's
// state is touched by its own goroutine only, and HTTP predictions read the
// latest published, immutable snapshot.
package daemon
