package online

import (
	"fmt"
	"testing"
	"time"
)

// BenchmarkRidgeGrid measures what the degrees-of-freedom anchor of a ridge
// grid costs per record: a ridge ladder and a lasso ladder (the baseline,
// anchored on λ_max) at the daemon's defaults (K = 12, 2 steps per record,
// window 10,000) take the same records in interleaved chunks of 64, so the
// load of a shared machine hits both alike, and the ratio of their times is
// reported ("x-lasso"). The ridge ladder recomputes the Gram matrix and its
// eigenvalues once per window length of records, so run at least a few
// window lengths: -benchtime 40000x.
func BenchmarkRidgeGrid(b *testing.B) {
	const window = 10000
	for _, d := range []int{16, 64, 128} {
		pool := benchPool(window+4096, d)
		b.Run(fmt.Sprintf("d%d", d), func(b *testing.B) {
			ridge := Ridge()
			mk := func(p *Penalty) *Ladder {
				l, err := NewLadder(&Options{Features: d, Window: window, Penalty: p, Seed: 1})
				if err != nil {
					b.Fatal(err)
				}
				for i := range window {
					_ = l.Add(pool[i%len(pool)])
				}
				return l
			}
			lr, ll := mk(&ridge), mk(nil)
			var tr, tl time.Duration
			b.ReportAllocs()
			b.ResetTimer()
			i := window
			for done := 0; done < b.N; {
				c := min(64, b.N-done)
				t0 := time.Now()
				for k := range c {
					if err := lr.Add(pool[(i+k)%len(pool)]); err != nil {
						b.Fatal(err)
					}
				}
				tr += time.Since(t0)
				b.StopTimer()
				t0 = time.Now()
				for k := range c {
					_ = ll.Add(pool[(i+k)%len(pool)])
				}
				tl += time.Since(t0)
				b.StartTimer()
				i += c
				done += c
			}
			b.ReportMetric(float64(tr)/float64(tl), "x-lasso")
			b.ReportMetric(float64(tl.Nanoseconds())/float64(b.N), "lasso-ns/rec")
		})
	}
}

// BenchmarkSpectrum measures one spectrum of the ridge anchor on a full
// window of 10,000 records (the Gram matrix, O(n·d²), and its eigenvalues,
// O(d³)): the work the ridge grid adds once per window length.
func BenchmarkSpectrum(b *testing.B) {
	const window = 10000
	for _, d := range []int{16, 64, 128} {
		pool := benchPool(window, d)
		ridge := Ridge()
		l, err := NewLadder(&Options{Features: d, Window: window, Penalty: &ridge, Seed: 1})
		if err != nil {
			b.Fatal(err)
		}
		for _, r := range pool {
			_ = l.Add(r)
		}
		b.Run(fmt.Sprintf("d%d", d), func(b *testing.B) {
			for b.Loop() {
				l.grid.respec = true
				l.ridgeAnchor()
			}
		})
	}
}
