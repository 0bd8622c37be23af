package record

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"
)

// gen writes random records as raw JSON text, exercising the corners of the
// format: every field order, whitespace everywhere, escapes in every string,
// numbers in every notation, unknown fields with nested values.
type gen struct {
	rng      *rand.Rand
	pool     []string // channel names for "x"
	fixed    int      // length of "v"; 0 = never use "v"
	logistic bool
	valid    bool // only records that should decode
	complete bool // every channel present and not null (for the reject policy)
}

func (g *gen) ws() string {
	switch g.rng.IntN(6) {
	case 0:
		return " "
	case 1:
		return "\n\t "
	case 2:
		return "\r\n"
	}
	return ""
}

// str writes s as a JSON string, escaping characters at random.
func (g *gen) str(s string) string {
	var b strings.Builder
	b.WriteByte('"')
	for _, r := range s {
		switch {
		case r == '"' || r == '\\':
			if g.rng.IntN(2) == 0 {
				b.WriteString(fmt.Sprintf(`\u%04x`, r))
			} else {
				b.WriteByte('\\')
				b.WriteRune(r)
			}
		case r < 0x20:
			b.WriteString(fmt.Sprintf(`\u%04X`, r))
		case r > 0xffff && g.rng.IntN(2) == 0: // surrogate pair
			r1, r2 := (r-0x10000)>>10+0xd800, (r-0x10000)&0x3ff+0xdc00
			b.WriteString(fmt.Sprintf(`\u%04x\u%04x`, r1, r2))
		case g.rng.IntN(8) == 0 && r <= 0xffff:
			b.WriteString(fmt.Sprintf(`\u%04x`, r))
		case r == '/' && g.rng.IntN(2) == 0:
			b.WriteString(`\/`)
		default:
			b.WriteRune(r)
		}
	}
	b.WriteByte('"')
	return b.String()
}

// number writes a random finite number in a random notation.
func (g *gen) number() string {
	switch g.rng.IntN(6) {
	case 0: // small integer
		return strconv.Itoa(g.rng.IntN(2001) - 1000)
	case 1: // decimal with few digits, the common sensor case
		return strconv.FormatFloat(float64(g.rng.IntN(2000000)-1000000)/1000, 'f', -1, 64)
	case 2: // any float64 bit pattern, shortest form
		f := math.Float64frombits(g.rng.Uint64())
		if math.IsNaN(f) || math.IsInf(f, 0) {
			f = 0.5
		}
		return strconv.FormatFloat(f, "eEfg"[g.rng.IntN(4)], -1, 64)
	case 3: // long mantissa: beyond the fast path
		return strconv.FormatFloat(g.rng.NormFloat64()*1e5, 'f', 25, 64)
	case 4: // explicit exponent, sign and case variations
		m := strconv.Itoa(g.rng.IntN(100000))
		if g.rng.IntN(2) == 0 {
			m += "." + strconv.Itoa(g.rng.IntN(1000))
		}
		if g.rng.IntN(2) == 0 {
			m = "-" + m
		}
		return m + []string{"e", "E", "e+", "E-", "e-0"}[g.rng.IntN(5)] + strconv.Itoa(g.rng.IntN(30))
	}
	return []string{"0", "-0", "0.0", "-0.0e5", "1e22", "1e23", "9007199254740993", "0.1", "5e-324", "1.7976931348623157e308"}[g.rng.IntN(10)]
}

func (g *gen) value() string {
	if !g.complete && g.rng.IntN(10) == 0 {
		return "null"
	}
	return g.number()
}

func (g *gen) time() string {
	if g.rng.IntN(2) == 0 {
		return strconv.FormatInt(g.rng.Int64N(4e12)-1e12, 10)
	}
	t := fmt.Sprintf("%04d-%02d-%02dT%02d:%02d:%02d", g.rng.IntN(10000), 1+g.rng.IntN(12),
		1+g.rng.IntN(28), g.rng.IntN(24), g.rng.IntN(60), g.rng.IntN(60))
	if n := g.rng.IntN(12); n > 0 {
		t += "." + strconv.FormatUint(g.rng.Uint64(), 10)[:n]
	}
	if g.rng.IntN(2) == 0 {
		t += "Z"
	} else {
		t += fmt.Sprintf("%c%02d:%02d", "+-"[g.rng.IntN(2)], g.rng.IntN(24), g.rng.IntN(60))
	}
	return g.str(t)
}

// junk writes a random JSON value, nested up to depth.
func (g *gen) junk(depth int) string {
	switch k := g.rng.IntN(7); {
	case k == 0 && depth > 0:
		parts := make([]string, g.rng.IntN(4))
		for i := range parts {
			parts[i] = g.ws() + g.junk(depth-1) + g.ws()
		}
		return "[" + strings.Join(parts, ",") + "]"
	case k == 1 && depth > 0:
		parts := make([]string, g.rng.IntN(4))
		for i := range parts {
			parts[i] = g.ws() + g.str(fmt.Sprint("k", i, "\"}]")) + g.ws() + ":" + g.ws() + g.junk(depth-1)
		}
		return "{" + strings.Join(parts, ",") + "}"
	case k == 2:
		return g.str("a \"quoted\" ]} string\\")
	case k == 3:
		return []string{"true", "false", "null"}[g.rng.IntN(3)]
	}
	return g.number()
}

