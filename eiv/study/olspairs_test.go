package study_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"eivfit/eiv/study"
)

// TestOLSComparisonPairedJackknife: without a bootstrap, the comparison of
// OLS with each fit carries the paired jackknife SE of the slope
// difference, formed from the two fits' own leave-one-out lines:
// √((n−1)/n·Σ(θᵢ − θ̄)²), θᵢ = b_OLS,−i − b_fit,−i (Efron & Tibshirani 1993,
// eq. 11.5). The pairs come from a pool shared by requests, so the fits
// run at several n in turn, each twice. Tolerance 1e-12 relative: the
// same sums in the same order, with room for rounding.
func TestOLSComparisonPairedJackknife(t *testing.T) {
	for _, n := range []int{40, 7, 120, 40} {
		rng := rand.New(rand.NewPCG(uint64(n), 20))
		var d study.Data
		for range n {
			xt := 5 + 20*rng.Float64()
			d.X = append(d.X, xt+0.2*rng.NormFloat64())
			d.Y = append(d.Y, 0.1+1.03*xt+0.25*rng.NormFloat64())
			d.SX = append(d.SX, 0.2)
			d.SY = append(d.SY, 0.25)
		}
		for run := range 2 {
			t.Run(fmt.Sprintf("n=%d/run=%d", n, run), func(t *testing.T) {
				res, err := study.Fit(context.Background(), d, &study.FitOptions{Methods: []string{"ols", "deming", "york"}})
				if err != nil {
					t.Fatal(err)
				}
				ols := res.Get("ols").Fit.Jackknife
				if len(res.OLSBias) != 2 || ols == nil {
					t.Fatalf("%d comparisons, OLS jackknife %v", len(res.OLSBias), ols != nil)
				}
				for _, c := range res.OLSBias {
					jf := res.Get(string(c.Method)).Fit.Jackknife
					th := make([]float64, n)
					var m float64
					for i := range th {
						th[i] = ols.SlopeLOO[i] - jf.SlopeLOO[i]
						m += th[i]
					}
					m /= float64(n)
					var ss float64
					for _, v := range th {
						ss += (v - m) * (v - m)
					}
					want := math.Sqrt(float64(n-1) / float64(n) * ss)
					got := c.SlopeDiff.SE
					if c.SlopeDiff.CI.Method != "paired jackknife-t" || !(math.Abs(got-want) <= 1e-12*want) {
						t.Errorf("%s: slope difference SE %.17g (%q), want %.17g from the fits' leave-one-out lines", c.Method, got, c.SlopeDiff.CI.Method, want)
					}
				}
			})
		}
	}
}
