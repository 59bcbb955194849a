package eiv_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"eivfit/eiv"
)

// dataset is a random heteroscedastic sample with correlated errors.
type dataset struct {
	x, y, sx, sy, r []float64
}

func randomData(seed uint64, n int, corr bool) dataset {
	rng := rand.New(rand.NewPCG(seed, 7))
	var d dataset
	a, b := 3*rng.NormFloat64(), 0.5+rng.Float64()
	for range n {
		xt := 10 + 90*rng.Float64()
		sx, sy := 0.2+2*rng.Float64(), 0.2+2*rng.Float64()
		r := 0.0
		if corr {
			r = 1.8*rng.Float64() - 0.9
		}
		// Correlated errors: e_y = r·σy·z1 + √(1−r²)·σy·z2, e_x = σx·z1.
		z1, z2 := rng.NormFloat64(), rng.NormFloat64()
		d.x = append(d.x, xt+sx*z1)
		d.y = append(d.y, a+b*xt+sy*(r*z1+math.Sqrt(1-r*r)*z2))
		d.sx = append(d.sx, sx)
		d.sy = append(d.sy, sy)
		d.r = append(d.r, r)
	}
	return d
}

// must(t)(eiv.X(...)) fails the test on an error and returns the fit.
func must(t *testing.T) func(*eiv.Fit, error) *eiv.Fit {
	return func(f *eiv.Fit, err error) *eiv.Fit {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
		return f
	}
}

func shift(v []float64, c float64) []float64 {
	out := make([]float64, len(v))
	for i := range v {
		out[i] = v[i] + c
	}
	return out
}

func scale(v []float64, k float64) []float64 {
	out := make([]float64, len(v))
	for i := range v {
		out[i] = v[i] * k
	}
	return out
}

// Tolerances: the estimators are exactly equivariant in exact arithmetic, so
// the only differences are rounding; 1e-12 relative is a few hundred ulps
// accumulated over sums of n ≤ 200 terms and (York) the last iteration's
// 1e-15 stopping tolerance. The 1e6 shift loses six digits of the data
// themselves (x ~ 1e2 + 1e6 keeps ~10 significant digits of x), hence the
// issue's 1e-9 there.
func TestEquivariance(t *testing.T) {
	for seed := uint64(1); seed <= 5; seed++ {
		for _, corr := range []bool{false, true} {
			d := randomData(seed, 20+30*int(seed), corr)
			lam := 1.7
			york := must(t)(eiv.York(d.x, d.y, d.sx, d.sy, d.r, nil))
			dem := must(t)(eiv.Deming(d.x, d.y, &eiv.DemingOptions{Lambda: lam}))
			ols := must(t)(eiv.OLS(d.x, d.y, nil))

			// Swapping the axes, with σ and r, inverts the slope.
			sw := must(t)(eiv.York(d.y, d.x, d.sy, d.sx, d.r, nil))
			near(t, "york swapped slope", sw.Slope.Value, 1/york.Slope.Value, 1e-12)
			near(t, "york swapped chi2", sw.Chi2, york.Chi2, 1e-12)
			swd := must(t)(eiv.Deming(d.y, d.x, &eiv.DemingOptions{Lambda: 1 / lam}))
			near(t, "deming swapped slope", swd.Slope.Value, 1/dem.Slope.Value, 1e-12)

			// A shift of 1e6 in both axes leaves the slope unchanged.
			xs, ys := shift(d.x, 1e6), shift(d.y, 1e6)
			near(t, "york shifted", must(t)(eiv.York(xs, ys, d.sx, d.sy, d.r, nil)).Slope.Value, york.Slope.Value, 1e-9)
			near(t, "deming shifted", must(t)(eiv.Deming(xs, ys, &eiv.DemingOptions{Lambda: lam})).Slope.Value, dem.Slope.Value, 1e-9)
			near(t, "ols shifted", must(t)(eiv.OLS(xs, ys, nil)).Slope.Value, ols.Slope.Value, 1e-9)

			// Scaling y by k scales the slope (and intercept) by k.
			const k = 37.5
			yk := scale(d.y, k)
			fy := must(t)(eiv.York(d.x, yk, d.sx, scale(d.sy, k), d.r, nil))
			near(t, "york scaled slope", fy.Slope.Value, k*york.Slope.Value, 1e-12)
			near(t, "york scaled intercept", fy.Intercept.Value, k*york.Intercept.Value, 1e-11)
			near(t, "york scaled se", fy.Slope.SE, k*york.Slope.SE, 1e-12)
			fd := must(t)(eiv.Deming(d.x, yk, &eiv.DemingOptions{Lambda: lam * k * k}))
			near(t, "deming scaled slope", fd.Slope.Value, k*dem.Slope.Value, 1e-12)
			near(t, "deming scaled se", fd.Slope.SE, k*dem.Slope.SE, 1e-12)
			near(t, "ols scaled slope", must(t)(eiv.OLS(d.x, yk, nil)).Slope.Value, k*ols.Slope.Value, 1e-12)

			// The order of the points changes nothing.
			p := rand.New(rand.NewPCG(seed, 99)).Perm(len(d.x))
			perm := func(v []float64) []float64 {
				out := make([]float64, len(v))
				for i, j := range p {
					out[i] = v[j]
				}
				return out
			}
			fp := must(t)(eiv.York(perm(d.x), perm(d.y), perm(d.sx), perm(d.sy), perm(d.r), nil))
			near(t, "york permuted", fp.Slope.Value, york.Slope.Value, 1e-12)
		}
	}
}

