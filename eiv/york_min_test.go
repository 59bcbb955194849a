package eiv_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"eivfit/eiv"
	"eivfit/eiv/reftest"
)

// yorkCase is one York dataset (the JSON of testdata/ref_york_min.py).
type yorkCase struct {
	X  []float64 `json:"x"`
	Y  []float64 `json:"y"`
	SX []float64 `json:"sx"`
	SY []float64 `json:"sy"`
	R  []float64 `json:"r"`
}

func (c yorkCase) fit(t *testing.T) *eiv.Fit {
	t.Helper()
	return must(t)(eiv.York(c.X, c.Y, c.SX, c.SY, c.R, nil))
}

// yorkIssue12 is the reproducer of issue 12, defect 5: York's secant
// acceleration used to stop at a maximum of S (b = −0.24073, χ² = 6.4976).
var yorkIssue12 = yorkCase{
	X:  []float64{-0.6, 10.1, 2.1, 13.2, 4.6, 12.4, 10.9},
	Y:  []float64{3.8, 2.9, 1.4, 3.1, 3.5, -1.4, 1.4},
	SX: []float64{2.1, 5.2, 2.5, 5.9, 2.4, 4.7, 5.5},
	SY: []float64{2.6, 1.3, 0.5, 1, 3, 2.9, 1.2},
	R:  []float64{0.09, -0.6, 0.95, 0.94, -0.69, 0.1, -0.13},
}

// hasWarning says whether the fit carries a warning with the code.
func hasWarning(f *eiv.Fit, code string) bool {
	for _, w := range f.Warnings {
		var ew *eiv.Warning
		if errors.As(w, &ew) && ew.Code == code {
			return true
		}
	}
	return false
}

// hardYork draws a York dataset whose errors are comparable to the spread
// of the points: n from 3 to 30, true x uniform on [0, 10], σx per point
// around ρx·(spread of x) with ρx log-uniform on [0.2, 2], σy around
// ρy·(spread of y) with ρy log-uniform on [0.02, 2], correlations uniform on
// (−0.95, 0.95).
func hardYork(seed uint64) yorkCase { return yorkData(seed, 0.2, 2) }

// yorkData draws as hardYork with ρx log-uniform on [lo, hi].
func yorkData(seed uint64, lo, hi float64) yorkCase {
	rng := rand.New(rand.NewPCG(seed, 12))
	n := 3 + rng.IntN(28)
	a, b := 3*rng.NormFloat64(), rng.NormFloat64()
	rx := lo * math.Pow(hi/lo, rng.Float64())
	ry := 0.02 * math.Pow(100, rng.Float64())
	sdx := 10 / math.Sqrt(12)
	sdy := math.Max(math.Abs(b)*sdx, 0.1)
	var c yorkCase
	for range n {
		xt := 10 * rng.Float64()
		sx := rx * sdx * (0.5 + rng.Float64())
		sy := ry * sdy * (0.5 + rng.Float64())
		r := 1.9*rng.Float64() - 0.95
		z1, z2 := rng.NormFloat64(), rng.NormFloat64()
		c.X = append(c.X, xt+sx*z1)
		c.Y = append(c.Y, a+b*xt+sy*(r*z1+math.Sqrt(1-r*r)*z2))
		c.SX = append(c.SX, sx)
		c.SY = append(c.SY, sy)
		c.R = append(c.R, r)
	}
	return c
}

// profileS is York's S at the line angle θ (b = tan θ), minimised over the
// intercept, written in the test from York et al. (2004, Section II) with
// every term multiplied through by cos²θ, so that it is finite at
// vertical lines; the points are taken relative to their means.
func profileS(c yorkCase, th float64) float64 {
	co, si := math.Cos(th), math.Sin(th)
	var mx, my float64
	for i := range c.X {
		mx += c.X[i] / float64(len(c.X))
		my += c.Y[i] / float64(len(c.X))
	}
	var sw, swe float64
	w := make([]float64, len(c.X))
	e := make([]float64, len(c.X))
	for i := range c.X {
		d := co*co*c.SY[i]*c.SY[i] + si*si*c.SX[i]*c.SX[i] - 2*co*si*c.R[i]*c.SX[i]*c.SY[i]
		w[i] = 1 / d
		e[i] = co*(c.Y[i]-my) - si*(c.X[i]-mx)
		sw += w[i]
		swe += w[i] * e[i]
	}
	k := swe / sw
	var s float64
	for i := range w {
		s += w[i] * (e[i] - k) * (e[i] - k)
	}
	return s
}

