package config

import (
	"cmp"
	"errors"
	"fmt"
	"slices"
	"strings"
)

// ErrSecretUnset is wrapped by the secret accessors when a configured
// source holds nothing: the environment variable is unset or empty, or the
// file is empty.
var ErrSecretUnset = errors.New("config: secret is not set")

// FieldError is one problem in a configuration file.
type FieldError struct {
	File  string // file name given to Parse or Load; "" for a Config built in code
	Line  int    // 1-based line, 0 if unknown
	Field string // path such as "models[1].loss"; "" for the file as a whole
	Msg   string // what is wrong, and what is allowed
}

// Error formats the problem as "file:line: field: msg", leaving out what is
// unknown.
func (e *FieldError) Error() string {
	var b strings.Builder
	switch {
	case e.File != "" && e.Line > 0:
		fmt.Fprintf(&b, "%s:%d: ", e.File, e.Line)
	case e.File != "":
		b.WriteString(e.File + ": ")
	case e.Line > 0:
		fmt.Fprintf(&b, "line %d: ", e.Line)
	}
	if e.Field != "" {
		b.WriteString(e.Field + ": ")
	}
	b.WriteString(e.Msg)
	return b.String()
}

// Errors is every problem found in a configuration, sorted by line.
type Errors []*FieldError

// Error lists the problems one per line.
func (es Errors) Error() string {
	s := make([]string, len(es))
	for i, e := range es {
		s[i] = e.Error()
	}
	return strings.Join(s, "\n")
}

// Unwrap returns the problems, for [errors.As] and [errors.Is].
func (es Errors) Unwrap() []error {
	out := make([]error, len(es))
	for i, e := range es {
		out[i] = e
	}
	return out
}

// sort orders the problems by line (unknown lines last), keeping the order
// of discovery among equals.
func (es Errors) sort() {
	slices.SortStableFunc(es, func(a, b *FieldError) int {
		la, lb := a.Line, b.Line
		if la == 0 {
			la = int(^uint(0) >> 1)
		}
		if lb == 0 {
			lb = int(^uint(0) >> 1)
		}
		return cmp.Compare(la, lb)
	})
}

// errOrNil returns es as an error, or nil if it is empty.
func (es Errors) errOrNil() error {
	if len(es) == 0 {
		return nil
	}
	es.sort()
	return es
}
