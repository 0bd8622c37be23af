package record

import (
	"fmt"
	"math"
	"strconv"
	"unicode/utf16"
	"unicode/utf8"
)

// maxDepth is the deepest nesting of arrays and objects accepted, counting
// the record object itself as 1. It is the limit of encoding/json (Go 1.26,
// scanner.go maxNestingDepth), so both reject the same documents.
const maxDepth = 10000

// strSpecial marks the bytes that end the fast path of a string scan: the
// quote, the backslash, control characters (invalid in JSON strings) and the
// first byte of every multi-byte UTF-8 sequence (validated one by one).
var strSpecial = func() (t [256]bool) {
	for c := 0; c < 0x20; c++ {
		t[c] = true
	}
	for c := 0x80; c < 0x100; c++ {
		t[c] = true
	}
	t['"'], t['\\'] = true, true
	return t
}()

// scanner is a cursor over one message with a sticky syntax error.
type scanner struct {
	b       []byte
	i       int
	err     *Error                  // first syntax error; nil while the input is well-formed
	scratch []byte                  // unescaped strings; reused
	stack   [maxDepth/64 + 1]uint64 // container kinds while skipping: bit set = object
}

// fail records a syntax error at the cursor (first one wins) and returns false.
func (s *scanner) fail(what string) bool {
	if s.err == nil {
		if s.i >= len(s.b) {
			s.err = newError(ReasonMalformed, "unexpected end of input, %s", what)
		} else {
			s.err = newError(ReasonMalformed, "invalid character %q at offset %d, %s", s.b[s.i], s.i, what)
		}
	}
	return false
}

// ws skips JSON whitespace.
func (s *scanner) ws() {
	if s.i < len(s.b) && s.b[s.i] > ' ' {
		return // the common case: no whitespace at all
	}
	s.wsSlow()
}

func (s *scanner) wsSlow() {
	b, i := s.b, s.i
	for i < len(b) && (b[i] == ' ' || b[i] == '\t' || b[i] == '\n' || b[i] == '\r') {
		i++
	}
	s.i = i
}

// peek returns the byte at the cursor, or 0 at the end of input.
func (s *scanner) peek() byte {
	if s.i < len(s.b) {
		return s.b[s.i]
	}
	return 0
}

// expect consumes byte c or fails.
func (s *scanner) expect(c byte, what string) bool {
	if s.i < len(s.b) && s.b[s.i] == c {
		s.i++
		return true
	}
	return s.fail(what)
}

// match consumes the string "n" at the cursor if it is there verbatim
// (the opening quote, the bytes of n, the closing quote) and reports
// whether it did. n must hold no quote, backslash or control byte.
func (s *scanner) match(n string) bool {
	i := s.i + 1
	e := i + len(n)
	if e >= len(s.b) || s.b[s.i] != '"' || s.b[e] != '"' || string(s.b[i:e]) != n {
		return false
	}
	s.i = e + 1
	return true
}

// literal consumes true, false or null, whose first byte is at the cursor.
func (s *scanner) literal(word string) bool {
	if len(s.b)-s.i >= len(word) && string(s.b[s.i:s.i+len(word)]) == word {
		s.i += len(word)
		return true
	}
	return s.fail("in a literal")
}

// str consumes a string (the cursor is on its opening quote) and returns its
// unescaped content. The result aliases the input when the string holds no
// escape, and the scanner's scratch buffer otherwise; either way it is valid
// only until the next call.
func (s *scanner) str() ([]byte, bool) {
	s.i++ // opening quote
	start := s.i
	for s.i < len(s.b) {
		b, i := s.b, s.i
		for i < len(b) && !strSpecial[b[i]] {
			i++
		}
		s.i = i
		if i == len(b) {
			break
		}
		c := b[i]
		switch {
		case c == '"':
			s.i++
			return s.b[start : s.i-1], true
		case c == '\\':
			return s.unescape(start)
		case c < 0x20:
			return nil, s.fail("control character in a string")
		default:
			if !s.rune() {
				return nil, false
			}
		}
	}
	return nil, s.fail("in a string")
}

// rune consumes one multi-byte UTF-8 sequence, failing on invalid UTF-8.
func (s *scanner) rune() bool {
	r, n := utf8.DecodeRune(s.b[s.i:])
	if r == utf8.RuneError && n == 1 {
		return s.fail("invalid UTF-8")
	}
	s.i += n
	return true
}

