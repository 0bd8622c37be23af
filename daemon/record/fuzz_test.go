package record

import (
	"math/rand/v2"
	"testing"
)

// FuzzDecode checks that Decode never panics and agrees with the
// encoding/json reference on every input: the same values when the
// reference accepts the record, a reason the reference also finds when it
// does not. It also checks that decoding is repeatable and that an accepted
// record survives AppendJSON and a second decode. The seed corpus is every
// message of the table tests under every configuration, plus generated
// records; `go test` runs only the seeds, `go test -fuzz FuzzDecode`
// explores.
func FuzzDecode(f *testing.F) {
	for i, tc := range decodeCases {
		if len(tc.msg) > 1000 {
			continue // the deep-nesting cases: slow to mutate, covered by TestDecode
		}
		for c := range diffConfigs {
			f.Add(uint8(i*len(diffConfigs)+c), []byte(tc.msg))
		}
	}
	g := &gen{rng: rand.New(rand.NewPCG(7, 7)), pool: diffPool, fixed: 1}
	for i := range 40 {
		g.valid = i%2 == 0
		g.logistic = i%3 == 0
		f.Add(uint8(i), []byte(g.record()))
	}
	f.Fuzz(func(t *testing.T, mode uint8, data []byte) {
		o := diffConfigs[int(mode)%len(diffConfigs)]
		d, ref := NewDecoder(&o), newRef(o)
		if diff := check(d, ref, data); diff != "" {
			t.Fatalf("config %d: %q\n%s", int(mode)%len(diffConfigs), data, diff)
		}
		names := d.Names()
		var r1, r2 Record
		e1, e2 := d.Decode(data, &r1), d.Decode(data, &r2)
		if (e1 == nil) != (e2 == nil) || e1 != nil && e1.Error() != e2.Error() {
			t.Fatalf("decoding twice: %v, then %v", e1, e2)
		}
		if len(d.Names()) != len(names) {
			t.Fatalf("decoding again changed the names: %q, then %q", names, d.Names())
		}
		if e1 != nil {
			return
		}
		if diff := diffRecord(&r2, &r1); diff != "" {
			t.Fatalf("decoding twice: %s", diff)
		}
		// Round trip through AppendJSON with a decoder that knows the names.
		o2 := o
		o2.Learned, o2.MaxBytes = names[len(o.Features):], 1<<20
		msg := AppendJSON(nil, names, &r1)
		var r3 Record
		if err := NewDecoder(&o2).Decode(msg, &r3); err != nil {
			t.Fatalf("decoding %s: %v", msg, err)
		}
		if diff := diffRecord(&r3, &r1); diff != "" {
			t.Fatalf("round trip through %s: %s", msg, diff)
		}
	})
}
