package record

import (
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"
)

// field parses the value of top-level field f (0: unknown, skipped). It adds
// f to have unless the value is null. It returns false on a syntax error.
func (d *Decoder) field(f fields, r *Record, have *fields) bool {
	s := &d.s
	c := s.peek()
	if c == 'n' && f != 0 {
		return s.literal("null") // null: as if absent
	}
	*have |= f
	switch {
	case f == 0 || f == fieldY && d.unlabeled:
		return s.skip(1)
	case f == fieldX:
		if c != '{' {
			d.semantic(ReasonType, `"x" must be an object`)
			return s.skip(1)
		}
		return d.named(r)
	case f == fieldV:
		if c != '[' {
			d.semantic(ReasonType, `"v" must be an array`)
			return s.skip(1)
		}
		return d.array(r)
	case f == fieldKey:
		if c != '"' {
			d.semantic(ReasonType, `"key" must be a string`)
			return s.skip(1)
		}
		key, ok := s.str()
		r.Key = append(r.Key[:0], key...)
		return ok
	case f == fieldT:
		return d.time(r)
	case f == fieldY:
		return d.label(r)
	default: // fieldW
		w, ok, isNum := d.float("w")
		if ok && isNum && !(w > 0) {
			d.semantic(ReasonWeight, `"w" is %g, want > 0 (absent means 1)`, w)
		}
		r.W = w
		return ok
	}
}

// float parses a number field; a value of another type is a type error and
// is skipped. isNum reports whether the value was a finite number.
func (d *Decoder) float(name string) (f float64, ok, isNum bool) {
	s := &d.s
	if c := s.peek(); c != '-' && (c < '0' || c > '9') {
		d.semantic(ReasonType, "%q must be a number", name)
		return 0, s.skip(1), false
	}
	f, text, _, ok := s.number()
	if ok && math.IsInf(f, 0) {
		d.semantic(ReasonNotFinite, "%q is %s, beyond float64", name, quote(text))
		return f, ok, false
	}
	return f, ok, ok
}

// label parses "y".
func (d *Decoder) label(r *Record) bool {
	s := &d.s
	if d.logistic {
		switch s.peek() {
		case 't':
			r.Y = 1
			return s.literal("true")
		case 'f':
			r.Y = 0
			return s.literal("false")
		}
	}
	y, ok, isNum := d.float("y")
	if d.logistic && isNum && y != 0 && y != 1 {
		d.semantic(ReasonLabel, `"y" is %g, want 0, 1, true or false`, y)
	}
	r.Y = y
	if d.logistic && y == 0 {
		r.Y = 0 // not -0
	}
	return ok
}

// time parses "t": an RFC 3339 string or integer Unix milliseconds.
func (d *Decoder) time(r *Record) bool {
	s := &d.s
	switch c := s.peek(); {
	case c == '"':
		text, ok := s.str()
		if !ok {
			return false
		}
		if r.T, r.HasT = parseRFC3339(text); !r.HasT {
			d.semantic(ReasonTime, `"t" is %s, not an RFC 3339 date-time`, quote(text))
		}
		return true
	case c == '-' || ('0' <= c && c <= '9'):
		_, text, integer, ok := s.number()
		if !ok {
			return false
		}
		if integer {
			r.T, r.HasT = parseMillis(text)
		}
		if !r.HasT {
			d.semantic(ReasonTime, `"t" is %s, not integer Unix milliseconds`, quote(text))
		}
		return true
	}
	d.semantic(ReasonType, `"t" must be a string or a number`)
	return s.skip(1)
}

// parseMillis parses the text of a JSON integer as an int64.
func parseMillis(text []byte) (int64, bool) {
	neg := text[0] == '-'
	if neg {
		text = text[1:]
	}
	var u uint64
	for _, c := range text {
		if u > (math.MaxUint64-9)/10 {
			return 0, false
		}
		u = u*10 + uint64(c-'0')
	}
	switch {
	case !neg && u <= math.MaxInt64:
		return int64(u), true
	case neg && u <= 1<<63:
		return int64(-u), true // wraps to MinInt64 at 1<<63, as intended
	}
	return 0, false
}

// named parses the "x" object; the cursor is on '{'.
func (d *Decoder) named(r *Record) bool {
	s := &d.s
	s.i++
	s.ws()
	if s.peek() == '}' {
		s.i++
		return true
	}
	for {
		var name []byte // on the fast path, only made when needed
		var j int
		at, fast := s.i, false
		if g := d.guess; g < len(d.names) && d.plain[g] && s.match(d.names[g]) {
			// Fast path: the channel expected next, verbatim in the input.
			// str would return the same bytes, and lookup the same index.
			j, fast = g, true
			d.guess = g + 1
			if d.seen[j] == d.gen {
				d.duplicate(s.b[at+1 : s.i-1])
			}
			d.seen[j] = d.gen
			d.last[j] = d.count + 1
		} else {
			if s.peek() != '"' {
				return s.fail("looking for a channel name")
			}
			var ok bool
			if name, ok = s.str(); !ok {
				return false
			}
			j = d.lookup(name, r)
		}
		if s.i < len(s.b) && s.b[s.i] == ':' {
			s.i++
		} else {
			s.ws()
			if !s.expect(':', "after a channel name") {
				return false
			}
		}
		s.ws()
		if f, ok := s.quick(); ok { // value's fast path, without the call
			if j >= 0 {
				r.X[j] = f
			}
		} else {
			if fast {
				name = s.b[at+1 : at+1+len(d.names[j])]
			}
			if !d.value(j, name, 0, r) {
				return false
			}
		}
		s.ws()
		if s.peek() == ',' {
			s.i++
			s.ws()
			continue
		}
		return s.expect('}', `after a value in "x"`)
	}
}

