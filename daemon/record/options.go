package record

import (
	"errors"
	"fmt"
)

// DecoderOptions configures a Decoder; nil or the zero value gives the
// defaults shown.
type DecoderOptions struct {
	// Features is the fixed feature order; it enables the "v" array form.
	// May be empty. Names must be unique.
	Features []string
	// Learned are names already learned from "x" (for example restored from
	// a checkpoint), placed after Features in this order; "" marks a free
	// slot. Must be unique (but for "") and disjoint from Features.
	Learned []string
	// MaxFeatures caps the feature set: Features, Learned and names learned
	// later. Default 256; must be at least len(Features)+len(Learned). While
	// it is reached, a new name is dropped (counted, see Decoder.Dropped)
	// and the record keeps its known channels; under Missing "reject" the
	// record is rejected with ReasonTooManyFeatures instead.
	MaxFeatures int
	// Logistic makes "y" a class label: 0, 1, true or false.
	Logistic bool
	// Missing is the policy for a known channel absent from a record (or
	// null): "impute" (default) leaves NaN in X; "reject" rejects the record
	// with ReasonMissingFeature.
	Missing string
	// MaxBytes rejects longer messages with ReasonOversize before parsing.
	// Default 64 KiB.
	MaxBytes int
	// Unlabeled is scoring mode: "y" is optional and ignored, and Y is NaN.
	Unlabeled bool
	// FreeAfter makes a learned name (not one of Features) that no record
	// has carried for this many decoded records give its slot back: the
	// name is forgotten, its slot in Names reads "" until a new name takes
	// it. 0 (the default) keeps every name for good.
	FreeAfter int
}

// Defaults of DecoderOptions.
const (
	DefaultMaxFeatures = 256
	DefaultMaxBytes    = 64 << 10
)

// Missing-value policies of DecoderOptions.Missing.
const (
	MissingImpute = "impute"
	MissingReject = "reject"
)

// Validate reports the first problem with the options, or nil. NewDecoder
// panics on options that Validate rejects.
func (o *DecoderOptions) Validate() error {
	if o == nil {
		return nil
	}
	if o.MaxFeatures < 0 || o.MaxBytes < 0 || o.FreeAfter < 0 {
		return errors.New("record: MaxFeatures, MaxBytes and FreeAfter must not be negative")
	}
	if o.Missing != "" && o.Missing != MissingImpute && o.Missing != MissingReject {
		return fmt.Errorf("record: Missing is %q (allowed: impute, reject)", o.Missing)
	}
	seen := make(map[string]bool, len(o.Features)+len(o.Learned))
	for i, list := range [][]string{o.Features, o.Learned} {
		for _, name := range list {
			if name == "" && i == 1 {
				continue // a free slot
			}
			if seen[name] {
				return fmt.Errorf("record: feature %q is listed twice", name)
			}
			seen[name] = true
		}
	}
	if n, m := len(o.Features)+len(o.Learned), o.MaxFeatures; m > 0 && n > m || m == 0 && n > DefaultMaxFeatures {
		return fmt.Errorf("record: %d features listed, more than MaxFeatures", n)
	}
	return nil
}
