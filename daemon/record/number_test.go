package record

import (
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// parseNumber runs the scanner's number parser on text, which must be
// one complete JSON number.
func parseNumber(text string) (float64, bool) {
	s := scanner{b: []byte(text)}
	f, _, _, ok := s.number()
	return f, ok && s.i == len(text)
}

// TestNumberMatchesStrconv checks that the fast path and its fallback give
// exactly strconv.ParseFloat's result, on chosen edge cases of the fast path
// and on random texts.
func TestNumberMatchesStrconv(t *testing.T) {
	cases := []string{
		"0", "-0", "0.0", "-0.0e-5", "0e99999", "1", "-1", "9007199254740992", "9007199254740993",
		"9007199254740991e22", "9007199254740992e-22", "1e22", "1e23", "1e37", "1e38", "123e30",
		"9007199254740993e-22", "1e-22", "1e-23", "0.1", "0.3", "2.2250738585072014e-308",
		"4.9e-324", "2.4e-324", "1e-400", "1.7976931348623157e308", "1.7976931348623159e308",
		"1e309", "-1e309", "0.000000000000000000000000000001", "12345678901234567890",
		"1234567890123456789", "0.1234567890123456789", "100000000000000000000000", "1E+2", "1e-0",
		"3.0000000000000004", "18014398509481985e-1", "4503599627370497.5",
	}
	rng := rand.New(rand.NewPCG(1, 2))
	for range 20000 {
		var text string
		switch rng.IntN(4) {
		case 0:
			text = strconv.FormatFloat(math.Float64frombits(rng.Uint64()), 'g', -1, 64)
		case 1:
			text = strconv.FormatInt(rng.Int64N(1<<60)>>rng.IntN(60), 10) + "e" + strconv.Itoa(rng.IntN(80)-40)
		case 2:
			text = strconv.FormatFloat(rng.Float64()*1000, 'f', rng.IntN(20), 64)
		default:
			text = strconv.FormatInt(rng.Int64N(1<<54), 10) + "." + strconv.Itoa(rng.IntN(1000)) + "e-" + strconv.Itoa(rng.IntN(25))
		}
		if text != "NaN" && text != "+Inf" && text != "-Inf" {
			cases = append(cases, text)
		}
	}
	for _, text := range cases {
		want, err := strconv.ParseFloat(text, 64)
		if err != nil && !math.IsInf(want, 0) {
			t.Fatalf("bad test case %q: %v", text, err)
		}
		got, ok := parseNumber(text)
		if !ok || math.Float64bits(got) != math.Float64bits(want) {
			t.Errorf("%s: got %v (ok %v), want %v", text, got, ok, want)
		}
	}
}

func TestNumberSyntax(t *testing.T) {
	for _, text := range []string{"-", "01", "1.", ".5", "+1", "1e", "1e+", "1.e5", "-a", "0x10", "--1"} {
		if _, ok := parseNumber(text); ok {
			t.Errorf("%q accepted", text)
		}
	}
}

// TestFastFloat checks the exactness bounds of the fast path itself.
func TestFastFloat(t *testing.T) {
	for _, tc := range []struct {
		mant  uint64
		exp   int
		exact bool
	}{
		{1 << 53, 22, true},
		{1<<53 + 1, 0, false},
		{1, 37, true},
		{1, 38, false},
		{1 << 50, 23, false},
		{1, -22, true},
		{1, -23, false},
		{0, 400, true},
	} {
		f, exact := fastFloat(tc.mant, tc.exp)
		if exact != tc.exact {
			t.Errorf("fastFloat(%d, %d) exact = %v, want %v", tc.mant, tc.exp, exact, tc.exact)
			continue
		}
		want, _ := strconv.ParseFloat(strconv.FormatUint(tc.mant, 10)+"e"+strconv.Itoa(tc.exp), 64)
		if exact && f != want {
			t.Errorf("fastFloat(%d, %d) = %v, want %v", tc.mant, tc.exp, f, want)
		}
	}
}