// scanMinS is the global minimum of S by brute force: S at m angles over
// (−π/2, π/2), then golden-section search on [θ − h, θ + h] around every
// grid point lower than its neighbours; it returns the lowest S and S at
// every local minimum.
func scanMinS(c yorkCase, m int) (sMin float64, minima []float64) {
	h := math.Pi / float64(m)
	s := make([]float64, m)
	for k := range s {
		s[k] = profileS(c, -math.Pi/2+(float64(k)+0.5)*h)
	}
	sMin = math.Inf(1)
	g := (math.Sqrt(5) - 1) / 2
	for k := range s {
		if !(s[k] <= s[(k+m-1)%m] && s[k] < s[(k+1)%m]) {
			continue
		}
		th := -math.Pi/2 + (float64(k)+0.5)*h
		lo, hi := th-h, th+h
		for hi-lo > 1e-13 {
			m1, m2 := hi-g*(hi-lo), lo+g*(hi-lo)
			if profileS(c, m1) < profileS(c, m2) {
				hi = m2
			} else {
				lo = m1
			}
		}
		minima = append(minima, profileS(c, (lo+hi)/2))
		sMin = math.Min(sMin, minima[len(minima)-1])
	}
	return sMin, minima
}

// The issue's reproducer against its global minimum computed outside
// eivfit: testdata/ref_york_min.py (a numpy scan of 20,000 angles, every
// local minimum polished in 50-digit mpmath, Debian python3-mpmath):
//
//	b = 0.1439144643311796, a = 1.110465416715935, S = 4.41719923026389
//	the other local minimum: b = −0.4506829073881618, S = 6.301375921392802
//
// The reference polishes the angle to 1e-22 and S is flat there, so the
// slope is held to 1e-12 relative (a few hundred ulps of the double-precision
// fit) and S to 1e-13.
func TestYorkIssue12GlobalMinimum(t *testing.T) {
	f := yorkIssue12.fit(t)
	near(t, "slope", f.Slope.Value, 0.1439144643311796, 1e-12)
	near(t, "intercept", f.Intercept.Value, 1.110465416715935, 1e-12)
	near(t, "chi2", f.Chi2, 4.41719923026389, 1e-13)
	if !hasWarning(f, eiv.WarnSeveralMinima) {
		t.Errorf("no %s warning for S with two local minima; warnings %v", eiv.WarnSeveralMinima, f.Warnings)
	}

	py := reftest.Python(t, "mpmath", "numpy")
	cases := []yorkCase{yorkIssue12}
	for seed := uint64(1); len(cases) < 13; seed++ {
		cases = append(cases, hardYork(seed))
	}
	var res struct {
		Results []struct {
			Slope     float64     `json:"slope"`
			Intercept float64     `json:"intercept"`
			Chi2      float64     `json:"chi2"`
			Minima    [][]float64 `json:"minima"`
		} `json:"results"`
	}
	reftest.Run(t, py, reftest.Script(t, "ref_york_min.py"), map[string]any{"angles": 20000, "cases": cases}, &res)
	if len(res.Results) != len(cases) {
		t.Fatalf("%d results for %d cases", len(res.Results), len(cases))
	}
	for i, c := range cases {
		t.Run(fmt.Sprintf("case%d", i), func(t *testing.T) {
			f := c.fit(t)
			ref := res.Results[i]
			// S at the minimum is determined to rounding; the slope to
			// √ε of its curvature scale at worst, hence 1e-7 for the
			// random cases (whose minima can be shallow).
			near(t, "chi2", f.Chi2, ref.Chi2, 1e-11)
			near(t, "slope", f.Slope.Value, ref.Slope, 1e-7)
			warned := hasWarning(f, eiv.WarnSeveralMinima)
			// As in TestYorkGlobalMinimumProperty: no warning with one
			// minimum, a warning with a competitor within 25 of the global.
			rival := len(ref.Minima) > 1 && ref.Minima[1][1]-ref.Minima[0][1] <= 25
			if (warned && len(ref.Minima) < 2) || (!warned && rival) {
				t.Errorf("local minima in the reference %v, several_minima warning %v", ref.Minima, warned)
			}
		})
	}
}

