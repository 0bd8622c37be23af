package replay

// This file reads recordings: JSON lines in the wire format as they are,
// and CSV rows turned into wire records (record.AppendJSON), so that both
// go through the daemon's decoder.

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"time"

	"lariat/daemon/record"
)

// errEOF ends a source.
var errEOF = io.EOF

// source yields the records of a recording as wire messages with their
// 1-based line numbers; the message is valid until the next call.
type source interface {
	next() (line int, msg []byte, err error)
	close()
}

// maxLine bounds a JSON line; the decoder rejects records past its own
// MaxBytes long before (record.DefaultMaxBytes).
const maxLine = 64 << 20

func open(path string, o Options) (source, error) {
	format := o.Format
	if format == "" {
		format = FormatJSONLines
		if strings.EqualFold(strings.TrimPrefix(extOf(path), "."), "csv") {
			format = FormatCSV
		}
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, &Error{Msg: err.Error()}
	}
	switch format {
	case FormatJSONLines:
		if o.Time != "" || o.Label != "" {
			f.Close()
			return nil, &Error{File: path, Msg: "--label and --time apply to CSV input only (JSON lines carry \"y\" and \"t\")"}
		}
		return &jsonLines{f: f, path: path, r: bufio.NewReaderSize(f, 1<<16)}, nil
	case FormatCSV:
		s, err := openCSV(f, path, o)
		if err != nil {
			f.Close()
			return nil, err
		}
		return s, nil
	}
	f.Close()
	return nil, &Error{Msg: fmt.Sprintf("unknown format %q (allowed: jsonl, csv)", format)}
}

func extOf(path string) string {
	if i := strings.LastIndexByte(path, '.'); i >= 0 && !strings.ContainsRune(path[i:], os.PathSeparator) {
		return path[i:]
	}
	return ""
}

// jsonLines reads one wire record per line; blank lines are skipped.
type jsonLines struct {
	f    *os.File
	path string
	r    *bufio.Reader
	line int
	buf  []byte
}

func (s *jsonLines) next() (int, []byte, error) {
	for {
		s.buf = s.buf[:0]
		for {
			chunk, err := s.r.ReadSlice('\n')
			s.buf = append(s.buf, chunk...)
			if len(s.buf) > maxLine {
				return 0, nil, &Error{File: s.path, Line: s.line + 1, Msg: "line longer than 64 MiB"}
			}
			if errors.Is(err, bufio.ErrBufferFull) {
				continue
			}
			if err != nil && !errors.Is(err, io.EOF) {
				return 0, nil, &Error{File: s.path, Line: s.line + 1, Msg: err.Error()}
			}
			if err != nil && len(s.buf) == 0 {
				return 0, nil, errEOF
			}
			break
		}
		s.line++
		msg := bytes.TrimSpace(s.buf)
		if len(msg) > 0 {
			return s.line, msg, nil
		}
	}
}

func (s *jsonLines) close() { s.f.Close() }

// csvRows reads a CSV file with a header row: the label column, an
// optional time column, and every other column with a number in it as a
// feature (a column without any number, such as an ID, is skipped).
type csvRows struct {
	f        *os.File
	path     string
	cr       *csv.Reader
	label    int
	time     int // −1 without
	cols     []int
	names    []string
	header   []string
	logistic bool
	rec      record.Record
	buf      []byte
}

