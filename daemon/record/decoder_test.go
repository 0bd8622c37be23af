package record

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"
)

var nan = math.NaN()

var (
	fixedAB   = &DecoderOptions{Features: []string{"a", "b"}}
	logistic  = &DecoderOptions{Logistic: true}
	strict    = &DecoderOptions{Features: []string{"a", "b"}, Missing: MissingReject}
	unlabeled = &DecoderOptions{Unlabeled: true}
	capOne    = &DecoderOptions{MaxFeatures: 1}
	tiny      = &DecoderOptions{MaxBytes: 20}
)

// decodeCases are single records decoded by a fresh Decoder. want is the
// expected record when reason is "", and names the expected feature order.
var decodeCases = []struct {
	name   string
	o      *DecoderOptions
	msg    string
	reason string
	want   Record
	names  []string
}{
	// Good records.
	{name: "spec example", msg: `{"t": "2026-03-04T05:06:07.089Z", "y": 1, "x": {"suction_kpa": 312.4, "amps_l1": 41.2}, "w": 1, "key": "unit-07"}`,
		want:  Record{X: []float64{312.4, 41.2}, Y: 1, W: 1, T: 1772600767089, HasT: true, Key: []byte("unit-07")},
		names: []string{"suction_kpa", "amps_l1"}},
	{name: "array form", o: fixedAB, msg: `{"y":-2.5,"v":[1,null],"t":1772600767089}`,
		want: Record{X: []float64{1, nan}, Y: -2.5, W: 1, T: 1772600767089, HasT: true}, names: []string{"a", "b"}},
	{name: "named form with a fixed list", o: fixedAB, msg: `{"y":0,"x":{"c":3,"a":1}}`,
		want: Record{X: []float64{1, nan, 3}, Y: 0, W: 1}, names: []string{"a", "b", "c"}},
	{name: "no t", msg: `{"y":1,"x":{"a":2}}`, want: Record{X: []float64{2}, Y: 1, W: 1}},
	{name: "t offset and nanoseconds", msg: `{"t":"2026-03-04T07:36:07.089999999+02:30","y":1,"x":{}}`,
		want: Record{X: []float64{}, Y: 1, W: 1, T: 1772600767089, HasT: true}},
	{name: "t negative offset", msg: `{"t":"2026-03-04T04:06:07.1-01:00","y":1,"x":{}}`,
		want: Record{X: []float64{}, Y: 1, W: 1, T: 1772600767100, HasT: true}},
	{name: "t before 1970 floors", msg: `{"t":"1969-12-31T23:59:59.9995Z","y":1,"x":{}}`,
		want: Record{X: []float64{}, Y: 1, W: 1, T: -1, HasT: true}},
	{name: "t negative millis", msg: `{"t":-5,"y":1,"x":{}}`, want: Record{X: []float64{}, Y: 1, W: 1, T: -5, HasT: true}},
	{name: "t escaped", msg: `{"t":"2026-03-04T05:06:07\u002E089Z","y":1,"x":{}}`,
		want: Record{X: []float64{}, Y: 1, W: 1, T: 1772600767089, HasT: true}},
	{name: "escapes in names and key", msg: `{"y":1,"x":{"s\u00fcction\/kpa":1,"a\"b\\c":2,"\ud83d\ude00":3},"key":"u\tnit\u0000"}`,
		want:  Record{X: []float64{1, 2, 3}, Y: 1, W: 1, Key: []byte("u\tnit\x00")},
		names: []string{"süction/kpa", "a\"b\\c", "😀"}},
	{name: "lone surrogates become U+FFFD", msg: `{"y":1,"x":{},"key":"\ud800x\udc00\ud800\ud800"}`,
		want: Record{X: []float64{}, Y: 1, W: 1, Key: []byte("\uFFFDx\uFFFD\uFFFD\uFFFD")}},
	{name: "raw UTF-8", msg: `{"y":1,"x":{"température":20},"key":"ü😀"}`,
		want: Record{X: []float64{20}, Y: 1, W: 1, Key: []byte("ü😀")}, names: []string{"température"}},
	{name: "unknown keys skipped", msg: `{"meta":{"a":[1,{"b":"\"}]"},[],{}],"c":null},"y":1,"list":[true,false,null,-1e5,"x\\"],"x":{"a":1},"s":"}","Y":5,"X":{}}`,
		want: Record{X: []float64{1}, Y: 1, W: 1}},
	{name: "whitespace everywhere", msg: " \t\r\n{ \n\"y\" \t: \r 1 \n, \"x\"\t:\n{ \"a\" : 1 , \"b\" :\tnull } , \"w\" : 2 ,\"key\" : \"k\" , \"t\" : 5 } \n\t",
		want: Record{X: []float64{1, nan}, Y: 1, W: 2, T: 5, HasT: true, Key: []byte("k")}},
	{name: "number forms", msg: `{"y":-1.5e-3,"x":{"a":2E+2,"b":-0,"c":0.0e0,"d":1e-400,"e":9007199254740993,"f":123456789012345678901234567890,"g":0.1e1,"h":1.7976931348623157e308}}`,
		want: Record{X: []float64{200, math.Copysign(0, -1), 0, 0, 9007199254740992, 1.2345678901234568e29, 1, math.MaxFloat64}, Y: -0.0015, W: 1}},
	{name: "nulls are absent", msg: `{"t":null,"y":3,"x":{"a":null},"v":null,"w":null,"key":null}`,
		want: Record{X: []float64{nan}, Y: 3, W: 1}},
	{name: "logistic true", o: logistic, msg: `{"y":true,"x":{}}`, want: Record{X: []float64{}, Y: 1, W: 1}},
	{name: "logistic false", o: logistic, msg: `{"y":false,"x":{}}`, want: Record{X: []float64{}, Y: 0, W: 1}},
	{name: "logistic 1.0", o: logistic, msg: `{"y":1.0,"x":{}}`, want: Record{X: []float64{}, Y: 1, W: 1}},
	{name: "logistic -0", o: logistic, msg: `{"y":-0,"x":{}}`, want: Record{X: []float64{}, Y: 0, W: 1}},
	{name: "unlabeled ignores y", o: unlabeled, msg: `{"y":"anything","x":{"a":1}}`, want: Record{X: []float64{1}, Y: nan, W: 1}},
	{name: "unlabeled without y", o: unlabeled, msg: `{"x":{"a":1}}`, want: Record{X: []float64{1}, Y: nan, W: 1}},
	{name: "reject policy satisfied", o: strict, msg: `{"y":1,"v":[1,2]}`, want: Record{X: []float64{1, 2}, Y: 1, W: 1}},
	{name: "max bytes exactly", o: tiny, msg: `{"y":1,"x":{"a":12}}`, want: Record{X: []float64{12}, Y: 1, W: 1}},
	{name: "deep unknown value", msg: `{"y":1,"x":{},"u":` + strings.Repeat("[", maxDepth-1) + strings.Repeat("]", maxDepth-1) + `}`,
		want: Record{X: []float64{}, Y: 1, W: 1}},

	// One per reason.
	{name: "oversize", o: tiny, msg: `{"y":1,"x":{"a":123}}`, reason: ReasonOversize},
	{name: "empty", msg: ``, reason: ReasonMalformed},
	{name: "blank", msg: " \n", reason: ReasonMalformed},
	{name: "not an object", msg: `[{"y":1}]`, reason: ReasonMalformed},
	{name: "truncated", msg: `{"y":1,"x":{"a":1}`, reason: ReasonMalformed},
	{name: "trailing comma", msg: `{"y":1,"x":{},}`, reason: ReasonMalformed},
	{name: "trailing data", msg: `{"y":1,"x":{}} {}`, reason: ReasonMalformed},
	{name: "leading zero", msg: `{"y":01,"x":{}}`, reason: ReasonMalformed},
	{name: "bare point", msg: `{"y":1.,"x":{}}`, reason: ReasonMalformed},
	{name: "leading point", msg: `{"y":.5,"x":{}}`, reason: ReasonMalformed},
	{name: "plus sign", msg: `{"y":+1,"x":{}}`, reason: ReasonMalformed},
	{name: "empty exponent", msg: `{"y":1e,"x":{}}`, reason: ReasonMalformed},
	{name: "NaN literal", msg: `{"y":NaN,"x":{}}`, reason: ReasonMalformed},
	{name: "bad literal", msg: `{"y":1,"x":{},"z":tru}`, reason: ReasonMalformed},
	{name: "single quotes", msg: `{'y':1,"x":{}}`, reason: ReasonMalformed},
	{name: "bad escape", msg: `{"y":1,"x":{},"key":"\x"}`, reason: ReasonMalformed},
	{name: "short unicode escape", msg: `{"y":1,"x":{},"key":"\u12"}`, reason: ReasonMalformed},
	{name: "control character", msg: "{\"y\":1,\"x\":{},\"key\":\"a\tb\"}", reason: ReasonMalformed},
	{name: "invalid UTF-8", msg: "{\"y\":1,\"x\":{},\"key\":\"\xff\"}", reason: ReasonMalformed},
	{name: "invalid UTF-8 in a skipped value", msg: "{\"y\":1,\"x\":{},\"u\":[\"\xc3\"]}", reason: ReasonMalformed},
	{name: "duplicate key", msg: `{"y":1,"x":{},"y":2}`, reason: ReasonMalformed},
	{name: "duplicate key after a type error", msg: `{"y":"a","x":{},"y":2}`, reason: ReasonMalformed},
	{name: "duplicate channel", msg: `{"y":1,"x":{"a":1,"\u0061":2}}`, reason: ReasonMalformed},
	{name: "both x and v", o: fixedAB, msg: `{"y":1,"x":{},"v":[1,2]}`, reason: ReasonMalformed},
	{name: "syntax beats type", msg: `{"y":"a","x":{}`, reason: ReasonMalformed},
	{name: "too deep", msg: `{"y":1,"x":{},"u":` + strings.Repeat("[", maxDepth) + strings.Repeat("]", maxDepth) + `}`, reason: ReasonMalformed},
	{name: "y string", msg: `{"y":"1","x":{}}`, reason: ReasonType},
	{name: "y bool for a linear model", msg: `{"y":true,"x":{}}`, reason: ReasonType},
	{name: "y string for a logistic model", o: logistic, msg: `{"y":"1","x":{}}`, reason: ReasonType},
	{name: "x array", msg: `{"y":1,"x":[1]}`, reason: ReasonType},
	{name: "v object", o: fixedAB, msg: `{"y":1,"v":{"a":1}}`, reason: ReasonType},
	{name: "channel string", msg: `{"y":1,"x":{"a":"1"}}`, reason: ReasonType},
	{name: "channel object", msg: `{"y":1,"x":{"a":{"b":1}}}`, reason: ReasonType},
	{name: "v element bool", o: fixedAB, msg: `{"y":1,"v":[1,true]}`, reason: ReasonType},
	{name: "w string", msg: `{"y":1,"x":{},"w":"2"}`, reason: ReasonType},
	{name: "key number", msg: `{"y":1,"x":{},"key":7}`, reason: ReasonType},
	{name: "t bool", msg: `{"y":1,"x":{},"t":true}`, reason: ReasonType},
	{name: "channel overflow", msg: `{"y":1,"x":{"a":1e400}}`, reason: ReasonNotFinite},
	{name: "y overflow", msg: `{"y":-1e400,"x":{}}`, reason: ReasonNotFinite},
	{name: "w overflow", msg: `{"y":1,"x":{},"w":1e309}`, reason: ReasonNotFinite},
	{name: "v overflow", o: fixedAB, msg: `{"y":1,"v":[1,-1e999]}`, reason: ReasonNotFinite},
	{name: "long overflow", msg: `{"y":1,"x":{"a":179769313486231580793728971405303415079934132710037826936173778980444968292764750946649017977587207096330286416692887910946555547851940402630657488671505820681908902000708383676273854845817711531764475730270069855571366959622842914819860834936475292719074168444365510704342711559699508093042880177904174497792}}`, reason: ReasonNotFinite},
	{name: "logistic 2", o: logistic, msg: `{"y":2,"x":{}}`, reason: ReasonLabel},
	{name: "logistic 0.5", o: logistic, msg: `{"y":0.5,"x":{}}`, reason: ReasonLabel},
	{name: "no y", msg: `{"x":{"a":1}}`, reason: ReasonLabel},
	{name: "null y", msg: `{"y":null,"x":{"a":1}}`, reason: ReasonLabel},
	{name: "past the cap, reject", o: &DecoderOptions{MaxFeatures: 1, Missing: MissingReject}, msg: `{"y":1,"x":{"a":1,"b":2}}`, reason: ReasonTooManyFeatures},
	{name: "neither x nor v", msg: `{"y":1}`, reason: ReasonMissingFeature},
	{name: "x null", msg: `{"y":1,"x":null}`, reason: ReasonMissingFeature},
	{name: "reject: channel absent", o: strict, msg: `{"y":1,"x":{"a":1}}`, reason: ReasonMissingFeature},
	{name: "reject: channel null", o: strict, msg: `{"y":1,"v":[1,null]}`, reason: ReasonMissingFeature},
	{name: "v without a fixed list", msg: `{"y":1,"v":[1]}`, reason: ReasonDimension},
	{name: "v short", o: fixedAB, msg: `{"y":1,"v":[1]}`, reason: ReasonDimension},
	{name: "v long", o: fixedAB, msg: `{"y":1,"v":[1,2,3]}`, reason: ReasonDimension},
	{name: "v empty", o: fixedAB, msg: `{"y":1,"v":[]}`, reason: ReasonDimension},
	{name: "negative weight", msg: `{"y":1,"x":{},"w":-1}`, reason: ReasonWeight},
	{name: "empty channel name", msg: `{"y":1,"x":{"":1}}`, reason: ReasonName},
	{name: "control character in a name", msg: `{"y":1,"x":{"a\nb":1}}`, reason: ReasonName},
	{name: "DEL in a name", msg: `{"y":1,"x":{"a\u007fb":1}}`, reason: ReasonName},
	{name: "lone surrogate in a name", msg: `{"y":1,"x":{"a\ud800":1}}`, reason: ReasonName},
	{name: "invalid UTF-8 in a name", msg: "{\"y\":1,\"x\":{\"a\xffb\":1}}", reason: ReasonMalformed}, // the whole text must be UTF-8
	{name: "name too long", msg: `{"y":1,"x":{"` + strings.Repeat("n", MaxNameBytes+1) + `":1}}`, reason: ReasonName},
	{name: "duplicate empty names", msg: `{"y":1,"x":{"":1,"":2}}`, reason: ReasonMalformed},
	{name: "zero weight", msg: `{"y":1,"x":{},"w":0}`, reason: ReasonWeight},
	{name: "negative zero weight", msg: `{"y":1,"x":{},"w":-0}`, reason: ReasonWeight},
	{name: "tiny negative weight", msg: `{"y":1,"x":{},"w":-1e-300}`, reason: ReasonWeight},
	{name: "t February 30", msg: `{"y":1,"x":{},"t":"2026-02-30T00:00:00Z"}`, reason: ReasonTime},
	{name: "t space separator", msg: `{"y":1,"x":{},"t":"2026-03-04 05:06:07Z"}`, reason: ReasonTime},
	{name: "t no zone", msg: `{"y":1,"x":{},"t":"2026-03-04T05:06:07"}`, reason: ReasonTime},
	{name: "t lower case", msg: `{"y":1,"x":{},"t":"2026-03-04t05:06:07z"}`, reason: ReasonTime},
	{name: "t offset 24h", msg: `{"y":1,"x":{},"t":"2026-03-04T05:06:07+24:00"}`, reason: ReasonTime},
	{name: "t one-digit hour", msg: `{"y":1,"x":{},"t":"2026-03-04T5:06:07Z"}`, reason: ReasonTime},
	{name: "t comma", msg: `{"y":1,"x":{},"t":"2026-03-04T05:06:07,5Z"}`, reason: ReasonTime},
	{name: "t empty fraction", msg: `{"y":1,"x":{},"t":"2026-03-04T05:06:07.Z"}`, reason: ReasonTime},
	{name: "t leap second", msg: `{"y":1,"x":{},"t":"2016-12-31T23:59:60Z"}`, reason: ReasonTime},
	{name: "t fractional millis", msg: `{"y":1,"x":{},"t":1.5}`, reason: ReasonTime},
	{name: "t exponent millis", msg: `{"y":1,"x":{},"t":1e3}`, reason: ReasonTime},
	{name: "t overflow", msg: `{"y":1,"x":{},"t":9223372036854775808}`, reason: ReasonTime},
}