// isPlain reports whether a channel name appears verbatim, unescaped, in
// the JSON string that encodes it: valid UTF-8 with no quote, backslash or
// control byte.
func isPlain(name string) bool {
	for i := 0; i < len(name); i++ {
		if c := name[i]; c < 0x20 || c == '"' || c == '\\' {
			return false
		}
	}
	return utf8.ValidString(name)
}

// lookup returns the index of a channel name, learning it if it is new and
// the cap allows; -1 if the value is to be skipped.
func (d *Decoder) lookup(name []byte, r *Record) int {
	j := d.guess
	if j >= len(d.names) || d.names[j] != string(name) || len(name) == 0 { // "" is a free slot, never a name
		var ok bool
		if j, ok = d.index[string(name)]; !ok {
			return d.learn(name, r)
		}
	}
	d.guess = j + 1
	if d.seen[j] == d.gen {
		d.duplicate(name)
	}
	d.seen[j] = d.gen
	d.last[j] = d.count + 1
	return j
}

// MaxNameBytes is the longest channel name the decoder learns.
const MaxNameBytes = 256

// ValidName reports why a new channel name cannot be learned, or "" when it
// can: it must be 1 to MaxNameBytes bytes of valid UTF-8 without control
// characters and without U+FFFD, which stands in for invalid UTF-8 and
// lone UTF-16 surrogates in the JSON text (names that differ only there
// would otherwise merge into one channel). Such a name would also make the
// model document unwritable.
func ValidName(name []byte) string {
	switch {
	case len(name) == 0:
		return "is empty"
	case len(name) > MaxNameBytes:
		return fmt.Sprintf("is %d bytes long (at most %d)", len(name), MaxNameBytes)
	case !utf8.Valid(name):
		return "is not valid UTF-8"
	}
	for _, c := range string(name) {
		switch {
		case c < 0x20 || c == 0x7f || c >= 0x80 && c < 0xa0:
			return "holds a control character"
		case c == utf8.RuneError:
			return "holds U+FFFD (invalid UTF-8 or a lone surrogate in the JSON text)"
		}
	}
	return ""
}

// learn adds a new channel name, or records why it cannot and returns -1.
func (d *Decoder) learn(name []byte, r *Record) int {
	if why := ValidName(name); why != "" {
		if d.err == nil {
			d.semantic(ReasonName, "new channel name %s %s", quote(name), why)
		}
		d.refused(name)
		return -1
	}
	if d.err == nil && d.nfree > 0 {
		return d.reuse(name)
	}
	if d.err == nil && len(d.names) < d.max {
		j := len(d.names)
		n := string(name)
		d.names = append(d.names, n)
		d.index[n] = j
		d.seen = append(d.seen, d.gen)
		d.last = append(d.last, d.count+1)
		d.plain = append(d.plain, isPlain(n))
		d.guess = j + 1
		r.X = append(r.X, math.NaN())
		return j
	}
	if d.err == nil && d.reject {
		d.semantic(ReasonTooManyFeatures, "new channel %s past the cap of %d features", quote(name), d.max)
	}
	if _, dup := d.over[string(name)]; d.err == nil && !dup {
		d.drops++ // the cap is reached: the value is dropped, the record kept
	}
	d.refused(name)
	return -1
}

// refused notes a name the record could not learn (the record is
// rejected), to keep finding duplicates all the same.
func (d *Decoder) refused(name []byte) {
	if _, dup := d.over[string(name)]; dup {
		d.duplicate(name)
		return
	}
	if d.over == nil {
		d.over = make(map[string]struct{})
	}
	d.over[string(name)] = struct{}{}
}

func (d *Decoder) duplicate(name []byte) {
	if d.bad == nil {
		d.bad = newError(ReasonMalformed, `duplicate channel %s in "x"`, quote(name))
	}
}

// value parses one channel value (number or null) into X[j]; j < 0 skips
// it. name is the channel name, or nil for element pos of "v"; it is only
// used in error details.
func (d *Decoder) value(j int, name []byte, pos int, r *Record) bool {
	s := &d.s
	switch c := s.peek(); {
	case c == 'n':
		return s.literal("null")
	case c == '-' || ('0' <= c && c <= '9'):
		if f, ok := s.quick(); ok {
			if j >= 0 {
				r.X[j] = f
			}
			return true
		}
		f, text, _, ok := s.number()
		if ok && math.IsInf(f, 0) {
			d.semantic(ReasonNotFinite, "%s is %s, beyond float64", where(name, pos), quote(text))
		}
		if j >= 0 {
			r.X[j] = f
		}
		return ok
	}
	d.semantic(ReasonType, "%s must be a number or null", where(name, pos))
	return s.skip(2)
}

// where names a channel value in an error detail.
func where(name []byte, pos int) string {
	if name == nil {
		return `"v"[` + strconv.Itoa(pos) + "]"
	}
	return "channel " + quote(name)
}

// array parses the "v" array; the cursor is on '['.
func (d *Decoder) array(r *Record) bool {
	s := &d.s
	if d.fixed == 0 {
		d.semantic(ReasonDimension, `"v" needs a fixed feature list`)
	}
	s.i++
	s.ws()
	n := 0
	if s.peek() == ']' {
		s.i++
	} else {
		for {
			j := n
			if j >= d.fixed {
				j = -1
			}
			if !d.value(j, nil, n, r) {
				return false
			}
			n++
			s.ws()
			if s.peek() == ',' {
				s.i++
				s.ws()
				continue
			}
			if !s.expect(']', `after a value in "v"`) {
				return false
			}
			break
		}
	}
	if d.fixed > 0 && n != d.fixed {
		d.semantic(ReasonDimension, `"v" has %d values, want %d`, n, d.fixed)
	}
	return true
}
