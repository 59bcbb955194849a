package eiv_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"eivfit/eiv"
)

// Invariance properties of issue 12 over seeded random datasets: scale
// (units changed by 10^k, k across the whole range validation accepts),
// translation (x + c, y + c′ with c up to 1e9) and row order. Each method
// is a table entry.

type invMethod struct {
	name string
	fit  func(x, y, sx, sy, r []float64) (*eiv.Fit, error)
	// translates: the method is translation-equivariant (weighted Deming's
	// weights depend on the level, so it is not).
	translates bool
	// pending, when set, names work on this method that another part of
	// issue 12 delivers; the scale sweep skips the method with this reason
	// until that work removes the field.
	pending string
	// pendingCentre, likewise, skips the translation check of prediction
	// SEs until the method sets Fit.Centre (At otherwise uses the
	// uncentred form, which cancels far from the origin).
	pendingCentre string
}

var invMethods = []invMethod{
	{name: "ols", translates: true, fit: func(x, y, _, _, _ []float64) (*eiv.Fit, error) { return eiv.OLS(x, y, nil) }},
	{name: "deming", translates: true, fit: func(x, y, _, _, _ []float64) (*eiv.Fit, error) {
		return eiv.Deming(x, y, &eiv.DemingOptions{Lambda: 1.7, Jackknife: true})
	}},
	{name: "weighted_deming", fit: func(x, y, _, _, _ []float64) (*eiv.Fit, error) {
		return eiv.WeightedDeming(x, y, &eiv.DemingOptions{Lambda: 1.3})
	}},
	{name: "york", translates: true,
		fit: func(x, y, sx, sy, r []float64) (*eiv.Fit, error) { return eiv.York(x, y, sx, sy, r, nil) }},
}

// gridData is randomData with y moved above 0 (for weighted Deming) and
// every value rounded to a multiple of 2^-20, so that adding an integer c
// up to 2^31 is exact: the translated data carry every digit of the
// original, and any difference in the results is the fit's own rounding.
func gridData(seed uint64, n int) dataset {
	d := randomData(seed, n, true)
	g := func(v float64) float64 { return math.Round(v*0x1p20) / 0x1p20 }
	for i := range d.x {
		d.x[i], d.y[i] = g(d.x[i]), g(d.y[i]+20)
		d.sx[i], d.sy[i] = g(d.sx[i]), g(d.sy[i])
	}
	return d
}

func relDiff(a, b float64) float64 {
	if a == b {
		return 0
	}
	return math.Abs(a-b) / math.Max(math.Abs(a), math.Abs(b))
}

func closeRel(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if d := relDiff(got, want); !(d <= tol) {
		t.Errorf("%s = %.17g, want %.17g (relative difference %.2g > %g)", what, got, want, d, tol)
	}
}

// Scale: x, y and σ multiplied by 10^k for k from −150 to 147 (the data's
// largest value, ~170, then spans the accepted 1e-150 … 1e150) leave every
// slope unchanged and multiply the intercept by 10^k. Multiplying by 10^k
// rounds each value (relative ε), which moves the slope of these
// well-conditioned fits by ~1e-15; 1e-12 leaves room for the sums.
func TestScaleInvariance(t *testing.T) {
	for seed := uint64(1); seed <= 3; seed++ {
		d := gridData(seed, 15+10*int(seed))
		for _, m := range invMethods {
			t.Run(fmt.Sprintf("%s/seed=%d", m.name, seed), func(t *testing.T) {
				if m.pending != "" {
					t.Skip(m.pending)
				}
				base, err := m.fit(d.x, d.y, d.sx, d.sy, d.r)
				if err != nil {
					t.Fatal(err)
				}
				for k := -150; k <= 147; k += 3 {
					c := math.Pow(10, float64(k))
					f, err := m.fit(scale(d.x, c), scale(d.y, c), scale(d.sx, c), scale(d.sy, c), d.r)
					if err != nil {
						t.Errorf("10^%d: refused: %v", k, err)
						continue
					}
					closeRel(t, fmt.Sprintf("10^%d: slope", k), f.Slope.Value, base.Slope.Value, 1e-12)
					closeRel(t, fmt.Sprintf("10^%d: se(slope)", k), f.Slope.SE, base.Slope.SE, 1e-10)
					closeRel(t, fmt.Sprintf("10^%d: intercept/10^k", k), f.Intercept.Value/c, base.Intercept.Value, 1e-10)
					closeRel(t, fmt.Sprintf("10^%d: residual sd", k), f.ResidualSD/resScale(m.name, c), base.ResidualSD, 1e-10)
				}
			})
		}
	}
}

