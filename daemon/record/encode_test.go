package record

import (
	"encoding/json"
	"math"
	"testing"
)

func TestAppendJSON(t *testing.T) {
	inf := math.Inf(1)
	for _, tc := range []struct {
		name  string
		names []string
		r     Record
		want  string
	}{
		{"full", []string{"suction_kpa", "amps_l1"},
			Record{X: []float64{312.4, 41.2}, Y: 1, W: 2, T: 1772600767089, HasT: true, Key: []byte("unit-07")},
			`{"t":"2026-03-04T05:06:07.089Z","y":1,"x":{"suction_kpa":312.4,"amps_l1":41.2},"w":2,"key":"unit-07"}`},
		{"defaults omitted", []string{"a"}, Record{X: []float64{0}, Y: 0, W: 1}, `{"y":0,"x":{"a":0}}`},
		{"missing and non-finite", []string{"a", "b", "c", "d"}, Record{X: []float64{nan, 1, inf, -0.0}, Y: nan, W: inf},
			`{"x":{"b":1,"d":0}}`},
		{"negative zero", []string{"a"}, Record{X: []float64{math.Copysign(0, -1)}, Y: 1, W: 1}, `{"y":1,"x":{"a":-0}}`},
		{"exponents", []string{"a", "b", "c"}, Record{X: []float64{1e21, 1e-7, 123456789e-300}, Y: -1e-9, W: 1},
			`{"y":-1e-9,"x":{"a":1e+21,"b":1e-7,"c":1.23456789e-292}}`},
		{"escapes", []string{"a\"b\\c\n\x01", "ü😀", "bad\xff"}, Record{X: []float64{1, 2, 3}, Y: 1, W: 1, Key: []byte("k\t\"")},
			`{"y":1,"x":{"a\"b\\c\n\u0001":1,"ü😀":2,"bad\ufffd":3},"key":"k\t\""}`},
		{"time outside four-digit years", nil, Record{Y: 1, W: 1, T: maxRFC3339 + 1, HasT: true},
			`{"t":253402300800000,"y":1,"x":{}}`},
		{"time before 1970", nil, Record{Y: 1, W: 1, T: -1, HasT: true},
			`{"t":"1969-12-31T23:59:59.999Z","y":1,"x":{}}`},
		{"no y and a time", []string{"a"}, Record{X: []float64{1}, Y: nan, W: 1, T: 0, HasT: true},
			`{"t":"1970-01-01T00:00:00.000Z","x":{"a":1}}`},
		{"extra names", []string{"a", "b"}, Record{X: []float64{1}, Y: 1, W: 1}, `{"y":1,"x":{"a":1}}`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got := string(AppendJSON([]byte("prefix"), tc.names, &tc.r))
			if got != "prefix"+tc.want {
				t.Errorf("got  %s\nwant prefix%s", got, tc.want)
			}
			if !json.Valid([]byte(tc.want)) {
				t.Errorf("not valid JSON: %s", tc.want)
			}
		})
	}
}

func TestAppendJSONPanicsOnTooFewNames(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("no panic")
		}
	}()
	AppendJSON(nil, []string{"a"}, &Record{X: []float64{1, 2}})
}

// TestAppendJSONRoundTrip decodes what AppendJSON writes for records of the
// differential generator.
func TestAppendJSONRoundTrip(t *testing.T) {
	for ci, o := range diffConfigs {
		g := &gen{rng: newRand(ci), pool: validPool(o), fixed: len(o.Features), logistic: o.Logistic, valid: true}
		d := NewDecoder(&o)
		var r, back Record
		var buf []byte
		for range 300 {
			if d.Decode([]byte(g.record()), &r) != nil {
				continue
			}
			o2 := o
			o2.Learned, o2.MaxBytes = d.Names()[len(o.Features):], 1<<20
			buf = AppendJSON(buf[:0], d.Names(), &r)
			if err := NewDecoder(&o2).Decode(buf, &back); err != nil {
				t.Fatalf("config %d: %s: %v", ci, buf, err)
			}
			if diff := diffRecord(&back, &r); diff != "" {
				t.Fatalf("config %d: %s: %s", ci, buf, diff)
			}
		}
	}
}
