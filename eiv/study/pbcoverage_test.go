package study_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"eivfit/eiv"
)

// TestPassingBablokBiasCoverage is the evidence for the study's choice of
// Passing–Bablok's bias interval at a decision level (README, "What the
// numbers mean"): on simulated studies of 40 samples (true values uniform
// on 5–50, normal errors SD 1 on both methods, true line y = 0.5 + 1.02·x,
// seeded), the share of intervals covering the true bias a + (b − 1)·X at
// X = 10 and 40. The jackknife t interval (what the study gives without
// resamples) covers too rarely; the bootstrap BCa interval (what it gives
// with resamples) is checked against the nominal 0.95 within Monte Carlo
// error: 300 trials give an SE of √(0.95·0.05/300) = 0.0126, so the
// bootstrap (B = 499) must lie in [0.91, 0.99] (about 3 SE) at each level,
// and the jackknife, pooled over both levels (SE 0.009), below 0.935.
func TestPassingBablokBiasCoverage(t *testing.T) {
	if testing.Short() {
		t.Skip("simulation")
	}
	const (
		trials = 300
		n      = 40
		a, b   = 0.5, 1.02
	)
	levels := []float64{10, 40}
	var jackCover, bootCover [2]int
	for tr := range trials {
		rng := rand.New(rand.NewPCG(18, uint64(tr)))
		x, y := make([]float64, n), make([]float64, n)
		for i := range n {
			tau := 5 + 45*rng.Float64()
			x[i] = tau + rng.NormFloat64()
			y[i] = a + b*tau + rng.NormFloat64()
		}
		s := eiv.Sample{X: x, Y: y}
		pb, err := eiv.PassingBablok(x, y, nil)
		if err != nil {
			t.Fatal(err)
		}
		full := eiv.Line{Intercept: pb.Fit.Intercept.Value, Slope: pb.Fit.Slope.Value}
		jl, err := eiv.JackknifeLines(s, []eiv.Estimator{eiv.PassingBablokEstimator{}})
		if err != nil {
			t.Fatal(err)
		}
		loo := make([]eiv.Line, len(jl))
		for i, l := range jl {
			loo[i] = l[0]
		}
		br, err := eiv.Bootstrap(context.Background(), s, []eiv.Estimator{eiv.PassingBablokEstimator{}},
			&eiv.BootstrapOptions{Resamples: 499, Seed: uint64(tr)})
		if err != nil {
			t.Fatal(err)
		}
		for k, x0 := range levels {
			truth := a + (b-1)*x0
			p := eiv.JackknifeAt(full, loo, x0, 0.95)
			if p.Bias.CI.Lower <= truth && truth <= p.Bias.CI.Upper {
				jackCover[k]++
			}
			sum, err := br.Summarize(func(l []eiv.Line) float64 { return l[0].Intercept + l[0].Slope*x0 })
			if err != nil || sum.BCa == nil {
				t.Fatalf("trial %d: no BCa interval (%v)", tr, err)
			}
			if sum.BCa.Lower-x0 <= truth && truth <= sum.BCa.Upper-x0 {
				bootCover[k]++
			}
		}
	}
	for k, x0 := range levels {
		j, bt := float64(jackCover[k])/trials, float64(bootCover[k])/trials
		t.Logf("X = %g: jackknife coverage %.3f, bootstrap BCa coverage %.3f (%d trials, n = %d)", x0, j, bt, trials, n)
		if bt < 0.91 || bt > 0.99 {
			t.Errorf("X = %g: bootstrap coverage %.3f outside [0.91, 0.99]", x0, bt)
		}
	}
	if j := float64(jackCover[0]+jackCover[1]) / (2 * trials); j >= 0.935 || math.IsNaN(j) {
		t.Errorf("pooled jackknife coverage %.3f: the warning's claim no longer holds", j)
	}
}