// unescape finishes a string that has escapes; start is the index after the
// opening quote and the cursor is on the first backslash. Invalid or lone
// UTF-16 surrogates in \u escapes become U+FFFD, as in encoding/json.
func (s *scanner) unescape(start int) ([]byte, bool) {
	out := append(s.scratch[:0], s.b[start:s.i]...)
	for s.i < len(s.b) {
		c := s.b[s.i]
		switch {
		case c == '"':
			s.i++
			s.scratch = out
			return out, true
		case c == '\\':
			if s.i+1 >= len(s.b) {
				s.i++
				return nil, s.fail("in a string escape")
			}
			e := s.b[s.i+1]
			if e == 'u' {
				var ok bool
				if out, ok = s.unicode(out); !ok {
					return nil, false
				}
				continue
			}
			s.i++
			switch e {
			case '"', '\\', '/':
				out = append(out, e)
			case 'b':
				out = append(out, '\b')
			case 'f':
				out = append(out, '\f')
			case 'n':
				out = append(out, '\n')
			case 'r':
				out = append(out, '\r')
			case 't':
				out = append(out, '\t')
			default:
				return nil, s.fail("in a string escape")
			}
			s.i++
		case c < 0x20:
			return nil, s.fail("control character in a string")
		case c >= 0x80:
			j := s.i
			if !s.rune() {
				return nil, false
			}
			out = append(out, s.b[j:s.i]...)
		default:
			out = append(out, c)
			s.i++
		}
	}
	s.scratch = out
	return nil, s.fail("in a string")
}

// unicode consumes a \uXXXX escape (and its low surrogate, if it completes a
// pair) at the cursor and appends the rune to out.
func (s *scanner) unicode(out []byte) ([]byte, bool) {
	r := hex4(s.b[s.i+2:])
	if r < 0 {
		s.i += 2
		return out, s.fail("in a \\u escape")
	}
	s.i += 6
	if utf16.IsSurrogate(r) {
		var r2 rune = -1
		if len(s.b)-s.i >= 6 && s.b[s.i] == '\\' && s.b[s.i+1] == 'u' {
			r2 = hex4(s.b[s.i+2:])
		}
		if d := utf16.DecodeRune(r, r2); d != utf8.RuneError {
			s.i += 6
			return utf8.AppendRune(out, d), true
		}
		r = utf8.RuneError
	}
	return utf8.AppendRune(out, r), true
}

// hex4 decodes four hex digits at the start of b, or returns -1.
func hex4(b []byte) rune {
	if len(b) < 4 {
		return -1
	}
	var r rune
	for _, c := range b[:4] {
		switch {
		case '0' <= c && c <= '9':
			c -= '0'
		case 'a' <= c && c <= 'f':
			c = c - 'a' + 10
		case 'A' <= c && c <= 'F':
			c = c - 'A' + 10
		default:
			return -1
		}
		r = r<<4 | rune(c)
	}
	return r
}

// digits consumes a run of decimal digits and returns how many there were.
func (s *scanner) digits() int {
	j := s.i
	for s.i < len(s.b) && '0' <= s.b[s.i] && s.b[s.i] <= '9' {
		s.i++
	}
	return s.i - j
}

// number consumes a JSON number (the cursor is on '-' or a digit) and returns
// its value, its text, and whether the text has neither fraction nor
// exponent. A number too large for float64 is returned as ±Inf with ok true;
// the caller decides what that means.
func (s *scanner) number() (f float64, text []byte, integer, ok bool) {
	b, i := s.b, s.i // locals: the loops below are the decoder's hottest
	start := i
	neg := b[i] == '-'
	if neg {
		i++
	}
	// Integer part: 0 or [1-9][0-9]*.
	var mant uint64
	nd, exp := 0, 0 // significant digits seen, decimal exponent of mant
	switch {
	case i < len(b) && b[i] == '0':
		i++
	case i < len(b) && '1' <= b[i] && b[i] <= '9':
		j := i
		for ; i < len(b) && b[i]-'0' < 10; i++ {
			mant = mant*10 + uint64(b[i]-'0') // may wrap past 19 digits; redone below
		}
		nd = i - j
		if nd > 19 {
			mant = 0
			for k := j; k < j+19; k++ {
				mant = mant*10 + uint64(b[k]-'0')
			}
			exp = nd - 19
		}
	default:
		s.i = i
		return 0, nil, false, s.fail("in a number")
	}
	integer = true
	if i < len(b) && b[i] == '.' {
		integer = false
		i++
		if i == len(b) || b[i] < '0' || b[i] > '9' {
			s.i = i
			return 0, nil, false, s.fail("after a decimal point")
		}
		if nd > 0 && nd < 19 {
			// The common case: the digits extend a nonzero mantissa.
			j := i
			for ; i < len(b) && b[i]-'0' < 10 && i-j < 19-nd; i++ {
				mant = mant*10 + uint64(b[i]-'0')
			}
			exp -= i - j
			nd += i - j
		}
		for ; i < len(b) && '0' <= b[i] && b[i] <= '9'; i++ {
			d := b[i] - '0'
			if nd == 0 && d == 0 {
				exp-- // leading zero of the fraction
				continue
			}
			if nd < 19 {
				mant = mant*10 + uint64(d)
				exp--
			}
			nd++
		}
	}
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		integer = false
		i++
		esign := 1
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			if b[i] == '-' {
				esign = -1
			}
			i++
		}
		if i == len(b) || b[i] < '0' || b[i] > '9' {
			s.i = i
			return 0, nil, false, s.fail("in an exponent")
		}
		e := 0
		for ; i < len(b) && '0' <= b[i] && b[i] <= '9'; i++ {
			if e < 100000 {
				e = e*10 + int(b[i]-'0')
			}
		}
		exp += esign * e
	}
	s.i = i
	text = b[start:i]
	if nd <= 19 && mant <= 1<<53 && uint(-exp) < uint(len(pow10)) {
		// Inline fastFloat for 0 ≥ exp ≥ -22, the usual case.
		f := float64(mant)
		if exp != 0 {
			f /= pow10[-exp]
		}
		if neg {
			f = -f
		}
		return f, text, integer, true
	}
	if nd <= 19 {
		if f, exact := fastFloat(mant, exp); exact {
			if neg {
				f = -f
			}
			return f, text, integer, true
		}
	}
	// The slow path: correctly rounded by strconv. The conversion does not
	// allocate for texts of up to 32 bytes (the compiler's stack buffer).
	f, err := strconv.ParseFloat(string(text), 64)
	if err != nil && !math.IsInf(f, 0) { // only overflow is expected here
		return 0, nil, false, s.fail("in a number")
	}
	return f, text, integer, true
}