// York returns the global minimum of S on 500 random hard datasets
// (hardYork), and on 300 with σx from 0.02 to 0.3 of the spread of x,
// where the search's threshold (Σσ² ≥ Σ(v − v̄)²/16) lies, checked against a brute-force scan of 20,000 slope angles written in the
// test (scanMinS). Both sides compute S in double precision at a minimum,
// where it is flat: they agree to rounding (~1e-14 relative) when they
// find the same minimum and differ by O(1) when not; 1e-9 separates the two.
//
// The several_minima warning must never appear with a single minimum, and
// must appear when another local minimum is a competitor: S within 25 of
// the global minimum (a likelihood-ratio difference of five standard
// deviations). Minima far above it (S of 10⁴ beside a global 40, in narrow
// dips near the axes of data whose errors are small against their spread)
// are lines the data reject, which York's search does not look for on such
// data.
func TestYorkGlobalMinimumProperty(t *testing.T) {
	const hard, cases = 500, 800
	wrong, several, competing := 0, 0, 0
	for seed := uint64(1); seed <= cases; seed++ {
		c := hardYork(seed)
		if seed > hard {
			c = yorkData(seed, 0.02, 0.3)
		}
		sMin, minima := scanMinS(c, 20000)
		rivals := 0
		for _, s := range minima {
			if s != sMin && s-sMin <= 25 {
				rivals++
			}
		}
		if len(minima) > 1 {
			several++
		}
		if rivals > 0 {
			competing++
		}
		f, err := eiv.York(c.X, c.Y, c.SX, c.SY, c.R, nil)
		if err != nil {
			wrong++
			t.Errorf("seed %d: %v", seed, err)
			continue
		}
		if math.Abs(f.Chi2-sMin) > 1e-9*math.Max(1, sMin) {
			wrong++
			t.Errorf("seed %d (n = %d, %d local minima): χ² = %.12g, global minimum of S = %.12g", seed, len(c.X), len(minima), f.Chi2, sMin)
		}
		warned := hasWarning(f, eiv.WarnSeveralMinima)
		if (warned && len(minima) < 2) || (!warned && rivals > 0) {
			t.Errorf("seed %d: S at the local minima %v, warned %v", seed, minima, warned)
		}
	}
	t.Logf("%d of %d datasets with several local minima of S (%d with a competitor within 25); %d wrong", several, cases, competing, wrong)
}

