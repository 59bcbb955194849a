package eiv_test

import (
	"math"
	"testing"

	"eivfit/eiv"
	"eivfit/eiv/reftest"
)

type smPredict struct {
	Params  []float64 `json:"params"`
	BSE     []float64 `json:"bse"`
	Mean    []float64 `json:"mean"`
	MeanSE  []float64 `json:"mean_se"`
	CILower []float64 `json:"ci_lower"`
	CIUpper []float64 `json:"ci_upper"`
}

// Predictions at x0 against statsmodels' get_prediction (Debian
// python3-statsmodels): OLS mean with its t interval, and York with σx = 0
// against WLS with the covariance fixed by the stated σy (cov_type "fixed
// scale"). Both are closed forms in double precision: 1e-10 relative.
func TestPredictionsAgainstStatsmodels(t *testing.T) {
	py := reftest.Python(t, "statsmodels.api", "numpy")
	d := readRef(t, "ref/nist-norris.csv")
	at := []float64{0, 100, 555.5, 1000}
	var ref smPredict
	reftest.Run(t, py, reftest.Script(t, "ref_statsmodels.py"),
		map[string]any{"task": "predict", "x": d["x"], "y": d["y"], "sy": nil, "at": at, "confidence": 0.95}, &ref)
	f := must(t)(eiv.OLS(d["x"], d["y"], nil))
	for i, x0 := range at {
		p := f.At(x0)
		near(t, "ols ŷ", p.Y.Value, ref.Mean[i], 1e-10)
		near(t, "ols se(ŷ)", p.Y.SE, ref.MeanSE[i], 1e-10)
		near(t, "ols lower", p.Y.CI.Lower, ref.CILower[i], 1e-10)
		near(t, "ols upper", p.Y.CI.Upper, ref.CIUpper[i], 1e-10)
		near(t, "ols bias", p.Bias.Value, ref.Mean[i]-x0, 1e-10)
	}

	w := readRef(t, "ref/iso28037-ex2-wls-unequal.csv")
	at = []float64{0, 3.5, 10}
	reftest.Run(t, py, reftest.Script(t, "ref_statsmodels.py"),
		map[string]any{"task": "predict", "x": w["x"], "y": w["y"], "sy": w["u_y"], "at": at, "confidence": 0.95}, &ref)
	y := must(t)(eiv.York(w["x"], w["y"], make([]float64, len(w["x"])), w["u_y"], nil, nil))
	near(t, "wls a", y.Intercept.Value, ref.Params[0], 1e-10)
	near(t, "wls se(a)", y.Intercept.SE, ref.BSE[0], 1e-10)
	for i, x0 := range at {
		p := y.At(x0)
		near(t, "york ŷ", p.Y.Value, ref.Mean[i], 1e-10)
		near(t, "york se(ŷ)", p.Y.SE, ref.MeanSE[i], 1e-10)
	}
}

// ISO/TS 28037:2010 §6.3 example 1 (testdata/ref/iso28037-ex1-wls-equal.csv):
// the forward evaluation at x = 3.5 gives u(y) = 0.406409531732455 without the
// new point's own uncertainty (the file's library value, "not a published
// one"): that is the line's SE at 3.5 combined with u(x2) = 0.2 through the
// slope, √(se(ŷ)² + b²·0.2²).
func TestPredictionISOForward(t *testing.T) {
	d := readRef(t, "ref/iso28037-ex1-wls-equal.csv")
	f := must(t)(eiv.York(d["x"], d["y"], make([]float64, len(d["x"])), d["u_y"], nil, nil))
	p := f.At(3.5)
	near(t, "y(3.5)", p.Y.Value, 8.01666666666667, 1e-12)
	u := math.Sqrt(p.Y.SE*p.Y.SE + f.Slope.Value*f.Slope.Value*0.2*0.2)
	near(t, "u(y(3.5))", u, 0.406409531732455, 1e-12)
}
