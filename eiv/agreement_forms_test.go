package eiv_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"eivfit/eiv"
	"eivfit/eiv/reftest"
)

// pairsOf simulates n single measurements x, y of true values uniform on
// [lo, hi], with x error √(sd² + (cv·τ)²), y = a + b·τ with the same error
// model scaled by ry, rounded to `round` (ties when round > 0).
func pairsOf(seed uint64, n int, lo, hi, sd, cv, a, b, ry, round float64) (x, y []float64) {
	r := rand.New(rand.NewPCG(seed, 3))
	x, y = make([]float64, n), make([]float64, n)
	for i := range x {
		tau := lo + (hi-lo)*r.Float64()
		x[i] = tau + math.Hypot(sd, cv*tau)*r.NormFloat64()
		ty := a + b*tau
		y[i] = ty + ry*math.Hypot(sd, cv*ty)*r.NormFloat64()
		if round > 0 {
			x[i] = math.Round(x[i]/round) * round
			y[i] = math.Round(y[i]/round) * round
		}
	}
	return
}

// TestAgreementFormsReference checks the regression-based limits (Bland &
// Altman 1999, §3.2) against statsmodels OLS of d on A and of |residual| on
// A, the ratio limits against numpy on ln y − ln x, and Lin's concordance
// against the paper's formulas written anew in ref_agreement.py, on
// constant, proportional and tied data. Tolerances: 1e-9 relative for
// values (the same least squares in double precision), 1e-7 for p-values
// (statsmodels' t tail from scipy against the package's own tail).
func TestAgreementFormsReference(t *testing.T) {
	py := reftest.Python(t, "scipy.stats", "statsmodels.api", "pandas")
	type xy struct {
		name string
		x, y []float64
	}
	var cases []xy
	x, y := pairsOf(1, 60, 2, 20, 0.3, 0, 0.2, 1, 1, 0)
	cases = append(cases, xy{"constant error", x, y})
	x, y = pairsOf(2, 80, 1, 50, 0, 0.06, 0, 1.05, 1.2, 0)
	cases = append(cases, xy{"proportional error and bias", x, y})
	x, y = pairsOf(3, 50, 50, 300, 2, 0.03, 5, 0.97, 1, 5)
	cases = append(cases, xy{"ties (rounded to 5), mixed error", x, y})
	in := []map[string]any{}
	for _, c := range cases {
		in = append(in, map[string]any{"x": c.x, "y": c.y})
	}
	var raw struct {
		Results []map[string]map[string]float64 `json:"results"`
	}
	reftest.Run(t, py, reftest.Script(t, "ref_agreement.py"), map[string]any{"cases": in}, &raw)
	for i, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rl, err := eiv.RegressionBasedLimits(c.x, c.y, nil)
			if err != nil {
				t.Fatal(err)
			}
			ref := raw.Results[i]["regression"]
			near(t, "b0", rl.Bias.Intercept.Value, ref["b0"], 1e-9)
			near(t, "b1", rl.Bias.Slope.Value, ref["b1"], 1e-9)
			near(t, "c0", rl.Spread.Intercept.Value, ref["c0"], 1e-9)
			near(t, "c1", rl.Spread.Slope.Value, ref["c1"], 1e-9)
			near(t, "b1 p", rl.BiasSlopeP, ref["b1_p"], 1e-7)
			near(t, "c1 p", rl.SpreadSlopeP, ref["c1_p"], 1e-7)
			// 2.46 = 1.96·√(π/2) (Bland & Altman 1999, §3.2).
			printed(t, "multiplier", rl.Multiplier, "2.46")
			lo, mid, hi := rl.At(10)
			near(t, "limits at 10", hi-mid, 1.96*math.Sqrt(math.Pi/2)*(ref["c0"]+10*ref["c1"]), 1e-9)
			near(t, "limits symmetric", mid-lo, hi-mid, 1e-12)
			rt, err := eiv.RatioBasedLimits(c.x, c.y, nil)
			if err != nil {
				t.Fatal(err)
			}
			rr := raw.Results[i]["ratio"]
			near(t, "geometric mean ratio", rt.Ratio.Value, rr["mean"], 1e-12)
			near(t, "ratio lower", rt.Lower.Value, rr["lower"], 1e-12)
			near(t, "ratio upper", rt.Upper.Value, rr["upper"], 1e-12)
			if !(rt.Ratio.CI.Lower < rt.Ratio.Value && rt.Ratio.Value < rt.Ratio.CI.Upper) {
				t.Errorf("ratio interval %v does not hold %v", rt.Ratio.CI, rt.Ratio.Value)
			}
			cc, err := eiv.LinCCC(c.x, c.y, nil)
			if err != nil {
				t.Fatal(err)
			}
			rc := raw.Results[i]["ccc"]
			near(t, "ccc", cc.CCC.Value, rc["ccc"], 1e-12)
			near(t, "ccc lower", cc.CCC.CI.Lower, rc["lo"], 1e-9)
			near(t, "ccc upper", cc.CCC.CI.Upper, rc["hi"], 1e-9)
			near(t, "precision (scipy pearsonr)", cc.Precision, rc["rho"], 1e-12)
			near(t, "accuracy", cc.Accuracy, rc["cb"], 1e-12)
		})
	}
}

