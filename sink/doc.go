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
//	lariat.reject.<name>  the rejected record's original bytes, with headers
//	                      Lariat-Model, Lariat-Reason, Lariat-Detail,
//	                      Lariat-Subject; a body longer than
//	                      PublisherOptions.MaxRejectBytes (default 64 KiB) is
//	                      cut and Lariat-Truncated carries its length
//
// The latest model JSON of every model is also kept in the JetStream
// key-value bucket "lariat_models" under the model's name.
//
// # Known limitations
//
// Versions continue across restarts: the daemon restores each model's
// checkpoint (package sink/checkpoint frames and stores them), and reads the
// last version back from the key-value bucket. An HTTP ETag carries the
// daemon's start epoch with the version (HandlerOptions.Epoch), so a client
// holding an ETag from before a restart never gets a 304 for a different
// model, even where a version number comes round again.
package sink
