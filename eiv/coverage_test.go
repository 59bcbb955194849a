package eiv_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"eivfit/eiv"
)

// raceEnabled is set under the race detector, which slows the Monte Carlo
// study tenfold; the study runs in the plain test pass.
var raceEnabled bool

// regime generates one dataset of an error regime with true line
// y = 2 + 1.1·x and true x uniform on [10, 50].
type regime struct {
	name string
	// sigma returns the stated σx, σy at true level xt.
	sigma func(xt float64, r *rand.Rand) (sx, sy float64)
}

var regimes = []regime{
	{"constant σ", func(float64, *rand.Rand) (float64, float64) { return 2, 2 }},
	{"σ ∝ level", func(xt float64, _ *rand.Rand) (float64, float64) { return 0.06 * xt, 0.06 * (2 + 1.1*xt) }},
	{"per-point σ", func(_ float64, r *rand.Rand) (float64, float64) { return 0.5 + 3*r.Float64(), 0.5 + 3*r.Float64() }},
}

func draw(rg regime, n int, r *rand.Rand) eiv.Sample {
	s := eiv.Sample{X: make([]float64, n), Y: make([]float64, n), SX: make([]float64, n), SY: make([]float64, n)}
	for i := range n {
		xt := 10 + 40*r.Float64()
		sx, sy := rg.sigma(xt, r)
		s.X[i] = xt + sx*r.NormFloat64()
		s.Y[i] = 2 + 1.1*xt + sy*r.NormFloat64()
		s.SX[i], s.SY[i] = sx, sy
	}
	return s
}

type coverageRow struct {
	regime                  string
	n                       int
	york, deming, bca, ols  float64 // share of intervals that hold the true slope
	yorkN, demN, bcaN, olsN int
}

// coverage runs reps datasets and counts how often each 95 % slope interval
// holds the true slope 1.1.
func coverage(rg regime, n, reps, B int, seed uint64) coverageRow {
	const b = 1.1
	row := coverageRow{regime: rg.name, n: n}
	var hy, hd, hb, ho int
	for k := range reps {
		r := rand.New(rand.NewPCG(seed, uint64(k)))
		s := draw(rg, n, r)
		in := func(iv eiv.Interval) bool { return iv.Lower <= b && b <= iv.Upper }
		if f, err := eiv.York(s.X, s.Y, s.SX, s.SY, nil, nil); err == nil {
			row.yorkN++
			if in(f.Slope.CI) {
				hy++
			}
		}
		lam, _ := eiv.LambdaFromUncertainties(s.SX, s.SY)
		if f, err := eiv.Deming(s.X, s.Y, &eiv.DemingOptions{Lambda: lam, Jackknife: true}); err == nil {
			row.demN++
			if in(f.Jackknife.Slope.CI) {
				hd++
			}
		}
		if f, err := eiv.OLS(s.X, s.Y, nil); err == nil {
			row.olsN++
			if in(f.Slope.CI) {
				ho++
			}
		}
		if B > 0 {
			br, err := eiv.Bootstrap(context.Background(), s, []eiv.Estimator{eiv.YorkEstimator{}},
				&eiv.BootstrapOptions{Resamples: B, Seed: seed + uint64(k)})
			if err == nil {
				if sum, err := br.Summarize(eiv.SlopeOf(0)); err == nil && sum.BCa != nil {
					row.bcaN++
					if in(*sum.BCa) {
						hb++
					}
				}
			}
		}
	}
	share := func(h, m int) float64 {
		if m == 0 {
			return math.NaN()
		}
		return float64(h) / float64(m)
	}
	row.york, row.deming, row.bca, row.ols = share(hy, row.yorkN), share(hd, row.demN), share(hb, row.bcaN), share(ho, row.olsN)
	return row
}

// TestCoverage is a Monte Carlo study of the nominal 95 % slope intervals
// in three error regimes. The bounded run (CI) uses 500 datasets per cell:
// a binomial SE of 1.0 %, so each method that holds its level must land
// within 0.95 ± 0.045 (4.5 SE; 0.88 for the bootstrap, whose small-n
// undercoverage is known: Efron & Tibshirani 1993, §14.4). Set
// EIVFIT_COVERAGE=long for the documented table (2,000 datasets, B = 1,000).
func TestCoverage(t *testing.T) {
	if raceEnabled || testing.Short() {
		t.Skip("Monte Carlo study: runs in the plain test pass")
	}
	long := os.Getenv("EIVFIT_COVERAGE") == "long"
	reps, B, ns := 500, 200, []int{20, 40}
	if long {
		reps, B, ns = 2000, 1000, []int{20, 40, 100}
	}
	var table strings.Builder
	fmt.Fprintf(&table, "| regime | n | York analytic | Deming jackknife | York bootstrap BCa | OLS |\n|---|---|---|---|---|---|\n")
	for _, rg := range regimes {
		for _, n := range ns {
			row := coverage(rg, n, reps, B, 1000+uint64(n))
			fmt.Fprintf(&table, "| %s | %d | %.3f | %.3f | %.3f | %.3f |\n", row.regime, row.n, row.york, row.deming, row.bca, row.ols)
			if long {
				continue
			}
			if math.Abs(row.york-0.95) > 0.045 {
				t.Errorf("%s n=%d: York analytic coverage %.3f", rg.name, n, row.york)
			}
			if row.bca < 0.88 || row.bca > 0.995 {
				t.Errorf("%s n=%d: York BCa coverage %.3f", rg.name, n, row.bca)
			}
			// Deming with λ from mean σ² is the right model only for
			// constant σ; elsewhere its jackknife interval is reported, not asserted.
			if rg.name == "constant σ" && math.Abs(row.deming-0.95) > 0.045 {
				t.Errorf("%s n=%d: Deming jackknife coverage %.3f", rg.name, n, row.deming)
			}
		}
	}
	t.Logf("slope coverage of nominal 95 %% intervals (%d datasets per cell, B = %d):\n%s", reps, B, table.String())
}

// OLS coverage collapses as σx grows: its interval centres on the
// attenuated slope κ·b. With true x uniform on [10, 50] (var 133) and
// n = 100, κ = 133/(133 + σx²).
func TestOLSCoverageCollapses(t *testing.T) {
	if raceEnabled || testing.Short() {
		t.Skip("Monte Carlo study: runs in the plain test pass")
	}
	prev := 1.0
	for _, sx := range []float64{0.01, 2, 5} {
		rg := regime{fmt.Sprintf("σx = %g", sx), func(float64, *rand.Rand) (float64, float64) { return sx, 1 }}
		row := coverage(rg, 100, 300, 0, 7)
		t.Logf("σx = %g: OLS %.3f, York %.3f", sx, row.ols, row.york)
		if math.Abs(row.york-0.95) > 0.045 {
			t.Errorf("σx = %g: York coverage %.3f", sx, row.york)
		}
		if row.ols > prev+0.03 {
			t.Errorf("σx = %g: OLS coverage %.3f did not fall (before %.3f)", sx, row.ols, prev)
		}
		prev = row.ols
	}
	if prev > 0.2 {
		t.Errorf("at σx = 5 OLS still covers %.3f of the time", prev)
	}
}