// quick consumes the most common numbers, -?(0|[1-9][0-9]*)(\.[0-9]+)?
// with at most 15 digits in all, and returns their value; for anything else
// it returns false without moving the cursor, and the caller falls back to
// number. With at most 15 digits the mantissa is below 2^53 and the scale
// at most 10^14, both exact, so the one division rounds correctly (the
// fast path of fastFloat) and the value is finite.
func (s *scanner) quick() (float64, bool) {
	b, i := s.b, s.i
	neg := false
	if i < len(b) && b[i] == '-' {
		neg = true
		i++
	}
	start := i
	var mant uint64
	for ; i < len(b) && b[i]-'0' < 10; i++ {
		mant = mant*10 + uint64(b[i]-'0')
	}
	n := i - start
	if n == 0 || n > 15 || (n > 1 && b[start] == '0') {
		return 0, false
	}
	f := float64(mant)
	if i < len(b) && b[i] == '.' {
		i++
		fs := i
		for ; i < len(b) && b[i]-'0' < 10; i++ {
			mant = mant*10 + uint64(b[i]-'0')
		}
		e := i - fs
		if e == 0 || n+e > 15 {
			return 0, false
		}
		f = float64(mant) / pow10[e]
	}
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		return 0, false
	}
	if neg {
		f = -f
	}
	s.i = i
	return f, true
}

// skip consumes one JSON value of any kind (the cursor is on its first
// byte), validating it. depth is the nesting depth of the container the
// value sits in. It is iterative, so hostile nesting cannot grow the stack.
func (s *scanner) skip(depth int) bool {
	level := 0 // containers opened by this call
	for {
		// A value starts at the cursor.
		s.ws()
		switch c := s.peek(); {
		case c == '{' || c == '[':
			if depth+level+1 > maxDepth {
				return s.fail(fmt.Sprintf("nesting deeper than %d", maxDepth))
			}
			s.i++
			if c == '{' {
				s.stack[level/64] |= 1 << (level % 64)
			} else {
				s.stack[level/64] &^= 1 << (level % 64)
			}
			level++
			s.ws()
			if (c == '{' && s.peek() == '}') || (c == '[' && s.peek() == ']') {
				s.i++
				level--
				break // an empty container is a complete value
			}
			if c == '{' && !s.key() {
				return false
			}
			continue // its first element or member value
		case c == '"':
			if _, ok := s.str(); !ok {
				return false
			}
		case c == 't':
			if !s.literal("true") {
				return false
			}
		case c == 'f':
			if !s.literal("false") {
				return false
			}
		case c == 'n':
			if !s.literal("null") {
				return false
			}
		case c == '-' || ('0' <= c && c <= '9'):
			if _, _, _, ok := s.number(); !ok {
				return false
			}
		default:
			return s.fail("looking for a value")
		}
		// A value just ended: close containers until one continues.
		for {
			if level == 0 {
				return true
			}
			obj := s.stack[(level-1)/64]&(1<<((level-1)%64)) != 0
			s.ws()
			c := s.peek()
			if c == ',' {
				s.i++
				if obj && !s.key() {
					return false
				}
				break
			}
			if (obj && c == '}') || (!obj && c == ']') {
				s.i++
				level--
				continue
			}
			return s.fail("after a value in an object or array")
		}
	}
}

// key consumes `ws "name" ws : ` inside an object being skipped.
func (s *scanner) key() bool {
	s.ws()
	if s.peek() != '"' {
		return s.fail("looking for a key")
	}
	if _, ok := s.str(); !ok {
		return false
	}
	s.ws()
	return s.expect(':', "after a key")
}