// York's line is the minimiser of S(a, b) = Σ (y − a − b·x)²/(σy² + b²σx² −
// 2·b·r·σx·σy) (York et al. 2004, Section II; the maximum-likelihood line of
// Titterington & Halliday 1979). Checked here by minimising the profile S(b)
// directly with a golden-section search written in the test: an independent
// route to the same number, valid for correlated errors, which no reference
// library here fits.
func TestYorkMinimisesS(t *testing.T) {
	for seed := uint64(1); seed <= 4; seed++ {
		d := randomData(seed, 30, true)
		f := must(t)(eiv.York(d.x, d.y, d.sx, d.sy, d.r, nil))
		prof := func(b float64) float64 {
			var sw, swx, swy float64
			w := make([]float64, len(d.x))
			for i := range d.x {
				w[i] = 1 / (d.sy[i]*d.sy[i] + b*b*d.sx[i]*d.sx[i] - 2*b*d.r[i]*d.sx[i]*d.sy[i])
				sw += w[i]
				swx += w[i] * d.x[i]
				swy += w[i] * d.y[i]
			}
			a := (swy - b*swx) / sw
			var s float64
			for i := range d.x {
				e := d.y[i] - a - b*d.x[i]
				s += w[i] * e * e
			}
			return s
		}
		lo, hi := f.Slope.Value-0.5, f.Slope.Value+0.5
		g := (math.Sqrt(5) - 1) / 2
		for hi-lo > 1e-11 {
			m1, m2 := hi-g*(hi-lo), lo+g*(hi-lo)
			if prof(m1) < prof(m2) {
				hi = m2
			} else {
				lo = m1
			}
		}
		// The minimum of a smooth function is located only to about √ε
		// relative of its curvature scale: 1e-7 absolute on slopes ~1.
		near(t, "york slope vs direct minimum", f.Slope.Value, (lo+hi)/2, 1e-7)
		near(t, "york S vs direct minimum", f.Chi2, prof((lo+hi)/2), 1e-12)
	}
}