func openCSV(f *os.File, path string, o Options) (*csvRows, error) {
	if o.Label == "" {
		return nil, &Error{File: path, Msg: "CSV input needs a label column (--label)"}
	}
	numeric, header, err := scanColumns(f, path)
	if err != nil {
		return nil, err
	}
	s := &csvRows{f: f, path: path, time: -1, header: header, logistic: o.Model.Logistic()}
	if s.label = slices.Index(header, o.Label); s.label < 0 {
		return nil, &Error{File: path, Line: 1, Msg: fmt.Sprintf("no label column %q (columns: %s)", o.Label, strings.Join(header, ", "))}
	}
	if o.Time != "" {
		if s.time = slices.Index(header, o.Time); s.time < 0 {
			return nil, &Error{File: path, Line: 1, Msg: fmt.Sprintf("no time column %q (columns: %s)", o.Time, strings.Join(header, ", "))}
		}
	}
	for j, name := range header {
		if j != s.label && j != s.time && numeric[j] {
			s.cols = append(s.cols, j)
			s.names = append(s.names, name)
		}
	}
	if len(s.cols) == 0 {
		return nil, &Error{File: path, Msg: "no numeric feature columns besides the label"}
	}
	if _, err := f.Seek(0, io.SeekStart); err != nil {
		return nil, &Error{File: path, Msg: err.Error()}
	}
	s.cr = csv.NewReader(bufio.NewReader(f))
	s.cr.ReuseRecord = true
	if _, err := s.cr.Read(); err != nil {
		return nil, csvError(path, err)
	}
	s.rec.X = make([]float64, len(s.cols))
	return s, nil
}

// scanColumns reads the header and reports which columns hold a number.
func scanColumns(f *os.File, path string) (numeric []bool, header []string, err error) {
	cr := csv.NewReader(bufio.NewReader(f))
	cr.ReuseRecord = true
	h, err := cr.Read()
	if errors.Is(err, io.EOF) {
		return nil, nil, &Error{File: path, Msg: "empty file"}
	}
	if err != nil {
		return nil, nil, csvError(path, err)
	}
	h[0] = strings.TrimPrefix(h[0], "\ufeff")
	seen := map[string]bool{}
	for i := range h {
		name := strings.TrimSpace(h[i])
		switch {
		case name == "":
			return nil, nil, &Error{File: path, Line: 1, Msg: fmt.Sprintf("column %d has no name", i+1)}
		case seen[name]:
			return nil, nil, &Error{File: path, Line: 1, Column: name, Msg: "appears twice in the header"}
		}
		seen[name] = true
		header = append(header, name)
	}
	numeric = make([]bool, len(header))
	for {
		row, err := cr.Read()
		if errors.Is(err, io.EOF) {
			return numeric, header, nil
		}
		if err != nil {
			return nil, nil, csvError(path, err)
		}
		for j, c := range row {
			if v, err := record.ParseCell(c); err == nil && !math.IsNaN(v) {
				numeric[j] = true
			}
		}
	}
}

func (s *csvRows) next() (int, []byte, error) {
	row, err := s.cr.Read()
	if errors.Is(err, io.EOF) {
		return 0, nil, errEOF
	}
	if err != nil {
		return 0, nil, csvError(s.path, err)
	}
	line, _ := s.cr.FieldPos(0)
	r := &s.rec
	if r.Y, err = record.ParseLabel(row[s.label], s.logistic); err != nil {
		return 0, nil, &Error{File: s.path, Line: line, Column: s.header[s.label], Msg: err.Error()}
	}
	for k, j := range s.cols {
		if r.X[k], err = record.ParseCell(row[j]); err != nil {
			return 0, nil, &Error{File: s.path, Line: line, Column: s.names[k], Msg: err.Error()}
		}
	}
	r.HasT = false
	if s.time >= 0 && strings.TrimSpace(row[s.time]) != "" {
		if r.T, err = parseTime(row[s.time]); err != nil {
			return 0, nil, &Error{File: s.path, Line: line, Column: s.header[s.time], Msg: err.Error()}
		}
		r.HasT = true
	}
	s.buf = record.AppendJSON(s.buf[:0], s.names, r)
	return line, s.buf, nil
}

func (s *csvRows) close() { s.f.Close() }

func csvError(path string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &Error{File: path, Line: pe.Line, Msg: pe.Err.Error()}
	}
	return &Error{File: path, Msg: err.Error()}
}

// parseTime reads an RFC 3339 time or integer Unix milliseconds.
func parseTime(s string) (int64, error) {
	s = strings.TrimSpace(s)
	if ms, err := strconv.ParseInt(s, 10, 64); err == nil {
		return ms, nil
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return 0, fmt.Errorf("not an RFC 3339 time or Unix milliseconds: %q", s)
	}
	return t.UnixMilli(), nil
}
