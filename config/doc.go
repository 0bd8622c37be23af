// Package config owns lariat's YAML configuration file: its types, their
// defaults, strict decoding and validation.
//
// Configuration flows one way: [Parse] (or [Load]) starts from the defaults
// ([Default], [DefaultModel]), decodes the YAML on top of them strictly
// (unknown keys, wrong types and bad durations are errors), then validates
// every field. All problems are collected and returned together as [Errors],
// one [FieldError] per problem, each carrying the file, the line and the
// field path, for example
//
//	lariat.yaml:14: models[1].loss: "squard" is not allowed (allowed: squared, logistic)
//
// Secrets (the NATS password and token, the HTTP admin token) are never read
// at load time: the accessors [NATS.ResolvePassword], [NATS.ResolveToken] and
// [HTTP.AdminToken] read the literal, file or environment variable when they
// are called. Secrets are redacted by String, GoString, LogValue and the
// YAML and JSON encoders, so printing or logging a [Config] never shows them.
//
// Relative paths (data_dir and every *_file) are relative to the process's
// working directory, not to the configuration file.
//
// A *Config returned by Parse or Load is read-only by convention and safe
// for concurrent reads by any number of goroutines.
//
// Known limitations: two models whose subjects differ but overlap through
// wildcards (plant.* and plant.a) are not reported, only identical
// subjects are; secret files are not checked for loose permissions; the
// decoder accepts any YAML scalar for a string field (name: 123 is the
// name "123"); a syntax error's line is found by re-parsing prefixes of
// the file, and can point at the start of a multi-line construct.
package config
