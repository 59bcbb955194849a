package eiv_test

import (
	"context"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"eivfit/eiv"
)

// Regression dilution: with classical error in x, the OLS slope tends to
// κ·b where κ = var(true x)/(var(true x) + σx²) (Fuller 1987, §1.1; common
// practice). True x ~ U[10, 50] has variance 1600/12 = 133.3; σx = 5 gives
// κ = 133.3/158.3 = 0.842, so OLS understates the slope by 15.8 %.
func TestCompareOLSDilution(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 3))
	n := 400
	s := eiv.Sample{X: make([]float64, n), Y: make([]float64, n), SX: make([]float64, n), SY: make([]float64, n)}
	for i := range n {
		xt := 10 + 40*r.Float64()
		s.X[i] = xt + 5*r.NormFloat64()
		s.Y[i] = 2 + 1.1*xt + 1*r.NormFloat64()
		s.SX[i], s.SY[i] = 5, 1
	}
	ols := must(t)(eiv.OLS(s.X, s.Y, nil))
	york := must(t)(eiv.York(s.X, s.Y, s.SX, s.SY, nil, nil))
	br, err := eiv.Bootstrap(context.Background(), s, []eiv.Estimator{eiv.YorkEstimator{}, eiv.OLSEstimator{}},
		&eiv.BootstrapOptions{Resamples: 1000, Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	c := eiv.CompareOLS(ols, york, s.X, s.SX, []float64{30}, br, nil)
	const kappa = (1600.0 / 12) / (1600.0/12 + 25)
	// κ estimated from the data: sampling error of var(x) at n = 400 is ~5 %.
	if math.Abs(c.Reliability-kappa) > 0.03 {
		t.Errorf("reliability %.4f, theory %.4f", c.Reliability, kappa)
	}
	// The attenuated slope κ·b_York predicts the OLS slope (to the
	// sampling error of both, a few percent).
	if math.Abs(c.PredictedOLSSlope/ols.Slope.Value-1) > 0.04 {
		t.Errorf("predicted OLS slope %.4f, observed %.4f", c.PredictedOLSSlope, ols.Slope.Value)
	}
	want := 100 * (kappa - 1)
	iv := c.SlopeRelative.CI
	if !(iv.Lower <= want && want <= iv.Upper) {
		t.Errorf("relative slope CI [%.2f, %.2f] %% misses the theoretical %.2f %%", iv.Lower, iv.Upper, want)
	}
	if iv.Method != "paired bootstrap percentile" {
		t.Errorf("interval method %q", iv.Method)
	}
	// The bias at x = 30 under each line, as a + (b − 1)·30.
	near(t, "ols bias at 30", c.At[0].OLS, ols.Intercept.Value+(ols.Slope.Value-1)*30, 1e-12)
	if !strings.Contains(c.Summary, "would understate the slope by") || !strings.Contains(c.Summary, "at x = 30") {
		t.Errorf("summary %q", c.Summary)
	}
	// Without a bootstrap, the paired jackknife gives the interval.
	jack, err := eiv.JackknifeLines(s, []eiv.Estimator{eiv.YorkEstimator{}, eiv.OLSEstimator{}})
	if err != nil {
		t.Fatal(err)
	}
	cj := eiv.CompareOLS(ols, york, s.X, s.SX, nil, nil, jack)
	if cj.SlopeRelative.CI.Method != "paired jackknife-t" || !(cj.SlopeRelative.CI.Lower <= want && want <= cj.SlopeRelative.CI.Upper) {
		t.Errorf("jackknife interval %+v", cj.SlopeRelative.CI)
	}
}
