package record

import (
	"math"
	"strconv"
	"unicode/utf8"
)

// AppendJSON appends r in the named form to dst and returns the extended
// buffer; it does not allocate when dst has room. names[j] names r.X[j]; it
// panics if len(names) < len(r.X).
//
// JSON has no NaN or infinity, so non-finite values are left out: a
// non-finite X[j] omits the channel (missing), a non-finite Y omits "y" (an
// unlabeled record) and a non-finite W omits "w". W = 1, the default, and
// W = 0, Go's zero value that Record and online.Record both read as 1, are
// omitted too, as are an empty Key and T when HasT is false. T is written
// as an RFC 3339 string in UTC with milliseconds, or as integer Unix
// milliseconds outside the years 0000-9999. Numbers use the shortest text
// that round-trips. Decoding the output with a Decoder that knows names
// gives back r.
func AppendJSON(dst []byte, names []string, r *Record) []byte {
	if len(names) < len(r.X) {
		panic("record: AppendJSON: fewer names than values")
	}
	dst = append(dst, '{')
	sep := false
	if r.HasT {
		dst = append(dst, `"t":`...)
		if r.T >= minRFC3339 && r.T <= maxRFC3339 {
			dst = appendRFC3339(dst, r.T)
		} else {
			dst = strconv.AppendInt(dst, r.T, 10)
		}
		sep = true
	}
	if finite(r.Y) {
		if sep {
			dst = append(dst, ',')
		}
		dst = append(dst, `"y":`...)
		dst = appendFloat(dst, r.Y)
		sep = true
	}
	if sep {
		dst = append(dst, ',')
	}
	dst = append(dst, `"x":{`...)
	first := true
	for j, v := range r.X {
		if !finite(v) {
			continue
		}
		if !first {
			dst = append(dst, ',')
		}
		first = false
		dst = appendString(dst, names[j])
		dst = append(dst, ':')
		dst = appendFloat(dst, v)
	}
	dst = append(dst, '}')
	if finite(r.W) && r.W != 1 && r.W != 0 {
		dst = append(dst, `,"w":`...)
		dst = appendFloat(dst, r.W)
	}
	if len(r.Key) > 0 {
		dst = append(dst, `,"key":`...)
		dst = appendString(dst, r.Key)
	}
	return append(dst, '}')
}

func finite(f float64) bool { return !math.IsNaN(f) && !math.IsInf(f, 0) }

// appendFloat formats a finite f as encoding/json does (Go 1.26,
// encode.go floatEncoder): shortest round-trip digits, plain notation for
// 1e-6 ≤ |f| < 1e21, exponent notation otherwise.
func appendFloat(dst []byte, f float64) []byte {
	abs := math.Abs(f)
	format := byte('f')
	if abs != 0 && (abs < 1e-6 || abs >= 1e21) {
		format = 'e'
	}
	dst = strconv.AppendFloat(dst, f, format, -1, 64)
	if format == 'e' { // e-09 -> e-9
		if n := len(dst); n >= 4 && dst[n-4] == 'e' && dst[n-3] == '-' && dst[n-2] == '0' {
			dst[n-2] = dst[n-1]
			dst = dst[:n-1]
		}
	}
	return dst
}

const hexDigits = "0123456789abcdef"

// appendString appends s as a JSON string: quote, backslash and control
// characters escaped, invalid UTF-8 replaced by U+FFFD.
func appendString[S string | []byte](dst []byte, s S) []byte {
	dst = append(dst, '"')
	start := 0
	for i := 0; i < len(s); {
		c := s[i]
		if c >= 0x20 && c != '"' && c != '\\' && c < utf8.RuneSelf {
			i++
			continue
		}
		if c >= utf8.RuneSelf {
			var buf [utf8.UTFMax]byte
			k := copy(buf[:], s[i:])
			r, n := utf8.DecodeRune(buf[:k])
			if r == utf8.RuneError && n == 1 {
				dst = append(dst, s[start:i]...)
				dst = append(dst, `\ufffd`...)
				i++
				start = i
				continue
			}
			i += n
			continue
		}
		dst = append(dst, s[start:i]...)
		switch c {
		case '"', '\\':
			dst = append(dst, '\\', c)
		case '\n':
			dst = append(dst, '\\', 'n')
		case '\r':
			dst = append(dst, '\\', 'r')
		case '\t':
			dst = append(dst, '\\', 't')
		default:
			dst = append(dst, '\\', 'u', '0', '0', hexDigits[c>>4], hexDigits[c&0xf])
		}
		i++
		start = i
	}
	dst = append(dst, s[start:]...)
	return append(dst, '"')
}
