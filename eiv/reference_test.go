package eiv_test

import (
	"math"
	"testing"

	"eivfit/eiv"
)

// NIST StRD Norris (testdata/ref/nist-norris.csv): OLS must reproduce every
// certified value to at least 12 significant digits (NIST's certified values
// carry 15; the StRD guidance is to compare the number of digits matched).
func TestOLSNorrisCertified(t *testing.T) {
	d := readRef(t, "ref/nist-norris.csv")
	f, err := eiv.OLS(d["x"], d["y"], nil)
	if err != nil {
		t.Fatal(err)
	}
	// Certified values, NIST StRD Norris.dat.
	sigDigits(t, "B0", f.Intercept.Value, -0.262323073774029, 12)
	sigDigits(t, "sd(B0)", f.Intercept.SE, 0.232818234301152, 12)
	sigDigits(t, "B1", f.Slope.Value, 1.00211681802045, 12)
	sigDigits(t, "sd(B1)", f.Slope.SE, 0.429796848199937e-03, 12)
	sigDigits(t, "residual SD", f.ResidualSD, 0.884796396144373, 12)
	sigDigits(t, "R²", f.RSquared, 0.999993745883712, 12)
}

func pearson(t *testing.T) (x, y, sx, sy []float64) {
	d := readRef(t, "ref/pearson-york.csv")
	x, y = d["x"], d["y"]
	// Exact weights as published by York (1966); σ = 1/√w.
	for i := range x {
		sx = append(sx, 1/math.Sqrt(d["w_x"][i]))
		sy = append(sy, 1/math.Sqrt(d["w_y"][i]))
	}
	return
}