// resScale is the factor by which ResidualSD changes when the data are
// multiplied by c: weighted Deming's is relative (dimensionless).
func resScale(method string, c float64) float64 {
	if method == "weighted_deming" {
		return 1
	}
	return c
}

// Units of x alone changed by 10^±70 (the slope scales by 10^∓70, and
// Deming's λ by 10^∓140, which it must accept): OLS and Deming.
func TestScaleXOnly(t *testing.T) {
	d := gridData(4, 30)
	for _, k := range []float64{-70, -35, 35, 70} {
		c := math.Pow(10, k)
		ols0 := must(t)(eiv.OLS(d.x, d.y, nil))
		ols := must(t)(eiv.OLS(scale(d.x, c), d.y, nil))
		closeRel(t, fmt.Sprintf("ols slope·10^%g", k), ols.Slope.Value*c, ols0.Slope.Value, 1e-12)
		dem0 := must(t)(eiv.Deming(d.x, d.y, &eiv.DemingOptions{Lambda: 2}))
		dem := must(t)(eiv.Deming(scale(d.x, c), d.y, &eiv.DemingOptions{Lambda: 2 / (c * c)}))
		closeRel(t, fmt.Sprintf("deming slope·10^%g", k), dem.Slope.Value*c, dem0.Slope.Value, 1e-12)
		closeRel(t, fmt.Sprintf("deming se(slope)·10^%g", k), dem.Slope.SE*c, dem0.Slope.SE, 1e-10)
	}
}

// Translation: x + c and y + 2c for c up to 1e9, exact on gridData, leave
// slopes, their SEs (analytic and jackknife) and the SE of ŷ at translated
// points unchanged to 1e-9 relative (the bound).
func TestTranslationInvariance(t *testing.T) {
	for seed := uint64(1); seed <= 3; seed++ {
		d := gridData(10+seed, 12+8*int(seed))
		for _, m := range invMethods {
			if !m.translates {
				continue
			}
			t.Run(fmt.Sprintf("%s/seed=%d", m.name, seed), func(t *testing.T) {
				base, err := m.fit(d.x, d.y, d.sx, d.sy, d.r)
				if err != nil {
					t.Fatal(err)
				}
				for _, c := range []float64{1e3, 1e6, 1e9} {
					f, err := m.fit(shift(d.x, c), shift(d.y, 2*c), d.sx, d.sy, d.r)
					if err != nil {
						t.Fatal(err)
					}
					closeRel(t, fmt.Sprintf("+%g: slope", c), f.Slope.Value, base.Slope.Value, 1e-9)
					closeRel(t, fmt.Sprintf("+%g: se(slope)", c), f.Slope.SE, base.Slope.SE, 1e-9)
					if base.Jackknife != nil && f.Jackknife != nil {
						closeRel(t, fmt.Sprintf("+%g: jackknife se(slope)", c), f.Jackknife.Slope.SE, base.Jackknife.Slope.SE, 1e-9)
					}
					if m.pendingCentre != "" {
						t.Log("prediction SEs not checked: " + m.pendingCentre)
						continue
					}
					for _, x0 := range []float64{0, 55, 200} {
						p0, p := base.At(x0), f.At(x0+c)
						closeRel(t, fmt.Sprintf("+%g: se(ŷ(%g))", c, x0), p.Y.SE, p0.Y.SE, 1e-9)
						// ŷ near 2c is held to its own ulp (2.4e-7 at 2e9).
						if e := math.Abs(p.Y.Value - (p0.Y.Value + 2*c)); !(e <= 0x1p-50*2*c+1e-9*math.Abs(p0.Y.Value)) {
							t.Errorf("+%g: ŷ(%g) = %.17g, want %.17g + 2c (off by %.2g)", c, x0, p.Y.Value, p0.Y.Value, e)
						}
					}
				}
			})
		}
	}
}

