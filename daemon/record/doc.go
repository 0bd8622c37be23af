// Package record decodes lariat's wire record, one JSON object per message,
// into caller-owned buffers without allocating in steady state. It owns the
// record format and its validation; a Decoder is owned by one goroutine.
//
// # Format
//
//	{"t": "2026-03-04T05:06:07.089Z", "y": 1, "x": {"suction_kpa": 312.4, "amps_l1": 41.2}, "w": 1, "key": "unit-07"}
//
// The fields:
//
//   - "x": channel values by name, each a number or null (null = missing).
//     The feature order is DecoderOptions.Features, then names learned in
//     order of first appearance, up to MaxFeatures in all; a new name past
//     the cap rejects the record (ReasonTooManyFeatures) and is not learned.
//     A known channel absent from a record is missing, not zero: NaN in
//     Record.X under the "impute" policy, ReasonMissingFeature under
//     "reject".
//   - "v": the values as an array in the order of Features (ReasonDimension
//     if there is no fixed list or the length differs); elements are numbers
//     or null. A record has exactly one of "x" and "v".
//   - "t": optional; an RFC 3339 date-time (upper-case T and Z, optional
//     fraction, Z or ±HH:MM offset) or integer Unix milliseconds.
//   - "y": required unless DecoderOptions.Unlabeled; a number, or for a
//     logistic decoder 0, 1, true or false (ReasonLabel otherwise).
//   - "w": optional weight, a number > 0; 1 when absent ("w": 0 is rejected
//     with ReasonWeight, so a zero never counts as a full weight).
//   - "key": optional string, copied into Record.Key.
//
// Every other top-level key is ignored; its value, whatever it is, is
// still checked to be valid JSON. A null value for "t", "y", "x", "v", "w"
// or "key" counts as absent. Numbers that overflow float64, such as 1e400,
// are rejected with ReasonNotFinite (JSON has no NaN or infinity).
//
// # Strictness
//
// The decoder accepts exactly the JSON that encoding/json accepts, with the
// same nesting limit (10000), and decodes strings the same way (including
// lone UTF-16 surrogates in \u escapes, which become U+FFFD), with three
// deliberate differences: invalid UTF-8 anywhere (encoding/json substitutes
// U+FFFD) and a repeated top-level field or a repeated channel in "x",
// compared after unescaping (encoding/json keeps the last), are rejected
// with ReasonMalformed; a message longer than MaxBytes is rejected with
// ReasonOversize before parsing. Keys are case-sensitive. RFC 3339 is read
// strictly: time.Parse also takes one-digit hours, a comma before the
// fraction and out-of-range offsets such as +24:00 or +23:60, which are
// rejected with ReasonTime.
//
// When a record has several problems, Decode reports, in this order: a
// syntax error; a duplicate or both "x" and "v" (both ReasonMalformed); the
// first other problem in document order; a missing "x"/"v", a missing "y",
// a missing channel under the reject policy.
//
// # Errors
//
// Decode returns an *Error whose Reason is one of the Reason constants, a
// short token fit for a metric label. A rejected record leaves the Decoder
// as it was.
package record