func TestDecode(t *testing.T) {
	for _, tc := range decodeCases {
		t.Run(tc.name, func(t *testing.T) {
			d := NewDecoder(tc.o)
			r := Record{X: []float64{7, 7, 7, 7, 7, 7, 7, 7, 7}, Key: []byte("stale")}
			err := d.Decode([]byte(tc.msg), &r)
			if tc.reason != "" {
				var e *Error
				if !errors.As(err, &e) || e.Reason != tc.reason {
					t.Fatalf("got %v, want reason %s", err, tc.reason)
				}
				if d.Features() != len(tc.o.featureList()) {
					t.Errorf("a rejected record changed the names: %q", d.Names())
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if diff := diffRecord(&r, &tc.want); diff != "" {
				t.Error(diff)
			}
			if tc.names != nil && !slices.Equal(d.Names(), tc.names) {
				t.Errorf("names %q, want %q", d.Names(), tc.names)
			}
		})
	}
}

// featureList returns the names a new decoder starts with.
func (o *DecoderOptions) featureList() []string {
	if o == nil {
		return nil
	}
	return append(append([]string(nil), o.Features...), o.Learned...)
}

func TestReasonPrecedence(t *testing.T) {
	for _, tc := range []struct{ name, msg, reason string }{
		{"first problem in document order", `{"w":-1,"y":"a","x":{}}`, ReasonWeight},
		{"first problem in document order 2", `{"y":"a","w":-1,"x":{}}`, ReasonType},
		{"parse errors before missing fields", `{"w":-1}`, ReasonWeight},
		{"missing x before missing y", `{}`, ReasonMissingFeature},
		{"duplicates before type errors", `{"y":"a","x":{"a":1,"a":2}}`, ReasonMalformed},
		{"syntax before duplicates", `{"y":1,"y":1,"x":{}`, ReasonMalformed},
	} {
		t.Run(tc.name, func(t *testing.T) {
			err := NewDecoder(nil).Decode([]byte(tc.msg), &Record{})
			if !errors.Is(err, &Error{Reason: tc.reason}) {
				t.Errorf("got %v, want reason %s", err, tc.reason)
			}
		})
	}
}

// TestLearning follows the feature set across records: order of first
// appearance, the cap, and rejected records leaving no trace.
func TestLearning(t *testing.T) {
	d := NewDecoder(&DecoderOptions{Features: []string{"f"}, Learned: []string{"l"}, MaxFeatures: 4})
	var r Record
	step := func(msg, reason string, names ...string) {
		t.Helper()
		err := d.Decode([]byte(msg), &r)
		if reason == "" && err != nil || reason != "" && !errors.Is(err, &Error{Reason: reason}) {
			t.Fatalf("%s: got %v, want %q", msg, err, reason)
		}
		if !slices.Equal(d.Names(), names) {
			t.Fatalf("%s: names %q, want %q", msg, d.Names(), names)
		}
		if err == nil && len(r.X) != len(names) {
			t.Fatalf("%s: len(X) = %d, want %d", msg, len(r.X), len(names))
		}
	}
	step(`{"y":1,"x":{"b":1,"l":2}}`, "", "f", "l", "b")
	before := d.Names()
	step(`{"y":"bad","x":{"c":1,"d":2}}`, ReasonType, "f", "l", "b")
	step(`{"y":1,"x":{"c":1,"c":1}}`, ReasonMalformed, "f", "l", "b")
	step(`{"y":1,"x":{"c":1}}`, "", "f", "l", "b", "c")
	if !slices.Equal(before, []string{"f", "l", "b"}) {
		t.Errorf("an earlier Names() slice changed: %q", before)
	}
	if !sameFloat(r.X[0], nan) || !sameFloat(r.X[1], nan) || !sameFloat(r.X[2], nan) || r.X[3] != 1 {
		t.Errorf("X = %v, want [NaN NaN NaN 1]", r.X)
	}
	// Past the cap a new name is dropped and counted; the record keeps the
	// channels it has.
	step(`{"y":1,"x":{"e":1,"c":7}}`, "", "f", "l", "b", "c")
	if d.Dropped() != 1 || r.X[3] != 7 {
		t.Errorf("dropped %d, X = %v", d.Dropped(), r.X)
	}
	// Past the cap, duplicates of unlearned names are still duplicates.
	step(`{"y":1,"x":{"e":1,"e":2}}`, ReasonMalformed, "f", "l", "b", "c")
	step(`{"y":1,"x":{"c":5,"b":4,"l":3,"f":2}}`, "", "f", "l", "b", "c")
	if !slices.Equal(r.X, []float64{2, 3, 4, 5}) {
		t.Errorf("X = %v, want [2 3 4 5]", r.X)
	}
}

// TestGenerationWrap checks duplicate detection across the wrap of the
// per-record generation counter.
func TestGenerationWrap(t *testing.T) {
	d := NewDecoder(nil)
	var r Record
	if err := d.Decode([]byte(`{"y":1,"x":{"a":1}}`), &r); err != nil {
		t.Fatal(err)
	}
	d.seen[0] = 0
	d.gen = math.MaxUint32
	for range 3 {
		if err := d.Decode([]byte(`{"y":1,"x":{"a":1}}`), &r); err != nil {
			t.Fatalf("gen %d: %v", d.gen, err)
		}
	}
}

func TestError(t *testing.T) {
	err := error(&Error{Reason: ReasonLabel, Detail: `missing "y"`})
	if got, want := err.Error(), `record: label: missing "y"`; got != want {
		t.Errorf("Error() = %q, want %q", got, want)
	}
	wrapped := errors.Join(errors.New("context"), err)
	var e *Error
	if !errors.As(wrapped, &e) || e.Reason != ReasonLabel {
		t.Errorf("errors.As: %v", e)
	}
	if !errors.Is(wrapped, &Error{Reason: ReasonLabel}) || errors.Is(wrapped, &Error{Reason: ReasonTime}) {
		t.Error("errors.Is does not match by reason")
	}
	if errors.Is(err, &Error{Reason: ReasonLabel, Detail: "other"}) {
		t.Error("errors.Is matched a target with a detail")
	}
	rs := Reasons()
	if len(rs) != 11 || rs[0] != ReasonOversize || rs[9] != ReasonTime || rs[10] != ReasonName {
		t.Errorf("Reasons() = %q", rs)
	}
	rs[0] = "changed"
	if Reasons()[0] != ReasonOversize {
		t.Error("Reasons() shares its slice")
	}
	for _, r := range Reasons() {
		if strings.Trim(r, "abcdefghijklmnopqrstuvwxyz_") != "" {
			t.Errorf("reason %q is not a plain label token", r)
		}
	}
}

func TestDetailIsShort(t *testing.T) {
	long := strings.Repeat("n", 10000)
	err := NewDecoder(&DecoderOptions{MaxFeatures: 1}).Decode([]byte(`{"y":1,"x":{"a":1,"`+long+`":2}}`), &Record{})
	if err == nil || len(err.Error()) > 200 {
		t.Errorf("detail of %d bytes: %.200v", len(err.Error()), err)
	}
}

func TestValidate(t *testing.T) {
	for _, tc := range []struct {
		name string
		o    *DecoderOptions
		ok   bool
	}{
		{"nil", nil, true},
		{"zero", &DecoderOptions{}, true},
		{"full", &DecoderOptions{Features: []string{"a"}, Learned: []string{"b"}, MaxFeatures: 2, Missing: "reject"}, true},
		{"unknown policy", &DecoderOptions{Missing: "zero"}, false},
		{"duplicate feature", &DecoderOptions{Features: []string{"a", "a"}}, false},
		{"learned repeats a feature", &DecoderOptions{Features: []string{"a"}, Learned: []string{"a"}}, false},
		{"over the cap", &DecoderOptions{Features: []string{"a", "b"}, MaxFeatures: 1}, false},
		{"over the default cap", &DecoderOptions{Features: make([]string, 257)}, false},
		{"negative", &DecoderOptions{MaxBytes: -1}, false},
		{"negative free after", &DecoderOptions{FreeAfter: -1}, false},
		{"free slots in learned", &DecoderOptions{Learned: []string{"", "a", ""}, MaxFeatures: 3}, true},
		{"free slots past the cap", &DecoderOptions{Learned: []string{"", "a", ""}, MaxFeatures: 2}, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if tc.name == "over the default cap" {
				for i := range tc.o.Features {
					tc.o.Features[i] = string(rune('a' + i))
				}
			}
			err := tc.o.Validate()
			if (err == nil) != tc.ok {
				t.Fatalf("Validate() = %v, want ok %v", err, tc.ok)
			}
			if err != nil && !strings.HasPrefix(err.Error(), "record: ") {
				t.Errorf("error %q lacks the package prefix", err)
			}
			defer func() {
				if p := recover(); (p == nil) != tc.ok {
					t.Errorf("NewDecoder panic %v, want ok %v", p, tc.ok)
				}
			}()
			NewDecoder(tc.o)
		})
	}
}

// TestDecodeKeepsNoReference checks that the decoder does not retain msg.
func TestDecodeKeepsNoReference(t *testing.T) {
	d := NewDecoder(nil)
	msg := []byte(`{"y":1,"x":{"a":1},"key":"k"}`)
	var r Record
	if err := d.Decode(msg, &r); err != nil {
		t.Fatal(err)
	}
	if d.s.b != nil {
		t.Error("decoder keeps the message")
	}
	copy(msg, strings.Repeat(" ", len(msg)))
	if string(r.Key) != "k" || d.Names()[0] != "a" {
		t.Error("record or names alias the message")
	}
}
