package record

import (
	"math"

	"lariat/online"
)

// Record is one decoded record. Decode reuses the capacity of X and Key.
type Record struct {
	X    []float64 // by the decoder's feature order (Names); NaN = missing
	Y    float64   // label: finite; 0 or 1 for a logistic decoder; NaN when unlabeled
	W    float64   // weight: finite and > 0 from Decode, 1 when absent; 0 (the zero value) reads as 1, as in online.Record
	T    int64     // Unix milliseconds; valid when HasT
	Key  []byte    // "key", empty when absent
	HasT bool      // "t" was present
}

// Learn returns r as the learner's record: the one place where the wire
// record becomes an online.Record. X is shared, not copied. The weight has
// one meaning on both sides: positive, with 0 (Go's zero value) read as 1.
// T is r.T when the record carried a time and 0 (no time) otherwise.
func (r *Record) Learn() online.Record {
	o := online.Record{X: r.X, Y: r.Y, W: r.W}
	if r.HasT {
		o.T = r.T
	}
	return o
}

// Decoder decodes wire records into caller-owned Records. It learns channel
// names from the named form and remembers them. A Decoder is not safe for
// concurrent use; one goroutine owns it (one per model).
type Decoder struct {
	fixed     int // len(Features): the length of the "v" form
	max       int
	maxBytes  int
	logistic  bool
	reject    bool
	unlabeled bool

	names []string       // feature order; never reordered, only appended
	plain []bool         // plain[j]: names[j] is valid UTF-8 without '"', '\\' or control bytes, so it appears verbatim in a string
	index map[string]int // name -> position in names
	mark  int            // len(names) before the current Decode
	seen  []uint32       // seen[j] == gen: feature j occurred in this record
	gen   uint32
	guess int // the next feature index expected in "x"

	s    scanner
	bad  *Error              // first structural error (duplicate, both "x" and "v") of the record
	err  *Error              // first other semantic error of the record
	over map[string]struct{} // names not learned in this record, for duplicate detection

	// Slots (slots.go): the decode count a slot's name was last carried
	// at, the decodes after which an unseen learned name frees its slot (0:
	// never), the free slots, whether a returned Names slice shares the
	// names array (so a change to an existing slot copies it first), the
	// slots this record reused (rollback), and the counts.
	last      []uint64
	count     uint64
	freeAfter uint64
	nfree     int
	shared    bool
	reused    []int
	drops     uint64 // names this record dropped past the cap
	dropped   uint64
	freed     uint64
}

// NewDecoder returns a Decoder. It panics if o.Validate() fails.
func NewDecoder(o *DecoderOptions) *Decoder {
	if err := o.Validate(); err != nil {
		panic(err)
	}
	if o == nil {
		o = &DecoderOptions{}
	}
	d := &Decoder{
		fixed:     len(o.Features),
		max:       o.MaxFeatures,
		maxBytes:  o.MaxBytes,
		logistic:  o.Logistic,
		reject:    o.Missing == MissingReject,
		unlabeled: o.Unlabeled,
		index:     make(map[string]int),
		freeAfter: uint64(o.FreeAfter),
	}
	if d.max == 0 {
		d.max = DefaultMaxFeatures
	}
	if d.maxBytes == 0 {
		d.maxBytes = DefaultMaxBytes
	}
	for _, list := range [][]string{o.Features, o.Learned} {
		for _, name := range list {
			if name == "" {
				d.nfree++
			} else {
				d.index[name] = len(d.names)
			}
			d.names = append(d.names, name)
			d.seen = append(d.seen, 0)
			d.last = append(d.last, 0)
			d.plain = append(d.plain, name != "" && isPlain(name))
		}
	}
	return d
}

// Names returns the feature order: the fixed Features, then Learned, then
// names in order of first appearance, each in its slot; "" marks a free
// slot (see DecoderOptions.FreeAfter), which a later name may take. The
// slice is shared and read-only; later Decode calls never change the
// elements of a slice already returned (a slot that changes hands does so
// in a copy).
func (d *Decoder) Names() []string {
	d.shared = true
	return d.names[:len(d.names):len(d.names)]
}

// Features returns the number of features, len(Names()).
func (d *Decoder) Features() int { return len(d.names) }

// Decode decodes msg into r; it returns nil or an *Error. On success r.X has
// length Features() (at the end of the call) and NaN marks missing values.
// On error r's contents are unspecified and the decoder is unchanged: names
// a rejected record introduced are forgotten. Decode keeps no reference to
// msg. Once the names are learned Decode does not allocate, except to
// return an error and for a number longer than 32 bytes outside the exact
// fast path, which strconv parses from a heap copy.
func (d *Decoder) Decode(msg []byte, r *Record) error {
	if len(msg) > d.maxBytes {
		return newError(ReasonOversize, "%d bytes, more than %d", len(msg), d.maxBytes)
	}
	d.begin(msg, r)
	have := d.object(r)
	d.s.b = nil
	// A broken or ambiguous message has no trustworthy fields: syntax
	// errors first, then duplicates, then the rest.
	err := d.s.err
	if err == nil {
		err = d.bad
	}
	if err == nil {
		err = d.err
	}
	if err == nil {
		err = d.finish(r, have)
	}
	if err != nil {
		d.rollback()
		return err // never a nil *Error in a non-nil interface
	}
	d.commit()
	return nil
}

