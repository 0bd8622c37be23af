package record

import (
	"fmt"
	"strconv"
)

// Reason tokens name why a record was rejected. They are short, stable and
// safe to use as a metric label value.
const (
	ReasonOversize        = "oversize"          // the message is longer than DecoderOptions.MaxBytes
	ReasonMalformed       = "malformed"         // not a JSON object, invalid JSON or UTF-8, a duplicate key, or both "x" and "v"
	ReasonType            = "type"              // a field holds a JSON value of the wrong type
	ReasonNotFinite       = "not_finite"        // a number overflows float64 (e.g. 1e400)
	ReasonLabel           = "label"             // "y" is missing, or not 0/1/true/false for a logistic model
	ReasonTooManyFeatures = "too_many_features" // a new channel name past DecoderOptions.MaxFeatures under the missing policy "reject" (otherwise the name is dropped and counted)
	ReasonMissingFeature  = "missing_feature"   // neither "x" nor "v", or a missing channel under the reject policy
	ReasonDimension       = "dimension"         // "v" has the wrong length, or there is no fixed feature list
	ReasonWeight          = "weight"            // "w" is 0 or negative (a weight must be positive; absent means 1)
	ReasonTime            = "time"              // "t" is neither RFC 3339 nor integer Unix milliseconds
	ReasonName            = "name"              // a new channel name is empty, longer than MaxNameBytes, or holds a control character, invalid UTF-8 or a lone surrogate
)

var reasons = [...]string{
	ReasonOversize, ReasonMalformed, ReasonType, ReasonNotFinite, ReasonLabel,
	ReasonTooManyFeatures, ReasonMissingFeature, ReasonDimension, ReasonWeight, ReasonTime, ReasonName,
}

// Reasons returns every reason token, in a fixed order, for example to
// initialise the label values of a rejection counter. The slice is a copy.
func Reasons() []string { return append([]string(nil), reasons[:]...) }

// Error is the error returned by Decoder.Decode for a record that cannot be
// used. Reason is one of the Reason constants; Detail says what was wrong in
// words, quoting at most a short prefix of the offending input.
//
// Use errors.As to get at the reason:
//
//	var e *record.Error
//	if errors.As(err, &e) { rejected.WithLabelValues(e.Reason).Inc() }
type Error struct {
	// Reason is one of the Reason constants, such as ReasonLabel.
	Reason string
	// Detail says in words what was wrong with the record.
	Detail string
}

// Error returns "record: <reason>: <detail>".
func (e *Error) Error() string { return "record: " + e.Reason + ": " + e.Detail }

// Is reports whether target is an *Error with the same Reason and an empty
// Detail, so that errors.Is(err, &record.Error{Reason: record.ReasonLabel})
// tests for a reason.
func (e *Error) Is(target error) bool {
	t, ok := target.(*Error)
	return ok && t.Detail == "" && t.Reason == e.Reason
}

func newError(reason, format string, args ...any) *Error {
	return &Error{Reason: reason, Detail: fmt.Sprintf(format, args...)}
}

// maxQuote bounds how much of the input an error detail quotes.
const maxQuote = 40

// quote returns b as a Go-quoted string, truncated to maxQuote bytes.
func quote(b []byte) string {
	if len(b) > maxQuote {
		return strconv.Quote(string(b[:maxQuote])) + "..."
	}
	return strconv.Quote(string(b))
}