// TestConcordanceBruteForce: ρ_c = 1 − E(x − y)²/(σx² + σy² + (μx − μy)²),
// which follows from Lin's (1989) definition; and C_b = 2/(v + 1/v + u²)
// (Lin 1989, eq. for the bias correction factor).
func TestConcordanceBruteForce(t *testing.T) {
	x, y := pairsOf(4, 40, 1, 10, 0.5, 0, 0.3, 1.1, 1, 0.1)
	cc, err := eiv.LinCCC(x, y, nil)
	if err != nil {
		t.Fatal(err)
	}
	n := float64(len(x))
	var mx, my, msd float64
	for i := range x {
		mx += x[i] / n
		my += y[i] / n
		msd += (x[i] - y[i]) * (x[i] - y[i]) / n
	}
	var vx, vy float64
	for i := range x {
		vx += (x[i] - mx) * (x[i] - mx) / n
		vy += (y[i] - my) * (y[i] - my) / n
	}
	near(t, "ccc by E(x−y)²", cc.CCC.Value, 1-msd/(vx+vy+(mx-my)*(mx-my)), 1e-12)
	v, u := cc.ScaleShift, cc.LocationShift
	near(t, "C_b", cc.Accuracy, 2/(v+1/v+u*u), 1e-12)
	near(t, "ρ·C_b", cc.Precision*cc.Accuracy, cc.CCC.Value, 1e-14)
}

// TestConcordanceCoverage: Lin's interval must cover the population ρ_c
// near nominally. Bivariate normal with σx = 1, σy = 1.2, ρ = 0.9,
// μy − μx = 0.3: ρ_c = 2·0.9·1.2/(1 + 1.44 + 0.09). n = 50, 4000 trials;
// Lin's variance is asymptotic, so 0.93–0.97 (Monte Carlo SE 0.0034).
func TestConcordanceCoverage(t *testing.T) {
	const trials, n = 4000, 50
	const sy, rho, shift = 1.2, 0.9, 0.3
	want := 2 * rho * sy / (1 + sy*sy + shift*shift)
	r := rand.New(rand.NewPCG(31, 32))
	x, y := make([]float64, n), make([]float64, n)
	cover := 0
	for range trials {
		for i := range x {
			z1, z2 := r.NormFloat64(), r.NormFloat64()
			x[i] = z1
			y[i] = shift + sy*(rho*z1+math.Sqrt(1-rho*rho)*z2)
		}
		cc, err := eiv.LinCCC(x, y, nil)
		if err != nil {
			t.Fatal(err)
		}
		if cc.CCC.CI.Lower <= want && want <= cc.CCC.CI.Upper {
			cover++
		}
	}
	c := float64(cover) / trials
	t.Logf("Lin's interval covers ρ_c = %.4f in %.4f of %d studies", want, c, trials)
	if c < 0.93 || c > 0.97 {
		t.Errorf("coverage %.4f outside 0.93–0.97", c)
	}
}

// TestChooseLimits: constant-error data call for constant limits, a
// constant CV for ratio limits, and a bias that grows with the level while
// the spread stays constant for regression-based limits (neither fixed by
// logs). Seeded simulations, n = 150, effects chosen far from the 0.05 edge.
func TestChooseLimits(t *testing.T) {
	cases := []struct {
		name string
		x, y []float64
		want eiv.LimitsForm
	}{
		{"constant", nil, nil, eiv.FormConstant},
		{"constant CV", nil, nil, eiv.FormRatio},
		{"growing bias, constant spread", nil, nil, eiv.FormRegression},
	}
	cases[0].x, cases[0].y = pairsOf(41, 150, 10, 20, 0.5, 0, 0.5, 1, 1, 0)
	cases[1].x, cases[1].y = pairsOf(42, 150, 1, 100, 0, 0.08, 0, 1, 1, 0)
	cases[2].x, cases[2].y = pairsOf(43, 150, 10, 100, 0.5, 0, -8, 1.15, 1, 0)
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			ch, err := eiv.ChooseLimits(c.x, c.y)
			if err != nil {
				t.Fatal(err)
			}
			if ch.Form != c.want {
				t.Errorf("form %s, want %s (%s)", ch.Form, c.want, ch.Reason)
			}
			if ch.Reason == "" {
				t.Error("no reason")
			}
		})
	}
}

func TestAgreementFormsErrors(t *testing.T) {
	if _, err := eiv.RatioBasedLimits([]float64{1, -2, 3}, []float64{1, 2, 3}, nil); err == nil {
		t.Error("ratio limits accepted a negative value")
	}
	if _, err := eiv.LinCCC([]float64{1, 2, 3}, []float64{1, 2, 3}, nil); err == nil {
		t.Error("concordance accepted 3 points")
	}
	if _, err := eiv.LinCCC([]float64{1, 2, 3, 4}, []float64{1, 2, 3, 4}, nil); err == nil {
		t.Error("concordance of identical data (ρ_c = 1) gave an interval")
	}
	if _, err := eiv.RegressionBasedLimits([]float64{1, 2}, []float64{1, 2}, nil); err == nil {
		t.Error("regression limits accepted 2 points")
	}
}
