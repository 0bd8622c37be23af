package fit

// This file reads and checks the CSV input of `lariat fit`.

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strings"

	"lariat/daemon/record"
)

// table is a CSV file parsed for fitting: X is row-major, n × len(names);
// NaN marks a missing value.
type table struct {
	names   []string // feature columns in file order
	skipped []string // columns with no number in them
	x, y    []float64
	lines   []int // file line of each row
}

func (t *table) rows() int { return len(t.y) }

func (t *table) row(i int) []float64 {
	d := len(t.names)
	return t.x[i*d : (i+1)*d]
}

// readTable reads and checks the whole CSV file.
func readTable(path, label string, logistic bool) (*table, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, &Error{Msg: err.Error()}
	}
	defer f.Close()
	header, cells, lines, err := readCells(f, path)
	if err != nil {
		return nil, err
	}
	li := slices.Index(header, label)
	if li < 0 {
		return nil, &Error{File: path, Line: 1, Msg: fmt.Sprintf("no label column %q (columns: %s)", label, strings.Join(header, ", "))}
	}
	t := &table{lines: lines}
	var cols []int
	for j, name := range header {
		switch {
		case j == li:
		case hasNumber(cells, j):
			cols = append(cols, j)
			t.names = append(t.names, name)
		default:
			t.skipped = append(t.skipped, name)
		}
	}
	if len(cols) == 0 {
		return nil, &Error{File: path, Msg: fmt.Sprintf("no numeric feature columns besides the label %q", label)}
	}
	t.x = make([]float64, 0, len(cells)*len(cols))
	t.y = make([]float64, len(cells))
	for i, rec := range cells {
		if t.y[i], err = parseLabel(rec[li], logistic); err != nil {
			return nil, &Error{File: path, Line: lines[i], Column: label, Msg: err.Error()}
		}
		for k, j := range cols {
			v, err := record.ParseCell(rec[j])
			if err != nil {
				return nil, &Error{File: path, Line: lines[i], Column: t.names[k], Msg: err.Error()}
			}
			t.x = append(t.x, v)
		}
	}
	return t, nil
}

// readCells returns the header, the data rows and each row's line number.
func readCells(r io.Reader, path string) (header []string, cells [][]string, lines []int, err error) {
	cr := csv.NewReader(r)
	header, err = cr.Read()
	if err == io.EOF {
		return nil, nil, nil, &Error{File: path, Msg: "empty file"}
	}
	if err != nil {
		return nil, nil, nil, csvError(path, err)
	}
	header[0] = strings.TrimPrefix(header[0], "\ufeff") // byte-order mark of some spreadsheet exports
	seen := make(map[string]bool, len(header))
	for i, h := range header {
		h = strings.TrimSpace(h)
		switch {
		case h == "":
			return nil, nil, nil, &Error{File: path, Line: 1, Msg: fmt.Sprintf("column %d has no name", i+1)}
		case seen[h]:
			return nil, nil, nil, &Error{File: path, Line: 1, Column: h, Msg: "appears twice in the header"}
		}
		header[i], seen[h] = h, true
	}
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, nil, nil, csvError(path, err)
		}
		line, _ := cr.FieldPos(0)
		cells = append(cells, rec)
		lines = append(lines, line)
	}
	if len(cells) == 0 {
		return nil, nil, nil, &Error{File: path, Msg: "no data rows after the header"}
	}
	return header, cells, lines, nil
}

func csvError(path string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &Error{File: path, Line: pe.Line, Msg: pe.Err.Error()}
	}
	return &Error{File: path, Msg: err.Error()}
}

func hasNumber(cells [][]string, j int) bool {
	for _, rec := range cells {
		if v, err := record.ParseCell(rec[j]); err == nil && !math.IsNaN(v) {
			return true
		}
	}
	return false
}

// parseLabel is record.ParseLabel, with a logistic label checked to be 0
// or 1.
func parseLabel(s string, logistic bool) (float64, error) {
	v, err := record.ParseLabel(s, logistic)
	if err == nil && logistic && v != 0 && v != 1 {
		return 0, fmt.Errorf("logistic label must be 0 or 1 (or true/false), got %q", strings.TrimSpace(s))
	}
	return v, err
}
