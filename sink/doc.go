// Package sink owns everything that leaves the lariat process: the model
// document (JSON) and its PMML 4.4 form, alerts, rejected records, the NATS
// publisher with its JetStream key-value bucket of latest models, the HTTP
// API with its status page, and the Prometheus metrics.
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
// Checkpoints (persisting ladder state for exact resume) are not part of
// this package yet; they belong to a later issue. Until then a restarted
// daemon starts its versions again at 1, so an HTTP client holding an old
// ETag may see a spurious 304 for a model whose version counter has been
// reset to the same number.
package sink