// Row order: random permutations, and the point farthest from the mean
// moved first, change every result by rounding only. Sums of n ≤ 60 terms
// in another order differ by at most n·ε ≈ 1.3e-14 relative; the SEs of
// these fits are within 100× of that, so 1e-12 is a few ulps of the sums.
// (Before issue 12 the one-pass moments shifted by a far first row lost n×
// that.) The data have one far point to make the first-row shift matter.
func TestRowOrderInvariance(t *testing.T) {
	for seed := uint64(1); seed <= 4; seed++ {
		d := gridData(20+seed, 20+10*int(seed))
		far := len(d.x) - 1
		d.x[far], d.y[far] = d.x[far]+5000, d.y[far]+5000*1.1
		for _, m := range invMethods {
			t.Run(fmt.Sprintf("%s/seed=%d", m.name, seed), func(t *testing.T) {
				base, err := m.fit(d.x, d.y, d.sx, d.sy, d.r)
				if err != nil {
					t.Fatal(err)
				}
				rng := rand.New(rand.NewPCG(seed, 99))
				for trial := range 6 {
					p := rng.Perm(len(d.x))
					if trial == 0 { // the far point first
						for i, v := range p {
							if v == far {
								p[0], p[i] = p[i], p[0]
							}
						}
					}
					x, y, sx, sy, r := permute(d.x, p), permute(d.y, p), permute(d.sx, p), permute(d.sy, p), permute(d.r, p)
					f, err := m.fit(x, y, sx, sy, r)
					if err != nil {
						t.Fatal(err)
					}
					closeRel(t, "slope", f.Slope.Value, base.Slope.Value, 1e-12)
					closeRel(t, "intercept", f.Intercept.Value, base.Intercept.Value, 1e-12)
					closeRel(t, "se(slope)", f.Slope.SE, base.Slope.SE, 1e-12)
					closeRel(t, "se(intercept)", f.Intercept.SE, base.Intercept.SE, 1e-12)
					closeRel(t, "residual sd", f.ResidualSD, base.ResidualSD, 1e-12)
					closeRel(t, "se(ŷ(60))", f.At(60).Y.SE, base.At(60).Y.SE, 1e-12)
				}
			})
		}
	}
}

func permute(v []float64, p []int) []float64 {
	if v == nil {
		return nil
	}
	out := make([]float64, len(v))
	for i, j := range p {
		out[i] = v[j]
	}
	return out
}

// λ from stated uncertainties of any magnitude validation accepts: the
// ratio of mean squares is scale-free (σ·10^k for both gives the same λ,
// σx·10^k alone gives λ·10^-2k). Exact arithmetic: λ = Σσy²/Σσx².
func TestLambdaFromUncertaintiesScale(t *testing.T) {
	sx, sy := []float64{1, 2, 2}, []float64{3, 0, 4} // Σσx² = 9, Σσy² = 25
	for _, k := range []float64{-150, -100, 0, 100, 150} {
		c := math.Pow(10, k)
		l, err := eiv.LambdaFromUncertainties(scale(sx, c), scale(sy, c))
		if err != nil {
			t.Fatalf("10^%g: %v", k, err)
		}
		closeRel(t, fmt.Sprintf("λ at 10^%g", k), l, 25.0/9, 1e-14)
	}
	l, err := eiv.LambdaFromUncertainties(scale(sx, 1e120), sy)
	if err != nil {
		t.Fatal(err)
	}
	closeRel(t, "λ with σx·1e120", l, 25.0/9*1e-240, 1e-13)
}
