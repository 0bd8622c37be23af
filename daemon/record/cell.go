package record

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// The text form of values in tables (the CSV files of lariat fit and
// lariat replay), which carry a record's values in cells rather than in the
// JSON wire form.

// ParseCell returns a cell's number, NaN for a missing value (an empty
// cell, NA or NaN, in any case), or an error that says what is wrong
// ("not a number", "not finite").
func ParseCell(s string) (float64, error) {
	s = strings.TrimSpace(s)
	switch strings.ToLower(s) {
	case "", "na", "nan":
		return math.NaN(), nil
	}
	v, err := strconv.ParseFloat(s, 64)
	switch {
	case err != nil && !errors.Is(err, strconv.ErrRange):
		return 0, fmt.Errorf("not a number %q", s)
	case err != nil || math.IsInf(v, 0):
		return 0, fmt.Errorf("not finite %q", s)
	}
	return v, nil
}

// ParseLabel returns a label cell's value: a number, or for a logistic
// model also true or false (any case). A missing label is an error. It
// does not check that a logistic label is 0 or 1; the callers decide how
// to treat one that is not.
func ParseLabel(s string, logistic bool) (float64, error) {
	s = strings.TrimSpace(s)
	if logistic {
		switch strings.ToLower(s) {
		case "true":
			return 1, nil
		case "false":
			return 0, nil
		}
	}
	v, err := ParseCell(s)
	switch {
	case err != nil:
		return 0, err
	case math.IsNaN(v):
		return 0, errors.New("missing label")
	}
	return v, nil
}

// Located formats a problem at a place in an input file as one line,
// "TOOL: FILE:LINE: column "x": msg", leaving out the parts that are zero
// (the errors of lariat fit and lariat replay).
func Located(tool, file string, line int, column, msg string) string {
	var b strings.Builder
	b.WriteString(tool + ": ")
	if file != "" {
		b.WriteString(file)
		if line > 0 {
			b.WriteString(":" + strconv.Itoa(line))
		}
		b.WriteString(": ")
	}
	if column != "" {
		b.WriteString("column " + strconv.Quote(column) + ": ")
	}
	b.WriteString(msg)
	return b.String()
}