// York is scale-free over the whole range validation accepts: the same
// data scaled by 2^k fit to the same bits (the internal rescaling is by
// exact powers of two), and scaled by 10^k (which rounds every value once)
// to 1e-12 relative, for k from −140 to 140, both axes alike and each alone.
// S and the SEs scale with the data; χ² does not.
func TestYorkScaleInvariance(t *testing.T) {
	base := []struct {
		name string
		c    yorkCase
	}{
		{"issue12", yorkIssue12},
		{"hard", hardYork(7)},
		{"ordinary", func() yorkCase {
			d := randomData(3, 40, true)
			return yorkCase{d.x, d.y, d.sx, d.sy, d.r}
		}()},
	}
	for _, bc := range base {
		ref := must(t)(eiv.York(bc.c.X, bc.c.Y, bc.c.SX, bc.c.SY, bc.c.R, &eiv.YorkOptions{Jackknife: true}))
		for k := -140; k <= 140; k += 10 {
			for _, axes := range []string{"both", "x", "y"} {
				kx, ky := 0, 0
				if axes != "y" {
					kx = k
				}
				if axes != "x" {
					ky = k
				}
				t.Run(fmt.Sprintf("%s/%s/1e%d", bc.name, axes, k), func(t *testing.T) {
					px, py := math.Pow(10, float64(kx)), math.Pow(10, float64(ky))
					c := yorkCase{scale(bc.c.X, px), scale(bc.c.Y, py), scale(bc.c.SX, px), scale(bc.c.SY, py), bc.c.R}
					f, err := eiv.York(c.X, c.Y, c.SX, c.SY, c.R, &eiv.YorkOptions{Jackknife: true})
					if err != nil {
						t.Fatal(err)
					}
					bk := py / px
					near(t, "slope", f.Slope.Value/bk, ref.Slope.Value, 1e-12)
					near(t, "intercept", f.Intercept.Value/py, ref.Intercept.Value, 1e-11)
					near(t, "se(slope)", f.Slope.SE/bk, ref.Slope.SE, 1e-11)
					near(t, "se(intercept)", f.Intercept.SE/py, ref.Intercept.SE, 1e-11)
					near(t, "cov", f.CovSlopeIntercept/(bk*py), ref.CovSlopeIntercept, 1e-10)
					near(t, "chi2", f.Chi2, ref.Chi2, 1e-12)
					near(t, "jackknife se(slope)", f.Jackknife.Slope.SE/bk, ref.Jackknife.Slope.SE, 1e-9)

					// Powers of two: the same bits.
					p2x, p2y := math.Ldexp(1, kx*10/3), math.Ldexp(1, ky*10/3)
					g := must(t)(eiv.York(scale(bc.c.X, p2x), scale(bc.c.Y, p2y), scale(bc.c.SX, p2x), scale(bc.c.SY, p2y), bc.c.R, nil))
					if g.Slope.Value != ref.Slope.Value*(p2y/p2x) || g.Chi2 != ref.Chi2 {
						t.Errorf("2^k scaling: slope %v, want %v; χ² %v, want %v", g.Slope.Value, ref.Slope.Value*(p2y/p2x), g.Chi2, ref.Chi2)
					}
				})
			}
		}
	}
	// The extremes validation accepts, and the bootstrap there.
	for _, k := range []float64{1e-149, 1e149} {
		c := yorkIssue12
		s := eiv.Sample{X: scale(c.X, k/20), Y: scale(c.Y, k/20), SX: scale(c.SX, k/20), SY: scale(c.SY, k/20), R: c.R}
		f := must(t)(eiv.York(s.X, s.Y, s.SX, s.SY, s.R, nil))
		near(t, fmt.Sprintf("slope at %g", k), f.Slope.Value, 0.1439144643311796, 1e-12)
		br, err := eiv.Bootstrap(context.Background(), s, []eiv.Estimator{eiv.YorkEstimator{}}, &eiv.BootstrapOptions{Resamples: 200, Seed: 3})
		if err != nil {
			t.Fatal(err)
		}
		if br.Failed > 0 {
			t.Errorf("scale %g: %d bootstrap failures", k, br.Failed)
		}
	}
}