// begin resets the per-record state.
func (d *Decoder) begin(msg []byte, r *Record) {
	d.s.b, d.s.i, d.s.err = msg, 0, nil
	d.bad, d.err = nil, nil
	d.mark = len(d.names)
	d.reused, d.drops = d.reused[:0], 0
	d.guess = 0
	d.gen++
	if d.gen == 0 { // wrapped: old stamps could collide
		clear(d.seen)
		d.gen = 1
	}
	n := len(d.names)
	if cap(r.X) < n {
		r.X = make([]float64, n)
	}
	r.X = r.X[:n]
	for j := range r.X {
		r.X[j] = math.NaN()
	}
	r.Y, r.W, r.T, r.HasT = math.NaN(), 1, 0, false
	r.Key = r.Key[:0]
}

// rollback forgets the names learned by a rejected record.
func (d *Decoder) rollback() {
	for _, name := range d.names[d.mark:] {
		delete(d.index, name)
	}
	clear(d.names[d.mark:]) // drop references for the collector
	d.names = d.names[:d.mark]
	d.seen = d.seen[:d.mark]
	d.last = d.last[:d.mark]
	d.plain = d.plain[:d.mark]
	for _, j := range d.reused { // the array was copied before reuse: no snapshot holds it
		delete(d.index, d.names[j])
		d.names[j], d.plain[j] = "", false
		d.nfree++
	}
	if len(d.over) > 64 {
		d.over = nil // do not keep a large map for a hostile record
	}
	clear(d.over)
}

// semantic records the first semantic error of the record.
func (d *Decoder) semantic(reason, format string, args ...any) {
	if d.err == nil {
		d.err = newError(reason, format, args...)
	}
}

// finish applies the checks that need the whole record.
func (d *Decoder) finish(r *Record, have fields) *Error {
	if have&(fieldX|fieldV) == 0 {
		return newError(ReasonMissingFeature, `record has neither "x" nor "v"`)
	}
	if !d.unlabeled && have&fieldY == 0 {
		return newError(ReasonLabel, `missing "y"`)
	}
	if d.reject {
		for j, v := range r.X {
			if math.IsNaN(v) {
				return newError(ReasonMissingFeature, "channel %s is missing (policy reject)", quote([]byte(d.names[j])))
			}
		}
	}
	return nil
}

// fields is a set of the top-level fields present (not null) in a record.
type fields uint8

const (
	fieldT fields = 1 << iota
	fieldY
	fieldX
	fieldV
	fieldW
	fieldKey
)

// object parses the record object and returns the fields it set.
func (d *Decoder) object(r *Record) (have fields) {
	s := &d.s
	s.ws()
	if s.peek() != '{' {
		if len(s.b) == 0 {
			s.fail("empty message")
		} else {
			s.fail("a record is a JSON object")
		}
		return 0
	}
	s.i++
	var present fields // keys present, null or not, for duplicate detection
	s.ws()
	if s.peek() == '}' {
		s.i++
	} else {
		for {
			if s.peek() != '"' {
				s.fail("looking for a key")
				return have
			}
			key, ok := s.str()
			if !ok {
				return have
			}
			f := fieldOf(key)
			if f != 0 && present&f != 0 && d.bad == nil {
				d.bad = newError(ReasonMalformed, "duplicate key %s", quote(key))
			}
			present |= f
			s.ws()
			if !s.expect(':', "after a key") {
				return have
			}
			s.ws()
			if !d.field(f, r, &have) {
				return have
			}
			s.ws()
			if s.peek() == ',' {
				s.i++
				s.ws()
				continue
			}
			if !s.expect('}', "after an object member") {
				return have
			}
			break
		}
	}
	s.ws()
	if s.i != len(s.b) {
		s.fail("after the record object")
	}
	if have&fieldX != 0 && have&fieldV != 0 && d.bad == nil {
		d.bad = newError(ReasonMalformed, `record has both "x" and "v"`)
	}
	return have
}

// fieldOf maps a top-level key to its field, or 0 for an unknown key.
func fieldOf(key []byte) fields {
	switch string(key) {
	case "t":
		return fieldT
	case "y":
		return fieldY
	case "x":
		return fieldX
	case "v":
		return fieldV
	case "w":
		return fieldW
	case "key":
		return fieldKey
	}
	return 0
}