// With σx → 0, York tends to weighted least squares in y, and with σx = 0
// it is exactly that (the WLS normal equations solved here directly).
func TestYorkTendsToWLS(t *testing.T) {
	d := randomData(11, 40, false)
	var sw, swx, swy, swxx, swxy float64
	for i := range d.x {
		w := 1 / (d.sy[i] * d.sy[i])
		sw += w
		swx += w * d.x[i]
		swy += w * d.y[i]
		swxx += w * d.x[i] * d.x[i]
		swxy += w * d.x[i] * d.y[i]
	}
	det := sw*swxx - swx*swx
	bWLS := (sw*swxy - swx*swy) / det
	aWLS := (swxx*swy - swx*swxy) / det
	seB := math.Sqrt(sw / det)
	zero := make([]float64, len(d.x))
	f := must(t)(eiv.York(d.x, d.y, zero, d.sy, nil, nil))
	near(t, "σx=0 slope", f.Slope.Value, bWLS, 1e-12)
	near(t, "σx=0 intercept", f.Intercept.Value, aWLS, 1e-12)
	near(t, "σx=0 se(slope)", f.Slope.SE, seB, 1e-12)
	prev := math.Inf(1)
	for _, eps := range []float64{1e-1, 1e-2, 1e-3, 1e-4} {
		g := must(t)(eiv.York(d.x, d.y, scale(d.sx, eps), d.sy, nil, nil))
		diff := math.Abs(g.Slope.Value - bWLS)
		if diff >= prev {
			t.Errorf("σx×%g: |b − b_WLS| = %g did not shrink (before %g)", eps, diff, prev)
		}
		prev = diff
	}
	if prev > 1e-6 {
		t.Errorf("σx×1e-4: |b − b_WLS| = %g", prev)
	}
}

// Deming with equal constant σ equals orthogonal regression, and York with
// constant σx, σy equals Deming with λ = σy²/σx². Orthogonal values on
// Pearson's data: testdata/ref/pearson-york.csv (closed form and an ODR
// routine, general-purpose libraries).
func TestDemingIsYorkWithConstantSigma(t *testing.T) {
	x, y, _, _ := pearson(t)
	one := make([]float64, len(x))
	for i := range one {
		one[i] = 0.3
	}
	f := must(t)(eiv.York(x, y, one, one, nil, nil))
	printed(t, "york equal σ slope", f.Slope.Value, "-0.545561197521")
	printed(t, "york equal σ intercept", f.Intercept.Value, "5.784043774530")
	d := randomData(5, 60, false)
	sx, sy := make([]float64, 60), make([]float64, 60)
	for i := range sx {
		sx[i], sy[i] = 0.7, 1.9
	}
	yf := must(t)(eiv.York(d.x, d.y, sx, sy, nil, nil))
	df := must(t)(eiv.Deming(d.x, d.y, &eiv.DemingOptions{Lambda: 1.9 * 1.9 / (0.7 * 0.7)}))
	near(t, "york vs deming slope", yf.Slope.Value, df.Slope.Value, 1e-12)
	near(t, "york vs deming intercept", yf.Intercept.Value, df.Intercept.Value, 1e-11)
}

// Deming with λ → ∞ (x exact) tends to OLS; NIST Norris (its file notes this use).
func TestDemingLargeLambdaIsOLS(t *testing.T) {
	d := readRef(t, "ref/nist-norris.csv")
	f := must(t)(eiv.Deming(d["x"], d["y"], &eiv.DemingOptions{Lambda: 1e12}))
	// Certified NIST StRD Norris OLS values; λ = 1e12 moves the slope by
	// O(1/λ) relative, far below 1e-9.
	near(t, "slope", f.Slope.Value, 1.00211681802045, 1e-9)
	near(t, "intercept", f.Intercept.Value, -0.262323073774029, 1e-9)
}

// The Deming jackknife by downdated moments must equal refitting every
// leave-one-out sample (brute force, in the test).
func TestDemingJackknifeMatchesRefits(t *testing.T) {
	d := randomData(3, 25, false)
	f := must(t)(eiv.Deming(d.x, d.y, &eiv.DemingOptions{Lambda: 2, Jackknife: true}))
	n := len(d.x)
	var bs, as []float64
	for i := range n {
		x := append(append([]float64{}, d.x[:i]...), d.x[i+1:]...)
		y := append(append([]float64{}, d.y[:i]...), d.y[i+1:]...)
		g := must(t)(eiv.Deming(x, y, &eiv.DemingOptions{Lambda: 2}))
		bs = append(bs, g.Slope.Value)
		as = append(as, g.Intercept.Value)
	}
	se := func(v []float64) float64 {
		var m, s float64
		for _, x := range v {
			m += x / float64(n)
		}
		for _, x := range v {
			s += (x - m) * (x - m)
		}
		return math.Sqrt(float64(n-1) / float64(n) * s)
	}
	for i := range n {
		near(t, "loo slope", f.Jackknife.SlopeLOO[i], bs[i], 1e-12)
	}
	near(t, "jackknife se(slope)", f.Jackknife.Slope.SE, se(bs), 1e-10)
	near(t, "jackknife se(intercept)", f.Jackknife.Intercept.SE, se(as), 1e-10)
}