// The order of the points changes nothing beyond rounding (sums in another
// order, ~1e-15 relative per pass; 1e-12 asserted, for the intercept
// relative to the terms of ȳ − b·x̄), also on hard data with several local
// minima and with one point far from the rest.
func TestYorkRowOrder(t *testing.T) {
	far := hardYork(3)
	far.X[0], far.Y[0] = 1e6, 2e6
	for _, c := range []struct {
		name string
		c    yorkCase
	}{{"issue12", yorkIssue12}, {"hard", hardYork(11)}, {"far", far}} {
		t.Run(c.name, func(t *testing.T) {
			ref := c.c.fit(t)
			for s := uint64(1); s <= 20; s++ {
				p := rand.New(rand.NewPCG(s, 5)).Perm(len(c.c.X))
				perm := func(v []float64) []float64 {
					out := make([]float64, len(v))
					for i, j := range p {
						out[i] = v[j]
					}
					return out
				}
				f := must(t)(eiv.York(perm(c.c.X), perm(c.c.Y), perm(c.c.SX), perm(c.c.SY), perm(c.c.R), nil))
				near(t, "slope", f.Slope.Value, ref.Slope.Value, 1e-12)
				// a = ȳ − b·x̄ rounds relative to its terms, not to a.
				near(t, "intercept", f.Intercept.Value, ref.Intercept.Value, 1e-12*(1+math.Abs(ref.Slope.Value)*maxAbs(c.c.X)))
				near(t, "se(slope)", f.Slope.SE, ref.Slope.SE, 1e-12)
				near(t, "chi2", f.Chi2, ref.Chi2, 1e-12)
			}
		})
	}
}

func maxAbs(v []float64) float64 {
	var m float64
	for _, e := range v {
		m = math.Max(m, math.Abs(e))
	}
	return m
}

// On hard data every leave-one-out fit of York's jackknife is a global
// minimum too: it equals a fresh York fit of the sample without the point
// (each stops at a relative change of 1e-12; 1e-10 asserted).
func TestYorkJackknifeHard(t *testing.T) {
	for _, c := range []struct {
		name string
		c    yorkCase
	}{{"issue12", yorkIssue12}, {"hard11", hardYork(11)}, {"hard94", hardYork(94)}} {
		t.Run(c.name, func(t *testing.T) {
			d := c.c
			f := must(t)(eiv.York(d.X, d.Y, d.SX, d.SY, d.R, &eiv.YorkOptions{Jackknife: true}))
			drop := func(v []float64, i int) []float64 {
				return append(append([]float64{}, v[:i]...), v[i+1:]...)
			}
			for i := range d.X {
				g := must(t)(eiv.York(drop(d.X, i), drop(d.Y, i), drop(d.SX, i), drop(d.SY, i), drop(d.R, i), nil))
				near(t, fmt.Sprintf("loo slope %d", i), f.Jackknife.SlopeLOO[i], g.Slope.Value, 1e-10)
			}
		})
	}
}

// With one axis's σ all zero (weighted least squares in y, or in x) York
// rescales by the axis's spread instead, across the accepted range; when x
// and y differ so much in scale that the covariance of slope and intercept
// leaves double precision (x ~ 1e-140 and y ~ 1e140: b ~ 1e280,
// cov ~ 1e420), the error says so instead of speaking of overflowing values.
func TestYorkScaleEdges(t *testing.T) {
	c := yorkIssue12
	zero := make([]float64, len(c.X))
	for _, tc := range []struct {
		name   string
		sx, sy []float64
	}{{"sx=0", zero, c.SY}, {"sy=0", c.SX, zero}} {
		ref := must(t)(eiv.York(c.X, c.Y, tc.sx, tc.sy, nil, nil))
		for _, k := range []float64{1e-149, 1e-100, 1e100, 1e140} {
			f := must(t)(eiv.York(scale(c.X, k), scale(c.Y, k), scale(tc.sx, k), scale(tc.sy, k), nil, nil))
			// 10^k rounds every value once: 1e-12 as in TestYorkScaleInvariance.
			near(t, fmt.Sprintf("%s slope at %g", tc.name, k), f.Slope.Value, ref.Slope.Value, 1e-12)
		}
	}
	_, err := eiv.York(scale(c.X, 1e-140), scale(c.Y, 1e140), scale(c.SX, 1e-140), scale(c.SY, 1e140), c.R, nil)
	if !errors.Is(err, eiv.ErrDegenerate) || !strings.Contains(err.Error(), "differ too much in scale") {
		t.Errorf("x ~ 1e-140, y ~ 1e140: error %v", err)
	}
}
