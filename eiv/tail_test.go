package eiv_test

import (
	"math"
	"testing"

	"eivfit/eiv"
	"eivfit/eiv/reftest"
)

// relTail checks a tail probability to a relative tolerance, with no
// absolute floor: a p-value of 1e-40 reported as 0 or as 1e-17 is wrong,
// however small the absolute difference. A reference of exactly 0 (below
// the smallest double) asks for exactly 0, or at most a subnormal.
func relTail(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if want == 0 {
		if !(got >= 0 && got < 1e-307) {
			t.Errorf("%s = %.17g, want 0 (below the double range)", what, got)
		}
		return
	}
	if !(got > 0) || math.Abs(got-want) > tol*want {
		t.Errorf("%s = %.17g, want %.17g (relative tolerance %g)", what, got, want, tol)
	}
}

// The tail probabilities behind every p-value, against 50-digit mpmath
// (and scipy's kstwobign for the Kolmogorov tail), run by
// testdata/ref_tails.py, from the centre to the last normal double.
//
// Tolerances: the normal tail rounds z/√2 once, and that error is
// multiplied by about z² in the relative error of erfc (d log erfc(u)/du ≈
// −2u): 1e-12 covers z up to 37.5 (z²·ε ≈ 3e-13). gonum's incomplete beta
// and gamma functions (Cephes' continued fractions) agree to about 1e-12
// relative in these tails (measured: 6e-13 at t = 50 on 200 df, 9e-14 at
// χ² = 3000 on 1000 df), so 1e-11 for them. scipy's kstwobign.sf is a
// double-precision evaluation of the same series: 1e-12.
func TestTailProbabilitiesAgainstMpmath(t *testing.T) {
	py := reftest.Python(t, "mpmath", "scipy.stats")
	normal := []float64{0, 0.5, 1.96, 5, 8.3, 9, 9.09, 12, 20, 30, 37, 37.5, 38.5, 40}
	tTwo := [][2]float64{{1.5, 38}, {10, 38}, {30, 38}, {1000, 38}, {1e5, 3}, {1e10, 8}, {50, 200}, {1e100, 1}, {1e50, 10}, {25, 1000}}
	chi2 := [][2]float64{{0.5, 1}, {100, 1}, {1000, 1}, {1300, 1}, {1400, 1}, {500, 5}, {800, 38}, {1200, 38}, {3000, 1000}, {2e5, 1e5}}
	fsf := [][3]float64{{2, 8, 20}, {50, 8, 20}, {1e4, 38, 5}, {1e4, 1, 30}, {1e6, 3, 100}, {1e3, 38, 200}, {0.5, 1, 1}}
	kol := []float64{0.5, 1, 2, 5, 10, 15, 18}
	req := map[string]any{"normal_sf": normal, "normal_cdf": negate(normal), "t_two_sided": tTwo, "chi2_sf": chi2, "f_sf": fsf, "kolmogorov_sf": kol}
	var ref struct {
		NormalSF     []float64 `json:"normal_sf"`
		NormalCDF    []float64 `json:"normal_cdf"`
		TTwoSided    []float64 `json:"t_two_sided"`
		Chi2SF       []float64 `json:"chi2_sf"`
		FSF          []float64 `json:"f_sf"`
		KolmogorovSF []float64 `json:"kolmogorov_sf"`
	}
	reftest.Run(t, py, reftest.Script(t, "ref_tails.py"), req, &ref)
	for i, z := range normal {
		relTail(t, "normal sf", eiv.NormalSF(z), ref.NormalSF[i], 1e-12)
		relTail(t, "normal cdf", eiv.NormalCDF(-z), ref.NormalCDF[i], 1e-12)
		// Two-sided is twice the one-sided tail; below the double range
		// both are 0.
		relTail(t, "normal two-sided", eiv.NormalTwoSided(-z), math.Min(1, 2*ref.NormalSF[i]), 1e-12)
	}
	for i, c := range tTwo {
		relTail(t, "t two-sided", eiv.TTwoSided(c[0], c[1]), ref.TTwoSided[i], 1e-11)
	}
	for i, c := range chi2 {
		relTail(t, "chi2 sf", eiv.ChiSquaredSF(c[0], c[1]), ref.Chi2SF[i], 1e-11)
	}
	for i, c := range fsf {
		relTail(t, "F sf", eiv.FSurvival(c[0], c[1], c[2]), ref.FSF[i], 1e-11)
	}
	for i, v := range kol {
		relTail(t, "kolmogorov sf", eiv.KolmogorovSurvival(v), ref.KolmogorovSF[i], 1e-12)
	}
}

func negate(v []float64) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = -x
	}
	return out
}

// farTailCase builds data whose tests sit far in their tails.
type farTailCase struct {
	name string
	c    diagCase
}

