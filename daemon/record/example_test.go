package record_test

import (
	"errors"
	"fmt"

	"lariat/daemon/record"
)

func Example() {
	dec := record.NewDecoder(&record.DecoderOptions{Features: []string{"suction_kpa"}})
	var r record.Record // reused for every message
	for _, msg := range []string{
		`{"t": "2026-03-04T05:06:07.089Z", "y": 1, "x": {"suction_kpa": 312.4, "amps_l1": 41.2}, "w": 1, "key": "unit-07"}`,
		`{"t": 1772600768089, "y": 0.5, "v": [310.9]}`,
		`{"y": 2, "x": {"amps_l1": 1e400}}`,
	} {
		if err := dec.Decode([]byte(msg), &r); err != nil {
			var e *record.Error
			if errors.As(err, &e) {
				fmt.Println("rejected:", e.Reason)
			}
			continue
		}
		fmt.Println(dec.Names(), r.X, r.Y, r.T)
		fmt.Printf("%s\n", record.AppendJSON(nil, dec.Names(), &r))
	}
	// Output:
	// [suction_kpa amps_l1] [312.4 41.2] 1 1772600767089
	// {"t":"2026-03-04T05:06:07.089Z","y":1,"x":{"suction_kpa":312.4,"amps_l1":41.2},"key":"unit-07"}
	// [suction_kpa amps_l1] [310.9 NaN] 0.5 1772600768089
	// {"t":"2026-03-04T05:06:08.089Z","y":0.5,"x":{"suction_kpa":310.9}}
	// rejected: not_finite
}
