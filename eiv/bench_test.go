package eiv_test

import (
	"context"
	"fmt"
	"testing"
	"time"

	"eivfit/eiv"
)

var sinkFit *eiv.Fit

// reportCPU reports the process's CPU time per operation since cpu0 (on
// every core together): on a machine shared with other work it grows far
// less than the wall time while the benchmark waits for a core.
func reportCPU(b *testing.B, cpu0 time.Duration) {
	if cpu := processCPU() - cpu0; cpu > 0 && cpu0 > 0 {
		b.ReportMetric(float64(cpu.Nanoseconds())/float64(b.N), "cpu-ns/op")
	}
}

func BenchmarkYork(b *testing.B) {
	for _, n := range []int{100, 10_000, 30_000, 100_000, 1_000_000} {
		d := randomData(1, n, false)
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			cpu0 := processCPU()
			for b.Loop() {
				f, err := eiv.York(d.x, d.y, d.sx, d.sy, nil, nil)
				if err != nil {
					b.Fatal(err)
				}
				sinkFit = f
			}
			reportCPU(b, cpu0)
		})
	}
}

// BenchmarkYorkJackknife times a small York fit with its leave-one-out
// standard errors (n = 40 is the service's small-fit case), with and
// without correlated errors, and with one σx, σy for every point (as in
// the service's small-fit benchmark body).
func BenchmarkYorkJackknife(b *testing.B) {
	for _, n := range []int{40, 400} {
		for _, corr := range []bool{false, true} {
			d := randomData(3, n, corr)
			benchYorkJackknife(b, fmt.Sprintf("n=%d/corr=%v", n, corr), d, corr)
		}
	}
	d := randomData(3, 40, false)
	for i := range d.sx {
		d.sx[i], d.sy[i] = d.sx[0], d.sy[0]
	}
	benchYorkJackknife(b, "n=40/equal-sigma", d, false)
}

func benchYorkJackknife(b *testing.B, name string, d dataset, corr bool) {
	var r []float64
	if corr {
		r = d.r
	}
	b.Run(name, func(b *testing.B) {
		b.ReportAllocs()
		cpu0 := processCPU()
		for b.Loop() {
			f, err := eiv.York(d.x, d.y, d.sx, d.sy, r, &eiv.YorkOptions{Jackknife: true})
			if err != nil || f.Jackknife == nil {
				b.Fatal(err)
			}
			sinkFit = f
		}
		reportCPU(b, cpu0)
	})
}

func BenchmarkDeming(b *testing.B) {
	for _, n := range []int{100, 10_000, 1_000_000} {
		d := randomData(1, n, false)
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				f, err := eiv.Deming(d.x, d.y, &eiv.DemingOptions{Lambda: 1.2})
				if err != nil {
					b.Fatal(err)
				}
				sinkFit = f
			}
		})
	}
}

// BenchmarkBootstrap times B = 10,000 pairs resamples (with the jackknife
// for BCa and the summary) and reports the cost per resample and the CPU
// time (reportCPU).
func BenchmarkBootstrap(b *testing.B) {
	const B = 10_000
	for _, c := range []struct {
		name string
		est  eiv.Estimator
	}{{"york", eiv.YorkEstimator{}}, {"deming", eiv.DemingEstimator{Lambda: 1.2}}} {
		for _, n := range []int{100, 1000} {
			s := sampleOf(randomData(2, n, false))
			s.R = nil
			b.Run(fmt.Sprintf("%s/n=%d", c.name, n), func(b *testing.B) {
				b.ReportAllocs()
				cpu0 := processCPU()
				for b.Loop() {
					r, err := eiv.Bootstrap(context.Background(), s, []eiv.Estimator{c.est}, &eiv.BootstrapOptions{Resamples: B, Seed: 1})
					if err != nil {
						b.Fatal(err)
					}
					if _, err := r.Summarize(eiv.SlopeOf(0)); err != nil {
						b.Fatal(err)
					}
				}
				b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/B, "ns/resample")
				reportCPU(b, cpu0)
			})
		}
	}
}