func farTailCases() []farTailCase {
	// issue 12's reproducer: x = 1…39 with 5 twice (40 rows), y = 1.04x −
	// 0.54 ± 0.02 alternately: every pair concordant but the tied one.
	var repro diagCase
	xs := []float64{1, 2, 3, 4, 5, 5}
	for v := 6.0; v < 40; v++ {
		xs = append(xs, v)
	}
	for i, x := range xs {
		repro.X = append(repro.X, x)
		repro.Y = append(repro.Y, 1.04*x-0.54+0.02*float64(2*(i%2)-1))
	}
	// 400 residuals alternating in sign and growing with the level: every
	// sign change a run (runs test), e² linear in the level (Breusch–
	// Pagan), two clusters (Shapiro–Wilk); x, y concordant with a tie and
	// one swapped pair (Kendall, Spearman).
	var big diagCase
	for i := range 400 {
		lev := 1 + float64(i)
		s := float64(2*(i%2) - 1)
		big.E = append(big.E, s*(1+0.001*lev))
		big.Level = append(big.Level, lev)
		x := lev
		if i == 7 {
			x = 7 // tie with i = 6
		}
		big.X = append(big.X, x)
		big.Y = append(big.Y, 2*lev+s*0.1)
	}
	big.Y[100], big.Y[101] = big.Y[101], big.Y[100]
	return []farTailCase{{"issue 12 reproducer", repro}, {"n = 400 extreme", big}}
}

// The statistics' p-values far in their tails against scipy.stats and
// statsmodels (testdata/ref_diagnostics.py), relative to the reference:
// Kendall's and the runs test's normal tails, Spearman's t tail and
// Breusch–Pagan's χ² tail to 1e-9 (the statistic carries about 1e-13 of
// rounding, multiplied by z² ≈ 400 in the tail's relative error, and the
// two libraries sum in different orders); Shapiro–Wilk to 1e-3 (scipy's
// Fortran swilk evaluates Royston's polynomials with single-precision
// constants, an error of about 1e-7 in z, times z ≈ 14 in the tail).
// Before issue 12, each of these p-values was exactly 0.
func TestFarTailPValuesAgainstScipy(t *testing.T) {
	py := reftest.Python(t, "scipy.stats", "statsmodels.api")
	cases := farTailCases()
	in := make([]diagCase, len(cases))
	for i, c := range cases {
		in[i] = c.c
	}
	var res struct{ Results []diagResult }
	reftest.Run(t, py, reftest.Script(t, "ref_diagnostics.py"), map[string]any{"cases": in}, &res)
	for i, fc := range cases {
		c, ref := fc.c, res.Results[i]
		t.Run(fc.name, func(t *testing.T) {
			kt, err := eiv.KendallTau(c.X, c.Y)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("kendall p %.6g (scipy %.6g)", kt.PValue, ref.Kendall[1])
			relTail(t, "kendall p", kt.PValue, ref.Kendall[1], 1e-9)
			sp, err := eiv.Spearman(c.X, c.Y)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("spearman p %.6g (scipy %.6g)", sp.PValue, ref.Spearman[1])
			relTail(t, "spearman p", sp.PValue, ref.Spearman[1], 1e-9)
			if c.E == nil {
				return
			}
			rt, err := eiv.RunsTest(c.E)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("runs p %.6g (statsmodels %.6g)", rt.PValue, ref.Runs[1])
			relTail(t, "runs p", rt.PValue, ref.Runs[1], 1e-9)
			bp, err := eiv.BreuschPagan(c.E, c.Level)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("breusch-pagan p %.6g (statsmodels %.6g)", bp.PValue, ref.BreuschPagan[1])
			relTail(t, "breusch-pagan p", bp.PValue, ref.BreuschPagan[1], 1e-9)
			sw, err := eiv.ShapiroWilk(c.E)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("shapiro-wilk p %.6g (scipy %.6g)", sw.PValue, ref.Shapiro[1])
			relTail(t, "shapiro-wilk p", sw.PValue, ref.Shapiro[1], 1e-3)
		})
	}
}

// issue 12's reproducer, with scipy's value written in: scipy.stats.kendalltau
// (Debian python3-scipy 1.10.1, method "auto", here the normal
// approximation with tie correction) gives p = 1.1184255667844175e-19;
// eivfit gave 0 before. Tolerance as in TestFarTailPValuesAgainstScipy.
func TestKendallReproducerPValue(t *testing.T) {
	c := farTailCases()[0].c
	kt, err := eiv.KendallTau(c.X, c.Y)
	if err != nil {
		t.Fatal(err)
	}
	relTail(t, "kendall p", kt.PValue, 1.1184255667844175e-19, 1e-9)
}

// Perfectly concordant (discordant) data give τ and ρ of exactly 1 (−1),
// with and without ties, at every size; before, n(n−1)/2 divided by its
// square root twice gave 0.9999999999999999 for some n.
func TestRankCorrelationsExactAtOne(t *testing.T) {
	for _, ties := range []bool{false, true} {
		for n := 3; n <= 300; n++ {
			x := make([]float64, n)
			y := make([]float64, n)
			rev := make([]float64, n)
			for i := range n {
				v := float64(i)
				if ties {
					v = float64(i / 3)
				}
				x[i], y[i], rev[i] = v, 3*v+1, -v
			}
			if ties && n < 4 {
				continue // all x tied: no correlation defined
			}
			for _, c := range []struct {
				name string
				y    []float64
				want float64
			}{{"concordant", y, 1}, {"discordant", rev, -1}} {
				kt, err := eiv.KendallTau(x, c.y)
				if err != nil {
					t.Fatal(err)
				}
				sp, err := eiv.Spearman(x, c.y)
				if err != nil {
					t.Fatal(err)
				}
				if kt.Statistic != c.want || sp.Statistic != c.want {
					t.Fatalf("n=%d ties=%v %s: τ = %.17g, ρ = %.17g, want %g exactly", n, ties, c.name, kt.Statistic, sp.Statistic, c.want)
				}
			}
		}
	}
}
