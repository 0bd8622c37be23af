package record

import (
	"bytes"
	"encoding/json"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"
)

// refDecoder is the test oracle: the record format implemented the slow and
// obvious way, with encoding/json doing all of the JSON (validation,
// unescaping, numbers) and the rules of doc.go applied by hand. Where a
// record has several problems it returns all the reasons it finds; the
// Decoder must report one of them.
type refDecoder struct {
	o     DecoderOptions
	max   int
	names []string
}

func newRef(o DecoderOptions) *refDecoder {
	r := &refDecoder{o: o, max: o.MaxFeatures}
	if r.max == 0 {
		r.max = DefaultMaxFeatures
	}
	if r.o.MaxBytes == 0 {
		r.o.MaxBytes = DefaultMaxBytes
	}
	r.names = append(append(r.names, o.Features...), o.Learned...)
	return r
}

// member is one key/value pair of an object, in document order.
type member struct {
	key string
	raw json.RawMessage
}

// members returns the members of a JSON object in document order, using
// encoding/json's tokenizer for the keys.
func members(raw []byte) []member {
	dec := json.NewDecoder(bytes.NewReader(raw))
	if tok, err := dec.Token(); err != nil || tok != json.Delim('{') {
		panic("members: not an object")
	}
	var ms []member
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			panic(err)
		}
		var v json.RawMessage
		if err := dec.Decode(&v); err != nil {
			panic(err)
		}
		ms = append(ms, member{tok.(string), v})
	}
	return ms
}

// kind returns the first byte of a JSON value.
func kind(raw []byte) byte { return bytes.TrimLeft(raw, " \t\r\n")[0] }

// strictRFC3339 is the grammar the decoder accepts; time.Parse decides the
// ranges and the value, except for the offset (see doc.go).
var strictRFC3339 = regexp.MustCompile(`^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d+)?(Z|[+-](\d\d):(\d\d))$`)

func refTime(s string) (int64, bool) {
	m := strictRFC3339.FindStringSubmatch(s)
	if m == nil {
		return 0, false
	}
	if m[3] != "" {
		if h, _ := strconv.Atoi(m[3]); h > 23 {
			return 0, false
		}
		if mm, _ := strconv.Atoi(m[4]); mm > 59 {
			return 0, false
		}
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return 0, false
	}
	return t.UnixMilli(), true
}

// refNumber decodes a JSON number with encoding/json; ok is false when it
// does not fit a float64.
func refNumber(raw []byte) (float64, bool) {
	var f float64
	return f, json.Unmarshal(raw, &f) == nil
}

func (d *refDecoder) decode(msg []byte) (Record, map[string]bool) {
	rec := Record{Y: math.NaN(), W: 1}
	bad := map[string]bool{}
	if len(msg) > d.o.MaxBytes {
		bad[ReasonOversize] = true
		return rec, bad
	}
	if !json.Valid(msg) || !utf8.Valid(msg) || kind(msg) != '{' {
		bad[ReasonMalformed] = true
		return rec, bad
	}
	top := map[string]json.RawMessage{}
	for _, m := range members(msg) {
		switch m.key {
		case "t", "y", "x", "v", "w", "key":
			if _, dup := top[m.key]; dup {
				bad[ReasonMalformed] = true
				return rec, bad
			}
			top[m.key] = m.raw
		}
	}
	present := func(k string) bool { raw, ok := top[k]; return ok && kind(raw) != 'n' }
	mark := len(d.names)
	rec.X = make([]float64, len(d.names))
	for j := range rec.X {
		rec.X[j] = math.NaN()
	}
	value := func(raw []byte) (float64, bool) {
		switch c := kind(raw); {
		case c == 'n':
			return math.NaN(), true
		case c == '-' || ('0' <= c && c <= '9'):
			f, ok := refNumber(raw)
			if !ok {
				bad[ReasonNotFinite] = true
			}
			return f, true
		}
		bad[ReasonType] = true
		return 0, false
	}
	if present("x") && present("v") {
		bad[ReasonMalformed] = true
		return rec, bad
	}
	if raw, ok := top["x"]; ok && kind(raw) == '{' {
		seen := map[string]bool{}
		for _, m := range members(raw) {
			if seen[m.key] {
				bad[ReasonMalformed] = true
				return rec, bad
			}
			seen[m.key] = true
		}
	}
	if raw, ok := top["x"]; ok && present("x") {
		if kind(raw) != '{' {
			bad[ReasonType] = true
		} else {
			for _, m := range members(raw) {
				j := slices.Index(d.names, m.key)
				if j < 0 && ValidName([]byte(m.key)) != "" {
					bad[ReasonName] = true
				} else if j < 0 && len(d.names) < d.max {
					j = len(d.names)
					d.names = append(d.names, m.key)
					rec.X = append(rec.X, math.NaN())
				} else if j < 0 && d.o.Missing == MissingReject {
					bad[ReasonTooManyFeatures] = true
				} // else: past the cap, the value is dropped
				if f, ok := value(m.raw); ok && j >= 0 {
					rec.X[j] = f
				}
			}
		}
	}
	if raw, ok := top["v"]; ok && present("v") {
		var elems []json.RawMessage
		if json.Unmarshal(raw, &elems) != nil {
			bad[ReasonType] = true
		} else {
			if len(d.o.Features) == 0 || len(elems) != len(d.o.Features) {
				bad[ReasonDimension] = true
			}
			for j, e := range elems {
				if f, ok := value(e); ok && j < len(d.o.Features) {
					rec.X[j] = f
				}
			}
		}
	}
	if raw, ok := top["t"]; ok && present("t") {
		switch c := kind(raw); {
		case c == '"':
			var s string
			_ = json.Unmarshal(raw, &s)
			if rec.T, rec.HasT = refTime(s); !rec.HasT {
				bad[ReasonTime] = true
			}
		case c == '-' || ('0' <= c && c <= '9'):
			n, err := strconv.ParseInt(string(bytes.TrimSpace(raw)), 10, 64)
			if err != nil {
				bad[ReasonTime] = true
			}
			rec.T, rec.HasT = n, err == nil
		default:
			bad[ReasonType] = true
		}
	}
	if raw, ok := top["y"]; ok && present("y") && !d.o.Unlabeled {
		var b bool
		switch c := kind(raw); {
		case d.o.Logistic && json.Unmarshal(raw, &b) == nil:
			rec.Y = 0
			if b {
				rec.Y = 1
			}
		case c == '-' || ('0' <= c && c <= '9'):
			y, ok := refNumber(raw)
			switch {
			case !ok:
				bad[ReasonNotFinite] = true
			case d.o.Logistic && y != 0 && y != 1:
				bad[ReasonLabel] = true
			case d.o.Logistic && y == 0:
				y = 0 // not -0
			}
			rec.Y = y
		default:
			bad[ReasonType] = true
		}
	}
	if raw, ok := top["w"]; ok && present("w") {
		switch c := kind(raw); {
		case c == '-' || ('0' <= c && c <= '9'):
			w, ok := refNumber(raw)
			if !ok {
				bad[ReasonNotFinite] = true
			} else if !(w > 0) {
				bad[ReasonWeight] = true
			}
			rec.W = w
		default:
			bad[ReasonType] = true
		}
	}
	if raw, ok := top["key"]; ok && present("key") {
		var s string
		if json.Unmarshal(raw, &s) != nil {
			bad[ReasonType] = true
		}
		rec.Key = []byte(s)
	}
	if len(bad) == 0 {
		switch {
		case !present("x") && !present("v"):
			bad[ReasonMissingFeature] = true
		case !d.o.Unlabeled && !present("y"):
			bad[ReasonLabel] = true
		case d.o.Missing == MissingReject && slices.ContainsFunc(rec.X, math.IsNaN):
			bad[ReasonMissingFeature] = true
		}
	}
	if len(bad) > 0 {
		d.names = d.names[:mark]
	}
	return rec, bad
}

