package record

import (
	"encoding/json"
	"fmt"
	"strings"
	"testing"
)

// benchNames returns d channel names.
func benchNames(d int) []string {
	names := make([]string, d)
	for j := range names {
		names[j] = fmt.Sprintf("s%02d", j)
	}
	return names
}

// benchRecord returns a named-form record with d channels of typical sensor
// readings; d = 32 gives 446 bytes.
func benchRecord(d int) []byte {
	r := Record{X: make([]float64, d), Y: 1.25, W: 1, T: 1772600767089, HasT: true, Key: []byte("unit-07")}
	for j := range r.X {
		r.X[j] = float64(1000+37*j) / 10 // 100.0 .. 196.7: one decimal, like most gauges
	}
	return AppendJSON(nil, benchNames(d), &r)
}

// benchArray returns the same record in the array form.
func benchArray(d int) []byte {
	named := string(benchRecord(d))
	x := named[strings.Index(named, `"x":{`)+5 : strings.Index(named, `}`)]
	var vs []string
	for _, kv := range strings.Split(x, ",") {
		vs = append(vs, kv[strings.Index(kv, ":")+1:])
	}
	return []byte(strings.Replace(named, `"x":{`+x+`}`, `"v":[`+strings.Join(vs, ",")+`]`, 1))
}

// TestAllocs checks the zero-allocation promise of the hot paths.
func TestAllocs(t *testing.T) {
	escaped := []byte(`{"t":"2026-03-04T07:36:07.089+02:30","y":-1.5e-3,"x":{"s\u00fcction":312.4,"amps_l1":null,"a\"b":1e-400,"long":1234567890123456789012345},"w":0.5,"key":"unit\u002d07","meta":{"a":[1,"x\\"]}}`)
	for _, tc := range []struct {
		name string
		o    *DecoderOptions
		msg  []byte
	}{
		{"named d=32", nil, benchRecord(32)},
		{"named d=128", nil, benchRecord(128)},
		{"named with escapes and unknown keys", nil, escaped},
		{"array d=32", &DecoderOptions{Features: benchNames(32)}, benchArray(32)},
		{"named, channel order changing", nil, []byte(`{"y":1,"x":{"b":1,"a":2,"c":3}}`)},
		{"unlabeled", &DecoderOptions{Unlabeled: true}, []byte(`{"y":"?","x":{"a":1}}`)},
	} {
		t.Run(tc.name, func(t *testing.T) {
			d := NewDecoder(tc.o)
			var r Record
			if err := d.Decode(tc.msg, &r); err != nil { // learns the names
				t.Fatal(err)
			}
			if n := testing.AllocsPerRun(100, func() {
				if err := d.Decode(tc.msg, &r); err != nil {
					t.Fatal(err)
				}
			}); n != 0 {
				t.Errorf("%v allocations per Decode, want 0", n)
			}
		})
	}
	t.Run("AppendJSON", func(t *testing.T) {
		names := benchNames(32)
		var r Record
		if err := NewDecoder(nil).Decode(benchRecord(32), &r); err != nil {
			t.Fatal(err)
		}
		r.Key = []byte("k\"ü\x01")
		buf := make([]byte, 0, 4096)
		if n := testing.AllocsPerRun(100, func() { buf = AppendJSON(buf[:0], names, &r) }); n != 0 {
			t.Errorf("%v allocations per AppendJSON, want 0", n)
		}
	})
}

func TestBenchRecords(t *testing.T) {
	if n := len(benchRecord(32)); n < 400 || n > 480 {
		t.Errorf("the d=32 benchmark record has %d bytes, want about 440", n)
	}
	d := NewDecoder(&DecoderOptions{Features: benchNames(32)})
	var a, b Record
	if err := d.Decode(benchRecord(32), &a); err != nil {
		t.Fatal(err)
	}
	if err := d.Decode(benchArray(32), &b); err != nil {
		t.Fatal(err)
	}
	if diff := diffRecord(&a, &b); diff != "" {
		t.Error(diff)
	}
}

var benchSizes = []int{8, 32, 128}

func BenchmarkDecodeNamed(b *testing.B) {
	for _, d := range benchSizes {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			msg := benchRecord(d)
			dec := NewDecoder(nil)
			var r Record
			b.SetBytes(int64(len(msg)))
			b.ReportAllocs()
			for b.Loop() {
				if err := dec.Decode(msg, &r); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkDecodeArray(b *testing.B) {
	for _, d := range benchSizes {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			msg := benchArray(d)
			dec := NewDecoder(&DecoderOptions{Features: benchNames(d)})
			var r Record
			b.SetBytes(int64(len(msg)))
			b.ReportAllocs()
			for b.Loop() {
				if err := dec.Decode(msg, &r); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkStdlibMap is the baseline: encoding/json into map[string]any,
// a fresh map per record.
func BenchmarkStdlibMap(b *testing.B) {
	for _, d := range benchSizes {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			msg := benchRecord(d)
			b.SetBytes(int64(len(msg)))
			b.ReportAllocs()
			for b.Loop() {
				var m map[string]any
				if err := json.Unmarshal(msg, &m); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// wireStruct is the record as encoding/json would decode it into a struct.
type wireStruct struct {
	T   string             `json:"t"`
	Y   float64            `json:"y"`
	X   map[string]float64 `json:"x"`
	W   float64            `json:"w"`
	Key string             `json:"key"`
}

// BenchmarkStdlibStruct is the second baseline: encoding/json into a struct
// with a map[string]float64, a fresh value per record.
func BenchmarkStdlibStruct(b *testing.B) {
	for _, d := range benchSizes {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			msg := benchRecord(d)
			b.SetBytes(int64(len(msg)))
			b.ReportAllocs()
			for b.Loop() {
				var s wireStruct
				if err := json.Unmarshal(msg, &s); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkAppendJSON(b *testing.B) {
	names := benchNames(32)
	var r Record
	if err := NewDecoder(nil).Decode(benchRecord(32), &r); err != nil {
		b.Fatal(err)
	}
	buf := make([]byte, 0, 1024)
	b.ReportAllocs()
	for b.Loop() {
		buf = AppendJSON(buf[:0], names, &r)
	}
	b.SetBytes(int64(len(buf)))
}