func (g *gen) record() string {
	var fs []string
	field := func(k, v string) { fs = append(fs, g.ws()+g.str(k)+g.ws()+":"+g.ws()+v+g.ws()) }
	if g.rng.IntN(10) < 7 {
		field("t", g.time())
	}
	switch {
	case !g.valid && g.rng.IntN(10) == 0: // no label
	case g.logistic && g.rng.IntN(3) == 0:
		field("y", []string{"true", "false"}[g.rng.IntN(2)])
	case g.logistic:
		field("y", []string{"0", "1", "1.0", "0e5", "-0", "1E0"}[g.rng.IntN(6)])
	default:
		field("y", g.number())
	}
	if g.fixed > 0 && !g.complete && g.rng.IntN(3) == 0 {
		vs := make([]string, g.fixed)
		for i := range vs {
			vs[i] = g.ws() + g.value() + g.ws()
		}
		field("v", "["+strings.Join(vs, ",")+"]")
	} else {
		perm := g.rng.Perm(len(g.pool))
		n := g.rng.IntN(len(g.pool) + 1)
		if g.complete {
			n = len(g.pool)
		}
		var xs []string
		for _, i := range perm[:n] {
			xs = append(xs, g.ws()+g.str(g.pool[i])+g.ws()+":"+g.ws()+g.value()+g.ws())
		}
		field("x", "{"+strings.Join(xs, ",")+"}")
	}
	if g.rng.IntN(2) == 0 {
		field("w", strconv.FormatFloat(g.rng.Float64()*3, 'g', -1, 64))
	}
	if g.rng.IntN(2) == 0 {
		field("key", g.str([]string{"unit-07", "", "ü/\"\\\n\t😀", "\x01"}[g.rng.IntN(4)]))
	}
	for range g.rng.IntN(3) {
		field([]string{"meta", "T", "Y", "xx", "ke\\y"}[g.rng.IntN(5)], g.junk(3))
	}
	g.rng.Shuffle(len(fs), func(i, j int) { fs[i], fs[j] = fs[j], fs[i] })
	msg := g.ws() + "{" + strings.Join(fs, ",") + "}" + g.ws()
	if !g.valid && g.rng.IntN(3) == 0 {
		msg = g.mutate(msg)
	}
	return msg
}

// mutate damages a record: a byte deleted, or a troublesome token inserted.
func (g *gen) mutate(msg string) string {
	i := g.rng.IntN(len(msg))
	if g.rng.IntN(2) == 0 {
		if utf8.RuneStart(msg[i]) {
			_, n := utf8.DecodeRuneInString(msg[i:])
			return msg[:i] + msg[i+n:]
		}
		return msg
	}
	tokens := []string{`"`, `{`, `]`, `\`, `1e400`, `-`, `,`, `null`, `"y":2,`, `"w":-1,`, `"x":{},`, `"v":[],`, `"t":"2026-02-30T00:00:00Z",`}
	for !utf8.RuneStart(msg[i]) {
		i--
	}
	return msg[:i] + tokens[g.rng.IntN(len(tokens))] + msg[i:]
}

func newRand(seed int) *rand.Rand { return rand.New(rand.NewPCG(uint64(seed), 1)) }

// diffConfigs are the decoder configurations of the differential and fuzz
// tests.
var diffConfigs = []DecoderOptions{
	{},
	{Features: []string{"a", "suction_kpa", "amps_l1"}, MaxFeatures: 5},
	{Features: []string{"a", "b"}, Logistic: true, Missing: MissingReject},
	{Logistic: true, MaxFeatures: 3, MaxBytes: 512},
	{Features: []string{"a"}, Unlabeled: true},
}

var diffPool = []string{"a", "b", "suction_kpa", "amps_l1", "temp/°C", "quote\"d", "sp ace", "ünï😀", "z", "x"}

// validPool returns the fixed features followed by as many other names of
// diffPool as the cap leaves room for.
func validPool(o DecoderOptions) []string {
	pool := append([]string(nil), o.Features...)
	room := o.MaxFeatures
	if room == 0 {
		room = DefaultMaxFeatures
	}
	for _, name := range diffPool {
		if len(pool) < room && !slices.Contains(pool, name) {
			pool = append(pool, name)
		}
	}
	return pool
}

// TestDifferential compares the decoder with the encoding/json reference on
// seeded random records, carrying the learned names from one record to the
// next, under every configuration.
func TestDifferential(t *testing.T) {
	n := 3000
	if testing.Short() {
		n = 500
	}
	for ci, o := range diffConfigs {
		for _, valid := range []bool{true, false} {
			t.Run(fmt.Sprintf("config%d/valid=%v", ci, valid), func(t *testing.T) {
				g := &gen{rng: newRand(ci), pool: diffPool,
					fixed: len(o.Features), logistic: o.Logistic, valid: valid,
					complete: valid && o.Missing == MissingReject}
				if valid { // names that fit under the cap
					g.pool = validPool(o)
				}
				d, ref := NewDecoder(&o), newRef(o)
				accepted := 0
				for i := range n {
					msg := g.record()
					if !utf8.ValidString(msg) {
						t.Fatalf("generator made invalid UTF-8: %q", msg)
					}
					if diff := check(d, ref, []byte(msg)); diff != "" {
						t.Fatalf("record %d %s\n%s", i, msg, diff)
					}
					var r Record
					if d.Decode([]byte(msg), &r) == nil {
						accepted++
					}
				}
				// The valid configurations must mostly accept, or the test
				// compares nothing but rejections.
				if valid && o.MaxBytes == 0 && accepted < n*9/10 {
					t.Errorf("only %d of %d valid records accepted", accepted, n)
				}
				t.Logf("%d of %d accepted; names %q", accepted, n, d.Names())
			})
		}
	}
}
