package record

import (
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// TestQuickNumber checks the number fast path against number: same value
// (bit for bit), same cursor, and a refusal for everything it does not cover.
func TestQuickNumber(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	texts := []string{"0", "-0", "0.0", "-0.5", "1", "9007199254740993", "123456789012345",
		"1234567890123456", "0.000000000000001", "0.1234567890123456", "00", "01", "-", "1.", "1.e5",
		"1e5", "1E-5", "2.5e", "312.4", "-41.25", "1.7976931348623157", "99999999999999.9"}
	const digits = "0123456789"
	for range 200000 {
		var b []byte
		if rng.IntN(2) == 0 {
			b = append(b, '-')
		}
		n := 1 + rng.IntN(30)
		for k := range n {
			b = append(b, digits[rng.IntN(10)])
			if k < n-1 && rng.IntN(6) == 0 && !contains(b, '.') {
				b = append(b, '.')
			}
		}
		if rng.IntN(20) == 0 {
			b = append(b, 'e', '1')
		}
		texts = append(texts, string(b))
	}
	for _, text := range texts {
		for _, tail := range []string{"", ",", "}", " ", "x"} {
			in := []byte(text + tail)
			if in[0] != '-' || len(in) > 1 {
				s := scanner{b: in}
				g, _, _, ok := s.number()
				if want, err := strconv.ParseFloat(string(in[:s.i]), 64); ok && err == nil && math.Float64bits(g) != math.Float64bits(want) {
					t.Fatalf("%q: number %v, strconv %v", in, g, want)
				}
			}
			q := scanner{b: in}
			f, ok := q.quick()
			if !ok {
				if q.i != 0 {
					t.Fatalf("%q: cursor moved to %d on refusal", in, q.i)
				}
				continue
			}
			s := scanner{b: in}
			g, _, _, ok2 := s.number()
			if !ok2 || s.err != nil {
				t.Fatalf("%q: quick accepted what number rejects", in)
			}
			if q.i != s.i {
				t.Fatalf("%q: quick ends at %d, number at %d", in, q.i, s.i)
			}
			want, err := strconv.ParseFloat(string(in[:s.i]), 64)
			if err != nil {
				t.Fatalf("%q: %v", in, err)
			}
			if math.Float64bits(f) != math.Float64bits(want) || math.Float64bits(g) != math.Float64bits(want) {
				t.Fatalf("%q: quick %v, number %v, strconv %v", in, f, g, want)
			}
		}
	}
}

func contains(b []byte, c byte) bool {
	for _, x := range b {
		if x == c {
			return true
		}
	}
	return false
}
