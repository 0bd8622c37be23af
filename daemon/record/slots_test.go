package record

import (
	"errors"
	"fmt"
	"slices"
	"testing"
)

// TestSlotsAgeOut: a learned name that no record carried for FreeAfter
// decodes gives its slot back ("" in Names), a Names slice returned before
// does not change, a new name takes the lowest free slot, a rejected
// record's reuse is rolled back, configured features never age out, and a
// decoder built with free slots in Learned continues from them.
func TestSlotsAgeOut(t *testing.T) {
	const after = 128
	d := NewDecoder(&DecoderOptions{Features: []string{"f"}, MaxFeatures: 4, FreeAfter: after})
	var r Record
	decode := func(msg string) error {
		t.Helper()
		return d.Decode([]byte(msg), &r)
	}
	if err := decode(`{"y":1,"x":{"f":1,"a":1,"b":2,"c":3}}`); err != nil {
		t.Fatal(err)
	}
	before := d.Names()
	// Only "a" for a while: b and c age out at the first scan past FreeAfter.
	n := 1
	for ; d.Freed() == 0; n++ {
		if err := decode(`{"y":1,"x":{"a":1}}`); err != nil {
			t.Fatal(err)
		}
		if n > after+scanEvery {
			t.Fatalf("nothing freed after %d records", n)
		}
	}
	if n <= after-1 {
		t.Fatalf("freed after %d records, before FreeAfter %d", n, after)
	}
	if got := d.Names(); !slices.Equal(got, []string{"f", "a", "", ""}) || d.Free() != 2 || d.Freed() != 2 {
		t.Fatalf("names %q, free %d, freed %d", got, d.Free(), d.Freed())
	}
	if !slices.Equal(before, []string{"f", "a", "b", "c"}) {
		t.Fatalf("an earlier Names() slice changed: %q", before)
	}
	// A rejected record's new name does not keep the slot.
	if err := decode(`{"y":"bad","x":{"e":1}}`); !errors.Is(err, &Error{Reason: ReasonType}) {
		t.Fatal(err)
	}
	if d.Free() != 2 || d.Names()[2] != "" {
		t.Fatalf("rollback: names %q, free %d", d.Names(), d.Free())
	}
	// The next new name takes the lowest free slot; an old name is new again.
	if err := decode(`{"y":1,"x":{"b":5,"d":4}}`); err != nil {
		t.Fatal(err)
	}
	if got := d.Names(); !slices.Equal(got, []string{"f", "a", "b", "d"}) || d.Free() != 0 {
		t.Fatalf("names %q, free %d", got, d.Free())
	}
	if r.X[2] != 5 || r.X[3] != 4 {
		t.Fatalf("X = %v", r.X)
	}
	// An empty name is never taken for a free slot.
	d3 := NewDecoder(&DecoderOptions{Learned: []string{"", "a"}, MaxFeatures: 2})
	for _, msg := range []string{`{"y":1,"x":{"":1}}`, `{"y":1,"x":{"a":1,"":2}}`} {
		if err := d3.Decode([]byte(msg), &r); !errors.Is(err, &Error{Reason: ReasonName}) {
			t.Fatalf("%s: got %v, want reason name", msg, err)
		}
	}
	// A decoder restored with a free slot continues from it.
	d2 := NewDecoder(&DecoderOptions{Features: []string{"f"}, Learned: []string{"a", "", "c"}, MaxFeatures: 4})
	if err := d2.Decode([]byte(`{"y":1,"x":{"z":1,"c":2}}`), &r); err != nil {
		t.Fatal(err)
	}
	if got := d2.Names(); !slices.Equal(got, []string{"f", "a", "z", "c"}) || r.X[2] != 1 || r.X[3] != 2 {
		t.Fatalf("names %q X %v", got, r.X)
	}
}

// TestCapFull: while the cap is reached and no slot is free, a new name is
// dropped and counted and the record keeps its known channels; under the
// missing policy "reject" the record is rejected with too_many_features.
func TestCapFull(t *testing.T) {
	for _, tc := range []struct {
		missing string
		reason  string
		dropped uint64
	}{
		{MissingImpute, "", 2},
		{MissingReject, ReasonTooManyFeatures, 0},
	} {
		t.Run(tc.missing, func(t *testing.T) {
			d := NewDecoder(&DecoderOptions{Learned: []string{"a"}, MaxFeatures: 1, Missing: tc.missing})
			var r Record
			err := d.Decode([]byte(`{"y":1,"x":{"a":3,"junk1":1,"junk2":2}}`), &r)
			if tc.reason == "" && err != nil || tc.reason != "" && !errors.Is(err, &Error{Reason: tc.reason}) {
				t.Fatalf("got %v, want %q", err, tc.reason)
			}
			if d.Dropped() != tc.dropped {
				t.Errorf("dropped %d, want %d", d.Dropped(), tc.dropped)
			}
			if err == nil && (len(r.X) != 1 || r.X[0] != 3) {
				t.Errorf("X = %v", r.X)
			}
		})
	}
}

// ExampleDecoder_Dropped shows a name past the cap being dropped.
func ExampleDecoder_Dropped() {
	d := NewDecoder(&DecoderOptions{MaxFeatures: 1})
	var r Record
	err := d.Decode([]byte(`{"y":2,"x":{"amps":4.5,"junk":1}}`), &r)
	fmt.Println(err, d.Names(), r.X, d.Dropped())
	// Output: <nil> [amps] [4.5] 1
}
