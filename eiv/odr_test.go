package eiv_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"eivfit/eiv"
	"eivfit/eiv/reftest"
)

type odrCase struct {
	X  []float64 `json:"x"`
	Y  []float64 `json:"y"`
	SX []float64 `json:"sx"`
	SY []float64 `json:"sy"`
}

type odrResult struct {
	Beta      []float64   `json:"beta"`
	CovBeta   [][]float64 `json:"cov_beta"`
	SDBeta    []float64   `json:"sd_beta"`
	ResVar    float64     `json:"res_var"`
	SumSquare float64     `json:"sum_square"`
	Info      int         `json:"info"`
}

// synth draws n points on y = 2 + 1.1·x, true x uniform on [1, 100], with
// errors of the given standard deviations added. A nil sigma function means
// per-point σ drawn at random (heteroscedastic).
func synth(seed uint64, n int, sxf, syf func(i int, r *rand.Rand) float64) odrCase {
	r := rand.New(rand.NewPCG(seed, 42))
	c := odrCase{}
	for i := range n {
		xt := 1 + 99*r.Float64()
		sx, sy := sxf(i, r), syf(i, r)
		c.X = append(c.X, xt+sx*r.NormFloat64())
		c.Y = append(c.Y, 2+1.1*xt+sy*r.NormFloat64())
		c.SX = append(c.SX, sx)
		c.SY = append(c.SY, sy)
	}
	return c
}

func constSigma(s float64) func(int, *rand.Rand) float64 {
	return func(int, *rand.Rand) float64 { return s }
}

func uniformSigma(lo, hi float64) func(int, *rand.Rand) float64 {
	return func(_ int, r *rand.Rand) float64 { return lo + (hi-lo)*r.Float64() }
}

// York (r = 0) and Deming against scipy.odr (ODRPACK, Debian python3-scipy),
// run here by testdata/ref_odr.py with analytic derivatives and tolerances
// 1e-15. Both minimise the same weighted sum of squares, so the estimates
// must agree to 1e-9 relative (the bound; ODRPACK's stopping rule
// leaves ~1e-12 differences). York's unscaled SEs are the same quantity as
// ODRPACK's unscaled cov_beta (testdata/ref/pearson-york.csv notes this);
// they come from a linearisation at a point ODRPACK has converged to only
// within its tolerance, so they are compared to 1e-7 relative.
//
// ODRPACK stops on sum-of-squares convergence, which fixes each parameter
// only to about √ε of its standard error; the intercept, a small difference
// a = ȳ − b·x̄ of large numbers, is therefore compared to 1e-9 relative to
// the data level |ȳ|. The Deming line is also checked against a second,
// independent algorithm: total least squares by numpy's SVD of the centred
// (x, y/√λ), to 1e-12 (double-precision SVD on n ≤ 100 well-scaled points).
func TestAgainstSciPyODR(t *testing.T) {
	py := reftest.Python(t, "scipy.odr", "numpy")
	york := []odrCase{
		synth(1, 20, uniformSigma(0.2, 2), uniformSigma(0.3, 3)),
		synth(2, 50, uniformSigma(0.5, 1), uniformSigma(0.1, 5)),
		synth(3, 200, uniformSigma(1, 3), uniformSigma(1, 3)),
	}
	// Constant σ: Deming with λ = σy²/σx².
	deming := []odrCase{
		synth(4, 30, constSigma(1), constSigma(1)),
		synth(5, 40, constSigma(2), constSigma(0.5)),
		synth(6, 100, constSigma(0.5), constSigma(3)),
	}
	var tls []map[string]any
	for _, c := range deming {
		tls = append(tls, map[string]any{"x": c.X, "y": c.Y, "lambda": c.SY[0] * c.SY[0] / (c.SX[0] * c.SX[0])})
	}
	var res struct {
		Results []odrResult
		TLS     []odrResult
	}
	reftest.Run(t, py, reftest.Script(t, "ref_odr.py"), map[string]any{"cases": append(york, deming...), "tls": tls}, &res)
	if len(res.Results) != len(york)+len(deming) {
		t.Fatalf("got %d results", len(res.Results))
	}
	for i, c := range york {
		ref := res.Results[i]
		f, err := eiv.York(c.X, c.Y, c.SX, c.SY, nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "york intercept", f.Intercept.Value, ref.Beta[0], 1e-9)
		near(t, "york slope", f.Slope.Value, ref.Beta[1], 1e-9)
		near(t, "york se(intercept)", f.Intercept.SE, math.Sqrt(ref.CovBeta[0][0]), 1e-7)
		near(t, "york se(slope)", f.Slope.SE, math.Sqrt(ref.CovBeta[1][1]), 1e-7)
		near(t, "york cov", f.CovSlopeIntercept, ref.CovBeta[0][1], 1e-7)
		near(t, "york chi2", f.Chi2, ref.SumSquare, 1e-9)
		// ODRPACK's sd_beta is scaled by res_var = S/(n−2): York's se_scaled.
		near(t, "york se_scaled(slope)", f.Slope.SEScaled, ref.SDBeta[1], 1e-7)
	}
	for i, c := range deming {
		ref := res.Results[len(york)+i]
		lambda := c.SY[0] * c.SY[0] / (c.SX[0] * c.SX[0])
		f, err := eiv.Deming(c.X, c.Y, &eiv.DemingOptions{Lambda: lambda})
		if err != nil {
			t.Fatal(err)
		}
		near(t, "deming slope (odr)", f.Slope.Value, ref.Beta[1], 1e-9)
		ybar := 0.0
		for _, v := range c.Y {
			ybar += v / float64(len(c.Y))
		}
		near(t, "deming intercept (odr, relative to ȳ)", f.Intercept.Value/ybar, ref.Beta[0]/ybar, 1e-9)
		near(t, "deming slope (svd)", f.Slope.Value, res.TLS[i].Beta[1], 1e-12)
		near(t, "deming intercept (svd)", f.Intercept.Value, res.TLS[i].Beta[0], 1e-12)
		// Fuller's (1987) large-sample variance and ODRPACK's linearised one
		// (scaled by the residual variance) are different approximations of
		// the same quantity; they differ by terms of relative order
		// σ_uu/σ_xx (error variance over true-x variance), so they must
		// agree within a small multiple of it. A wrong formula (a factor of
		// n/(n−1), a missing term) breaks this by far more.
		n := float64(len(c.X))
		var mx, sxx float64
		for _, v := range c.X {
			mx += v / n
		}
		for _, v := range c.X {
			sxx += (v - mx) * (v - mx)
		}
		ratio := c.SX[0] * c.SX[0] / (sxx/(n-1) - c.SX[0]*c.SX[0])
		got, want := f.Slope.SE*f.Slope.SE, ref.SDBeta[1]*ref.SDBeta[1]
		if d := math.Abs(got-want) / want; d > 3*ratio {
			t.Errorf("deming n=%v: Fuller var(b) %.8g vs ODR %.8g: relative difference %.3g > 3·σuu/σxx = %.3g", n, got, want, d, 3*ratio)
		}
	}
}