func TestYorkPearson(t *testing.T) {
	x, y, sx, sy := pearson(t)
	f, err := eiv.York(x, y, sx, sy, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Neri, Saitta & Chiofalo (1989), J. Phys. E 22:215, "exact" solution,
	// as quoted in testdata/ref/pearson-york.csv.
	printed(t, "slope", f.Slope.Value, "-0.480533407")
	printed(t, "intercept", f.Intercept.Value, "5.47991022")
	// Williamson's (1968) method as evaluated by Ogren & Norton (1992), 11
	// decimals (same file). Reed's (1989) 11-decimal values differ from it in
	// the tenth digit, so only the 8 digits on which all sources agree are
	// published fact; the fully converged York line is also checked against
	// the file's general-purpose re-computation, to 1e-12 (double-precision
	// iteration to |Δb| < 1e-15 on a well-conditioned 10-point problem).
	printed(t, "slope (Williamson)", f.Slope.Value, "-0.48053340745")
	printed(t, "intercept (Williamson)", f.Intercept.Value, "5.47991022403")
	near(t, "slope (re-computed)", f.Slope.Value, -0.480533407446202, 1e-12)
	near(t, "intercept (re-computed)", f.Intercept.Value, 5.479910224032865, 1e-12)
	// York et al. (2004) standard errors at the adjusted points, unscaled, as
	// given in the issue and the reference file (7 digits).
	printed(t, "se(intercept)", f.Intercept.SE, "0.2949707")
	printed(t, "se(slope)", f.Slope.SE, "0.0579850")
	printed(t, "MSWD", f.MSWD, "1.4832941")
	// Same file, "computed here" with a general-purpose array library:
	// S = 11.866353194061428, cov(a,b) = −0.0164725447, P(χ²₈ > S) = 0.1573.
	near(t, "chi2", f.Chi2, 11.866353194061428, 1e-11)
	printed(t, "cov", f.CovSlopeIntercept, "-0.0164725447")
	printed(t, "p", f.PValue, "0.1573")
	// Scaled SEs, variant (E) of the file: × √(S/(n−2)) = × 1.2179056.
	printed(t, "se_scaled(intercept)", f.Intercept.SEScaled, "0.359247")
	printed(t, "se_scaled(slope)", f.Slope.SEScaled, "0.0706203")
	if f.DOF != 8 || !f.Converged {
		t.Errorf("dof %d converged %v", f.DOF, f.Converged)
	}
}

// Pearson's data without weights: Deming with λ = 1 is orthogonal regression,
// Pearson's (1901) own line. Values: testdata/ref/pearson-york.csv, "computed
// here" with a closed form and an ODR routine (agree to 8 digits); the closed
// form is printed to 12 digits.
func TestDemingOrthogonalPearson(t *testing.T) {
	x, y, _, _ := pearson(t)
	f, err := eiv.Deming(x, y, &eiv.DemingOptions{Lambda: 1})
	if err != nil {
		t.Fatal(err)
	}
	printed(t, "slope", f.Slope.Value, "-0.545561197521")
	printed(t, "intercept", f.Intercept.Value, "5.784043774530")
	// OLS on the same data, same file: a = 5.76118519, b = −0.53957727,
	// se 0.18948520 / 0.04212655.
	o, err := eiv.OLS(x, y, nil)
	if err != nil {
		t.Fatal(err)
	}
	printed(t, "ols slope", o.Slope.Value, "-0.53957727")
	printed(t, "ols intercept", o.Intercept.Value, "5.76118519")
	printed(t, "ols se(slope)", o.Slope.SE, "0.04212655")
	printed(t, "ols se(intercept)", o.Intercept.SE, "0.18948520")
}

// Swapping the axes with their uncertainties inverts the York slope; values
// from testdata/ref/pearson-york.csv ("symmetry check", general-purpose array
// library): a' = 11.403806975993, b' = −2.081020766724, same S, SEs
// 0.80209694 / 0.25111263.
func TestYorkPearsonSwapped(t *testing.T) {
	x, y, sx, sy := pearson(t)
	f, err := eiv.York(y, x, sy, sx, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	printed(t, "slope", f.Slope.Value, "-2.081020766724")
	printed(t, "intercept", f.Intercept.Value, "11.403806975993")
	printed(t, "S", f.Chi2, "11.866353194")
	printed(t, "se(intercept)", f.Intercept.SE, "0.80209694")
	printed(t, "se(slope)", f.Slope.SE, "0.25111263")
}

// ISO/TS 28037:2010 worked examples (testdata/ref/iso28037-*.csv). The
// published digits are matched to half a unit in the last printed digit.
func TestISO28037(t *testing.T) {
	type want struct{ a, ua, b, ub, cov, chi2 string }
	cases := []struct {
		name string
		file string
		want want
	}{
		// §6.3, WLS with equal u(y): x exact, so σx = 0 and York is WLS in y.
		{"ex1 WLS equal u(y)", "ref/iso28037-ex1-wls-equal.csv", want{"1.867", "0.465", "1.757", "0.120", "-0.050", "1.665"}},
		// §6.3, WLS with unequal u(y).
		{"ex2 WLS unequal u(y)", "ref/iso28037-ex2-wls-unequal.csv", want{"0.885", "0.530", "2.057", "0.178", "-0.082", "4.131"}},
		// §7.4, uncertainties in x and y. b is quoted as 2.1597 by the
		// library's test; the 2.159 quoted for the standard is 2.15966
		// truncated, not rounded, so only 2.1597 is asserted.
		{"ex3 WTLS", "ref/iso28037-ex3-wtls-xy.csv", want{"0.5788", "0.4764", "2.1597", "0.1355", "-0.0577", "2.743"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := readRef(t, c.file)
			sx := d["u_x"]
			if sx == nil {
				sx = make([]float64, len(d["x"]))
			}
			f, err := eiv.York(d["x"], d["y"], sx, d["u_y"], nil, nil)
			if err != nil {
				t.Fatal(err)
			}
			printed(t, "a", f.Intercept.Value, c.want.a)
			printed(t, "u(a)", f.Intercept.SE, c.want.ua)
			printed(t, "b", f.Slope.Value, c.want.b)
			printed(t, "u(b)", f.Slope.SE, c.want.ub)
			printed(t, "cov(a,b)", f.CovSlopeIntercept, c.want.cov)
			printed(t, "chi2", f.Chi2, c.want.chi2)
		})
	}
	// Annex E, relative weights with s_y,i = 1: the same as OLS, with the
	// covariance scaled by s² = SSR/(n−2).
	t.Run("ex4 RWLS", func(t *testing.T) {
		d := readRef(t, "ref/iso28037-ex4-rwls.csv")
		f, err := eiv.OLS(d["x"], d["y"], nil)
		if err != nil {
			t.Fatal(err)
		}
		printed(t, "a", f.Intercept.Value, "1.172")
		printed(t, "u(a)", f.Intercept.SE, "0.159")
		printed(t, "b", f.Slope.Value, "1.964")
		printed(t, "u(b)", f.Slope.SE, "0.041")
		printed(t, "cov(a,b)", f.CovSlopeIntercept, "-0.006")
		// The quoted "0.171" is s = √(SSR/4) (see the file's note).
		printed(t, "s", f.ResidualSD, "0.171")
	})
}
