//go:build ignore

// make_demo_pump writes demo-pump.csv: an INVENTED centrifugal pump skid,
// 2000 rows of 12 sensor channels and a 0/1 trip label. No real plant, no
// real data: every number comes from the model below with a fixed seed, so
// the file is reproducible bit for bit (math/rand/v2 PCG is a stable
// generator).
//
//	cd testdata && go run make_demo_pump.go
//
// The trip label is Bernoulli with a logistic link on four channels only
// (vibration at the drive end, drive-end bearing temperature, low suction
// pressure, motor current); the other eight are correlated or unrelated
// distractors, so a lasso fit should keep the four and drop most others.
package main

import (
	"bufio"
	"flag"
	"fmt"
	"log"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
)

// Columns, in file order.
var columns = []string{
	"speed_rpm", "flow_m3h", "suction_kpa", "discharge_kpa",
	"motor_amps", "motor_temp_c", "bearing_de_c", "bearing_nde_c",
	"vib_de_mm_s", "vib_nde_mm_s", "oil_level_pct", "ambient_c", "trip",
}

// True logit of the trip label on standardized channels.
const (
	tripBias    = -3.6
	tripVibDE   = 1.4
	tripBearing = 0.9
	tripSuction = -1.1
	tripAmps    = 0.6
)

func main() {
	out := flag.String("o", "demo-pump.csv", "output file")
	rows := flag.Int("n", 2000, "rows")
	flag.Parse()
	f, err := os.Create(*out)
	if err != nil {
		log.Fatal(err)
	}
	w := bufio.NewWriter(f)
	rng := rand.New(rand.NewPCG(20260304, 7))
	for i, c := range columns {
		if i > 0 {
			w.WriteByte(',')
		}
		w.WriteString(c)
	}
	w.WriteByte('\n')
	trips := 0
	ambient := 18.0
	for i := 0; i < *rows; i++ {
		row, trip := sample(rng, &ambient)
		trips += trip
		for j, v := range row {
			if j > 0 {
				w.WriteByte(',')
			}
			w.WriteString(strconv.FormatFloat(v, 'f', 2, 64))
		}
		fmt.Fprintf(w, ",%d\n", trip)
	}
	if err := w.Flush(); err != nil {
		log.Fatal(err)
	}
	if err := f.Close(); err != nil {
		log.Fatal(err)
	}
	fmt.Fprintf(os.Stderr, "%s: %d rows, %d trips\n", *out, *rows, trips)
}

// sample draws one row of the 12 channels and its trip label; ambient is a
// slow random walk shared between rows.
func sample(rng *rand.Rand, ambient *float64) ([]float64, int) {
	n := rng.NormFloat64
	*ambient += 0.05 * n()
	*ambient = math.Max(5, math.Min(35, *ambient))
	speed := 2950 + 12*n()
	flow := 120*speed/2950 + 9*n()
	suction := 250 + 22*n()
	discharge := suction + 700 - 1.2*(flow-120) + 15*n()
	amps := 41 + 0.18*(flow-120) + 1.5*n()
	motorT := 62 + 0.9*(amps-41) + 0.6*(*ambient-18) + 2*n()
	bearingDE := 55 + 0.4*(*ambient-18) + 3.5*n()
	bearingNDE := 0.6*bearingDE + 20 + 2.5*n()
	vibDE := 2.2 * math.Exp(0.35*n())
	vibNDE := 0.5*vibDE + 1.0*math.Exp(0.3*n())
	oil := 78 + 4*n()
	// Standardized drivers of the trip (approximate population moments).
	z := tripBias +
		tripVibDE*(vibDE-2.34)/0.85 +
		tripBearing*(bearingDE-55)/3.5 +
		tripSuction*(suction-250)/22 +
		tripAmps*(amps-41)/2.3
	trip := 0
	if rng.Float64() < 1/(1+math.Exp(-z)) {
		trip = 1
	}
	return []float64{speed, flow, suction, discharge, amps, motorT,
		bearingDE, bearingNDE, vibDE, vibNDE, oil, *ambient}, trip
}