// sameFloat reports whether a and b are the same float64, NaN equal to NaN.
func sameFloat(a, b float64) bool {
	return math.Float64bits(a) == math.Float64bits(b) || math.IsNaN(a) && math.IsNaN(b)
}

// diffRecord describes the first difference between two records, or "".
func diffRecord(got, want *Record) string {
	var b strings.Builder
	if len(got.X) != len(want.X) {
		b.WriteString("len(X) " + strconv.Itoa(len(got.X)) + " want " + strconv.Itoa(len(want.X)) + "; ")
	} else {
		for j := range got.X {
			if !sameFloat(got.X[j], want.X[j]) {
				b.WriteString("X[" + strconv.Itoa(j) + "] " + ff(got.X[j]) + " want " + ff(want.X[j]) + "; ")
			}
		}
	}
	if !sameFloat(got.Y, want.Y) {
		b.WriteString("Y " + ff(got.Y) + " want " + ff(want.Y) + "; ")
	}
	if !sameFloat(got.W, want.W) {
		b.WriteString("W " + ff(got.W) + " want " + ff(want.W) + "; ")
	}
	if got.HasT != want.HasT || got.T != want.T {
		b.WriteString("T " + strconv.FormatInt(got.T, 10) + strconv.FormatBool(got.HasT) +
			" want " + strconv.FormatInt(want.T, 10) + strconv.FormatBool(want.HasT) + "; ")
	}
	if !bytes.Equal(got.Key, want.Key) {
		b.WriteString("Key " + strconv.Quote(string(got.Key)) + " want " + strconv.Quote(string(want.Key)) + "; ")
	}
	return b.String()
}

func ff(f float64) string { return strconv.FormatFloat(f, 'g', -1, 64) }

// check decodes msg with both decoders and returns a description of any
// disagreement, or "".
func check(d *Decoder, ref *refDecoder, msg []byte) string {
	var got Record
	err := d.Decode(msg, &got)
	want, bad := ref.decode(msg)
	switch {
	case len(bad) == 0 && err != nil:
		return "decoder: " + err.Error() + ", reference accepts"
	case len(bad) > 0 && err == nil:
		return "decoder accepts, reference: " + strings.Join(keys(bad), ",")
	case len(bad) > 0:
		e, ok := err.(*Error)
		if !ok || !bad[e.Reason] {
			return "decoder: " + err.Error() + ", reference: " + strings.Join(keys(bad), ",")
		}
	default:
		if diff := diffRecord(&got, &want); diff != "" {
			return diff
		}
	}
	if !slices.Equal(d.Names(), ref.names) {
		return "names " + strings.Join(d.Names(), ",") + " want " + strings.Join(ref.names, ",")
	}
	return ""
}

func keys(m map[string]bool) []string {
	var ks []string
	for k := range m {
		ks = append(ks, k)
	}
	slices.Sort(ks)
	return ks
}