// Weighted Deming: at convergence, the line must be the weighted Deming line
// for the weights computed from its own adjusted points (Linnet 1990's
// fixed point), recomputed here from the definition.
func TestWeightedDemingFixedPoint(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	var x, y []float64
	for range 60 {
		xt := 5 + 300*rng.Float64()
		x = append(x, xt*(1+0.04*rng.NormFloat64()))
		y = append(y, (1.5+1.08*xt)*(1+0.05*rng.NormFloat64()))
	}
	lam := 1.6
	f := must(t)(eiv.WeightedDeming(x, y, &eiv.DemingOptions{Lambda: lam}))
	a, b := f.Intercept.Value, f.Slope.Value
	w := make([]float64, len(x))
	for i := range x {
		d := y[i] - a - b*x[i]
		xh := x[i] + b*d/(lam+b*b)
		yh := y[i] - lam*d/(lam+b*b)
		m := (xh + yh) / 2
		w[i] = 1 / (m * m)
	}
	var sw, mx, my float64
	for i := range x {
		sw += w[i]
		mx += w[i] * x[i]
		my += w[i] * y[i]
	}
	mx, my = mx/sw, my/sw
	var u, q, p float64
	for i := range x {
		u += w[i] * (x[i] - mx) * (x[i] - mx)
		q += w[i] * (y[i] - my) * (y[i] - my)
		p += w[i] * (x[i] - mx) * (y[i] - my)
	}
	bb := (q - lam*u + math.Sqrt((q-lam*u)*(q-lam*u)+4*lam*p*p)) / (2 * p)
	// The iteration stops at a relative slope change of 1e-12.
	near(t, "fixed-point slope", b, bb, 1e-11)
	near(t, "fixed-point intercept", a, my-bb*mx, 1e-9)
	if f.Slope.SE <= 0 || f.Jackknife == nil {
		t.Errorf("weighted Deming SE %g", f.Slope.SE)
	}
	// Scaling both axes by k leaves the slope unchanged (the weights scale by 1/k²).
	g := must(t)(eiv.WeightedDeming(scale(x, 1000), scale(y, 1000), &eiv.DemingOptions{Lambda: lam}))
	near(t, "weighted deming scale-invariant", g.Slope.Value, b, 1e-11)
}

// York's jackknife (warm-started passes that skip one point) must equal
// fitting York afresh to each leave-one-out sample; the jackknife stops at
// a relative change of 1e-12, so 1e-10 is asserted.
func TestYorkJackknifeMatchesRefits(t *testing.T) {
	for _, corr := range []bool{false, true} {
		d := randomData(17, 30, corr)
		f := must(t)(eiv.York(d.x, d.y, d.sx, d.sy, d.r, &eiv.YorkOptions{Jackknife: true}))
		drop := func(v []float64, i int) []float64 {
			return append(append([]float64{}, v[:i]...), v[i+1:]...)
		}
		for i := range d.x {
			g := must(t)(eiv.York(drop(d.x, i), drop(d.y, i), drop(d.sx, i), drop(d.sy, i), drop(d.r, i), nil))
			near(t, "loo slope", f.Jackknife.SlopeLOO[i], g.Slope.Value, 1e-10)
			near(t, "loo intercept", f.Jackknife.InterceptLOO[i], g.Intercept.Value, 1e-10)
		}
	}
}
