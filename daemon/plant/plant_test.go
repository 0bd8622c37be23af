package plant

import (
	"bytes"
	"fmt"
	"math"
	"strconv"
	"testing"
	"time"

	"lariat/daemon/record"
)

// TestPlantRecords decodes the plant's records with the wire decoder and
// checks their shape: 40 channels, trip labels 0/1 at a plausible rate,
// bearing temperatures in a plausible range, subjects per stream.
func TestPlantRecords(t *testing.T) {
	p := New(&Options{Seed: 3}, time.Unix(1_700_000_000, 0))
	tripDec := record.NewDecoder(&record.DecoderOptions{Logistic: true})
	tempDec := record.NewDecoder(nil)
	var r record.Record
	var trips, tripN, tempN int
	var tempSum float64
	for range 4000 {
		subj, msg := p.Next()
		switch subj[len(subj)-4:] {
		case "trip":
			if err := tripDec.Decode(msg, &r); err != nil {
				t.Fatalf("%s: %v: %s", subj, err, msg)
			}
			tripN++
			trips += int(r.Y)
		default:
			if err := tempDec.Decode(msg, &r); err != nil {
				t.Fatalf("%s: %v: %s", subj, err, msg)
			}
			tempN++
			tempSum += r.Y
		}
		if len(r.X) != channels || !r.HasT || len(r.Key) == 0 {
			t.Fatalf("record %s: %d channels, t %v, key %q", msg, len(r.X), r.HasT, r.Key)
		}
	}
	if rate := float64(trips) / float64(tripN); rate < 0.02 || rate > 0.5 {
		t.Errorf("trip rate %.3f outside [0.02, 0.5]", rate)
	}
	if mean := tempSum / float64(tempN); mean < 40 || mean > 90 {
		t.Errorf("mean bearing temperature %.1f outside [40, 90]", mean)
	}
}

// TestPlantFault checks that after FaultAfter the faulted pump's bearing
// runs hotter at the same vibration and the others do not.
func TestPlantFault(t *testing.T) {
	const rate = 100.0
	p := New(&Options{Rate: rate, FaultAfter: 10 * time.Second, Seed: 5}, time.Unix(0, 0))
	dec := record.NewDecoder(nil)
	var r record.Record
	// residual of bearing temperature against the healthy relation, per
	// pump, before and after the fault
	var sum [2][4]float64
	var cnt [2][4]int
	for range int(40 * rate) {
		faulted := p.Faulted()
		subj, msg := p.Next()
		if subj[len(subj)-7:] != "bearing" {
			continue
		}
		if err := dec.Decode(msg, &r); err != nil {
			t.Fatal(err)
		}
		pump := int(r.Key[1] - '1')
		resid := r.Y - (20 + 6*r.X[6] + 0.5*r.X[10] + 0.8*r.X[11] - 0.02*(r.X[0]-300))
		k := 0
		if faulted {
			k = 1
		}
		sum[k][pump] += resid
		cnt[k][pump]++
	}
	for pump := range 4 {
		before, after := sum[0][pump]/float64(cnt[0][pump]), sum[1][pump]/float64(cnt[1][pump])
		shifted := math.Abs(after-before) > 5
		if shifted != (pump == 2) {
			t.Errorf("pump p%d: residual %.2f before, %.2f after the fault", pump+1, before, after)
		}
	}
}

// ExamplePlant shows the plant's subjects and channel count.
func ExamplePlant() {
	p := New(&Options{Pumps: 2, Seed: 1}, time.Unix(0, 0))
	for range 4 {
		subj, _ := p.Next()
		fmt.Println(subj)
	}
	fmt.Println(len(p.Channels()), "channels per pump")
	// Output:
	// plant.pump.p1.trip
	// plant.pump.p1.bearing
	// plant.pump.p2.trip
	// plant.pump.p2.bearing
	// 40 channels per pump
}

// TestPlantScoreTwin checks that with ScoreSubject each trip record is
// followed by the same reading without its label.
func TestPlantScoreTwin(t *testing.T) {
	p := New(&Options{Seed: 4, ScoreSubject: func(id string) string { return "score." + id }}, time.Unix(0, 0))
	labeled := record.NewDecoder(&record.DecoderOptions{Logistic: true})
	unlabeled := record.NewDecoder(&record.DecoderOptions{Unlabeled: true})
	var r, twin record.Record
	for range 50 {
		subj, msg := p.Next()
		if subj[len(subj)-4:] != "trip" {
			continue
		}
		if err := labeled.Decode(msg, &r); err != nil {
			t.Fatal(err)
		}
		subj2, msg2 := p.Next()
		if subj2 != "score."+string(r.Key) {
			t.Fatalf("after %s came %s", subj, subj2)
		}
		if err := unlabeled.Decode(msg2, &twin); err != nil {
			t.Fatal(err)
		}
		if !math.IsNaN(twin.Y) || string(twin.Key) != string(r.Key) || fmt.Sprint(twin.X) != fmt.Sprint(r.X) {
			t.Fatalf("twin %s of %s", msg2, msg)
		}
	}
}

// TestPlantEncoding checks the plant's records against the wire encoder and
// the plant's rounding: each message is exactly what
// record.AppendJSON writes for its decoded record (so the plant has no
// encoder of its own), channels carry 3 decimals and labels 6 significant
// digits, and the time is the plant's clock in milliseconds.
func TestPlantEncoding(t *testing.T) {
	start := time.Unix(1_700_000_000, 0)
	p := New(&Options{Seed: 6, ScoreSubject: func(id string) string { return "score." + id }}, start)
	dec := record.NewDecoder(&record.DecoderOptions{Unlabeled: true})
	var r record.Record
	var again []byte
	for i := range 3000 {
		now := p.Now()
		_, msg := p.Next()
		if err := dec.Decode(msg, &r); err != nil {
			t.Fatalf("%v: %s", err, msg)
		}
		// An unlabeled decoder skips "y"; read it back from the message.
		r.Y = math.NaN()
		if i := bytes.Index(msg, []byte(`"y":`)); i >= 0 {
			end := bytes.IndexByte(msg[i:], ',')
			y, err := strconv.ParseFloat(string(msg[i+4:i+end]), 64)
			if err != nil {
				t.Fatalf("y in %s: %v", msg, err)
			}
			r.Y = y
			if s := strconv.FormatFloat(y, 'g', 6, 64); s != strconv.FormatFloat(y, 'g', -1, 64) {
				t.Fatalf("record %d: label %v has more than 6 significant digits", i, y)
			}
		}
		if again = record.AppendJSON(again[:0], dec.Names(), &r); !bytes.Equal(again, msg) {
			t.Fatalf("record %d:\n got %s\nwant %s (record.AppendJSON)", i, msg, again)
		}
		for j, v := range r.X {
			if w, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'f', 3, 64), 64); w != v {
				t.Fatalf("record %d: channel %d = %v, not rounded to 3 decimals", i, j, v)
			}
		}
		if !r.HasT || r.T != now.UnixMilli() {
			t.Fatalf("record %d: t %d (%v), want %d", i, r.T, r.HasT, now.UnixMilli())
		}
	}
}

// TestPlantNextAllocs checks that the plant reuses its buffers: Next
// allocates nothing once running.
func TestPlantNextAllocs(t *testing.T) {
	p := New(&Options{Seed: 2, ScoreSubject: func(id string) string { return "score." + id }}, time.Unix(0, 0))
	p.Next()
	if n := testing.AllocsPerRun(1000, func() { p.Next() }); n != 0 {
		t.Errorf("Next allocates %v times per call, want 0", n)
	}
}
