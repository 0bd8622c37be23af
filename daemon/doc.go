// Package daemon wires lariat together and runs it: an embedded or external
// NATS connection, one subscription per model subject, the bounded queues,
// one goroutine per model that owns all of its state (ladder, holdout,
// chooser, splitter), publication of the current models on NATS, into the
// key-value bucket and over HTTP, metrics, and the lifecycle. The lariat
// command lives in daemon/cmd/lariat; the simulated demo plant in plant.go.
//
// # Data path
//
// A subscription's callback (nats.go runs one goroutine per subscription)
// decodes each message with the model's record.Decoder, which that goroutine
// owns, and puts the record on the model's bounded queue without blocking.
// Rejected records (bad input, a full queue) are counted by model and reason
// and republished with the reason on <prefix>.reject.<model>; they never
// reach a model. The model goroutine sends every k-th record to the holdout
// and trains the ladder on the rest, rescores the ladder every
// retune.every records, and every 100 ms runs learner.idle_steps idle steps
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
//  1. stop intake: drain every subscription (messages the client holds are
//     still delivered; nothing new arrives);
//  2. drain the queues: each model goroutine applies every queued record,
//     publishes its final document and returns;
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
