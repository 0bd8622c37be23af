// Package sink owns everything that leaves the lariat process: the model
// document (JSON) and its PMML 4.4 form, alerts, rejected records, the NATS
// publisher with its JetStream key-value bucket of latest models, the HTTP
// API with its status page, and the Prometheus metrics. It decodes no wire
// records: the HTTP API hands predict bodies to the caller's Predictor.
//
// Concurrency: Store, Publisher, Metrics, ModelMetrics and the handler
// returned by NewHandler are safe for concurrent use; a ModelDoc or Alert
// must not be modified after it has been handed to a Store or Publisher.
//
// # Subjects
//
// With the default prefix "lariat":
//
//	lariat.model.<name>   model JSON (ModelDoc) on every published version
//	lariat.alert.<name>   alert JSON (Alert)
//	lariat.reject.<name>  the rejected record's original bytes, unchanged, with
//	                      headers Lariat-Model, Lariat-Reason, Lariat-Detail,
//	                      Lariat-Subject (and Lariat-Truncated if cut)
//
// The latest model JSON of every model is also kept in the JetStream
// key-value bucket "lariat_models" under the model's name.
//
// # Known limitations
//
// Checkpoints (persisting the learner's state, which the model JSON does
// not carry, for an exact resume) are not implemented: a restarted daemon
// learns again from the stream. Versions do continue across restarts: the daemon reads
// each model's last version back from the key-value bucket when its
// publisher opens, and the next version follows it. Without the bucket
// (JetStream unavailable, so models go to core NATS only, or the entry
// missing or unreadable) a restarted daemon starts its versions again at 1,
// so an HTTP client holding an old ETag may see a spurious 304 for a model
// whose version counter has come back to the same number.
package sink
