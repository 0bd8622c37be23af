//go:build ignore

// make_demo_stream writes demo-stream.jsonl: an INVENTED recorded stream
// for `lariat replay`, the bearing-temperature records of the simulated
// pumping station of `lariat demo` (package daemon/plant). No real plant,
// no real data: the plant's machines, channels, coefficients and fault are
// made up, and a fixed seed makes the file reproducible bit for bit.
//
//	go run testdata/make_demo_stream.go
//
// 6000 records of one pump, one per second of simulated time (the plant at
// 2 labeled records per second, every second one a bearing-temperature
// record), 100 minutes in all. The bearing fault of the pump begins
// halfway, at 50 minutes. To keep the file small each record
// carries the 14 process channels and the first 6 of the plant's 26
// uninformative auxiliary channels.
package main

import (
	"bufio"
	"log"
	"os"
	"strings"
	"time"

	"lariat/daemon/plant"
	"lariat/daemon/record"
)

const (
	records  = 6000
	keep     = 20  // channels written: 14 process, 6 auxiliary
	rate     = 2.0 // plant records per second (trip and bearing)
	duration = records * 2 / rate * float64(time.Second)
	out      = "testdata/demo-stream.jsonl"
)

func main() {
	start := time.Date(2026, 1, 5, 6, 0, 0, 0, time.UTC)
	p := plant.New(&plant.Options{Pumps: 1, Rate: rate, Seed: 7, FaultAfter: time.Duration(duration / 2)}, start)
	names := p.Channels()
	dec := record.NewDecoder(&record.DecoderOptions{Features: names, MaxFeatures: len(names)})
	f, err := os.Create(out)
	if err != nil {
		log.Fatal(err)
	}
	w := bufio.NewWriter(f)
	var rec record.Record
	var buf []byte
	for n := 0; n < records; {
		subj, msg := p.Next()
		if !strings.HasSuffix(subj, ".bearing") {
			continue
		}
		if err := dec.Decode(msg, &rec); err != nil {
			log.Fatal(err)
		}
		rec.X = rec.X[:keep]
		buf = append(record.AppendJSON(buf[:0], names[:keep], &rec), '\n')
		if _, err := w.Write(buf); err != nil {
			log.Fatal(err)
		}
		n++
	}
	if err := w.Flush(); err != nil {
		log.Fatal(err)
	}
	if err := f.Close(); err != nil {
		log.Fatal(err)
	}
}
