package eiv_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"eivfit/eiv"
)

var sinkMC *eiv.MonteCarloResult

// BenchmarkCalibrationMonteCarlo: 10⁶ trials for one unknown (target
// < 50 ms on 2 cores).
func BenchmarkCalibrationMonteCarlo(b *testing.B) {
	c := lineCal(b, 10, 2, 0.05)
	for _, u := range []struct {
		name string
		u    eiv.Unknown
	}{{"normal", eiv.Unknown{Y: []float64{10.3}, UY: 0.05}}, {"t", eiv.Unknown{Y: []float64{10.3, 10.35, 10.28}}}} {
		inv := mustInverse(b, c, u.u, nil)
		b.Run(u.name, func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				mc, err := c.MonteCarlo(context.Background(), &inv, &eiv.MonteCarloOptions{Trials: 1_000_000, Seed: 1})
				if err != nil {
					b.Fatal(err)
				}
				sinkMC = mc
			}
		})
	}
}

// BenchmarkCalibrationInverse: a calibration and 1,000 unknowns without
// Monte Carlo (target < 20 ms), by model.
func BenchmarkCalibrationInverse(b *testing.B) {
	unknowns := make([]eiv.Unknown, 1000)
	for i := range unknowns {
		unknowns[i] = eiv.Unknown{Y: []float64{2 + 0.01*float64(i), 2.1 + 0.01*float64(i), 2.05 + 0.01*float64(i)}}
	}
	for _, gc := range []struct {
		name string
		opt  *eiv.CalibrationOptions
		p    float64
	}{{"gdr k=2", nil, 0}, {"gdr p=0.95", nil, 0.95}, {"gmr p=0.95", &eiv.CalibrationOptions{Shared: gmrCases[0].shared}, 0.95}} {
		b.Run(fmt.Sprintf("m=6/%s", gc.name), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				c, err := eiv.Calibrate(gmrCases[0].standards(), gc.opt)
				if err != nil {
					b.Fatal(err)
				}
				if _, err := c.Inverse(unknowns, &eiv.InverseOptions{CoverageProbability: gc.p}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkCoverageK: the coverage factor at 1,000 ν below the expansion's
// range (uncached, as for unknowns with different ν_eff), against gonum's
// StudentsT.Quantile (the inverse incomplete beta), which coverageK used
// before behind a cache that a new ν misses.
func BenchmarkCoverageK(b *testing.B) {
	for _, bc := range []struct {
		name string
		f    func(p, nu float64) float64
	}{
		{"coverageK", eiv.CoverageK},
		{"gonum", func(p, nu float64) float64 {
			return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: math.Trunc(nu)}.Quantile(0.5 + p/2)
		}},
	} {
		b.Run(bc.name, func(b *testing.B) {
			for b.Loop() {
				for i := range 1000 {
					sinkK = bc.f(0.95, 3+0.39*float64(i)) // ν from 3 to 392: the iterative range
				}
			}
		})
	}
}

var sinkK float64

var sinkT float64

// BenchmarkStudentT: one t draw per op, by ν (the mean of ν + 1 readings).
func BenchmarkStudentT(b *testing.B) {
	for _, nu := range []float64{1, 2, 3, 4, 5, 9} {
		b.Run(fmt.Sprintf("nu=%g", nu), func(b *testing.B) {
			src := rand.NewPCG(1, 2)
			var s float64
			for b.Loop() {
				s += eiv.StudentT(src, nu)
			}
			sinkT = s
		})
	}
}
