package eiv_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"eivfit/eiv"
	"eivfit/eiv/reftest"
)

// lineCal fits a WLS calibration to x = 1..m on y = 1 + b·x with readings
// perturbed by a fixed pattern scaled by uy (so the line is not exact).
func lineCal(t testing.TB, m int, b, uy float64) *eiv.Calibration {
	t.Helper()
	pattern := []float64{0.3, -0.5, 0.1, 0.6, -0.2, -0.4, 0.5, -0.1, 0.2, -0.3}
	s := make([]eiv.Standard, m)
	for i := range m {
		x := float64(i + 1)
		s[i] = eiv.Standard{X: x, Y: []float64{1 + b*x + uy*pattern[i%len(pattern)]}, UY: uy}
	}
	return mustCalibrate(t, s, nil)
}

// The Monte Carlo distribution of x₀ (JCGM 101:2008) on a well-conditioned
// line, u(b)/b ≈ 0.3 %: the linear result must agree within Monte Carlo
// error — the mean within 4 standard errors SD/√M, the SD within 4
// standard errors SD/√(2M) (normal approximation of the SD's spread; the
// second-order terms of 1/b are ~1e-5 relative here, far below) — and be
// validated at two significant digits (JCGM 101 §8.2).
func TestMonteCarloAgreesWhenWellConditioned(t *testing.T) {
	c := lineCal(t, 10, 2, 0.05)
	if rel := c.Slope.U / c.Slope.Value; rel > 0.005 {
		t.Fatalf("u(b)/b = %g: not well conditioned", rel)
	}
	inv := mustInverse(t, c, eiv.Unknown{Y: []float64{10.3}, UY: 0.05}, nil)
	const M = 1_000_000
	mc, err := c.MonteCarlo(context.Background(), &inv, &eiv.MonteCarloOptions{Trials: M, Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	if d := math.Abs(mc.Mean - inv.X.Value); d > 4*mc.SD/math.Sqrt(M) {
		t.Errorf("mean %.8g, linear %.8g: differ by %.3g > 4 SE", mc.Mean, inv.X.Value, d)
	}
	if d := math.Abs(mc.SD - inv.X.U); d > 4*inv.X.U/math.Sqrt(2*M) {
		t.Errorf("SD %.8g, linear u %.8g: differ by %.3g > 4 SE", mc.SD, inv.X.U, d)
	}
	if !mc.Validated || len(mc.Warnings) != 0 {
		t.Errorf("not validated: δ = %.3g, d_low %.3g, d_high %.3g", mc.Tolerance, mc.DLow, mc.DHigh)
	}
	t.Logf("x0 = %.6g ± %.4g; Monte Carlo %.6g ± %.4g, [%.6g, %.6g] vs linear [%.6g, %.6g], δ = %.2g",
		inv.X.Value, inv.X.U, mc.Mean, mc.SD, mc.Lower, mc.Upper, mc.LinearLower, mc.LinearUpper, mc.Tolerance)
}

// A line whose slope uncertainty is 30 % of the slope: 1/b is far from
// linear over its spread, the distribution of x₀ is skewed, and the Monte
// Carlo interval must differ visibly from the linear one (by more than
// ten times δ at one end) and say so.
func TestMonteCarloDisagreesWhenSlopeUncertain(t *testing.T) {
	c := lineCal(t, 5, 0.5, 0.5)
	rel := c.Slope.U / c.Slope.Value
	if math.Abs(rel-0.3) > 0.03 {
		t.Fatalf("u(b)/b = %.3g, want about 0.3", rel)
	}
	inv := mustInverse(t, c, eiv.Unknown{Y: []float64{c.Intercept.Value + c.Slope.Value*5.5}, UY: 0.2}, nil)
	if !hasCode(inv.Warnings, eiv.WarnSlopeUncertain) {
		t.Errorf("no slope warning: %v", inv.Warnings)
	}
	mc, err := c.MonteCarlo(context.Background(), &inv, &eiv.MonteCarloOptions{Trials: 1_000_000, Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	if mc.Validated || !hasCode(mc.Warnings, eiv.WarnMonteCarloDiff) || math.Max(mc.DLow, mc.DHigh) < 10*mc.Tolerance {
		t.Errorf("validated %v, warnings %v: d_low %.3g, d_high %.3g, δ %.3g", mc.Validated, mc.Warnings, mc.DLow, mc.DHigh, mc.Tolerance)
	}
	t.Logf("u(b)/b = %.3f: x0 = %.4g ± %.3g; Monte Carlo %.4g ± %.3g, [%.4g, %.4g] vs linear [%.4g, %.4g], δ = %.2g",
		rel, inv.X.Value, inv.X.U, mc.Mean, mc.SD, mc.Lower, mc.Upper, mc.LinearLower, mc.LinearUpper, mc.Tolerance)
}

// Bit-identical results for any number of workers and GOMAXPROCS (block j
// of the trials draws from PCG(seed, j)), with t-distributed readings.
func TestMonteCarloReproducible(t *testing.T) {
	c := lineCal(t, 6, 1.5, 0.2)
	inv := mustInverse(t, c, eiv.Unknown{Y: []float64{6.1, 6.4, 6.2}}, nil) // ν = 2: t draws
	var first *eiv.MonteCarloResult
	for _, procs := range []int{1, 4} {
		old := runtime.GOMAXPROCS(procs)
		for _, w := range []int{0, 1, 3, 7} {
			mc, err := c.MonteCarlo(context.Background(), &inv, &eiv.MonteCarloOptions{Trials: 100_003, Seed: 11, Workers: w})
			if err != nil {
				t.Fatal(err)
			}
			if first == nil {
				first = mc
				continue
			}
			if mc.Mean != first.Mean || mc.SD != first.SD || mc.Lower != first.Lower || mc.Upper != first.Upper {
				t.Errorf("GOMAXPROCS %d, workers %d: %+v differs from %+v", procs, w, mc, first)
			}
		}
		runtime.GOMAXPROCS(old)
	}
	other, _ := c.MonteCarlo(context.Background(), &inv, &eiv.MonteCarloOptions{Trials: 100_003, Seed: 12})
	if other.Mean == first.Mean {
		t.Error("another seed gave the same mean")
	}
}

func TestMonteCarloCancel(t *testing.T) {
	c := lineCal(t, 6, 1.5, 0.2)
	inv := mustInverse(t, c, eiv.Unknown{Y: []float64{6.1}, UY: 0.2}, nil)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := c.MonteCarlo(ctx, &inv, &eiv.MonteCarloOptions{Trials: 10_000_000}); !errors.Is(err, context.Canceled) {
		t.Errorf("got %v, want context.Canceled", err)
	}
	for _, o := range []eiv.MonteCarloOptions{{Trials: 10}, {CoverageProbability: 1}, {Digits: 9}} {
		var oe *eiv.OptionError
		if _, err := c.MonteCarlo(context.Background(), &inv, &o); !errors.As(err, &oe) {
			t.Errorf("%+v: got %v, want an *OptionError", o, err)
		}
	}
}

// The t draws (Bailey's polar method) against Student's t: the
// Kolmogorov–Smirnov distance of 50,000 draws from gonum's t CDF must stay
// below 1.95/√n (the 0.1 % critical value, Kolmogorov's limit law).
func TestStudentTDraws(t *testing.T) {
	for _, nu := range []float64{1, 2, 3, 4, 5, 30} {
		const n = 50_000
		rng := rand.NewPCG(3, uint64(nu))
		vals := make([]float64, n)
		for i := range vals {
			vals[i] = eiv.StudentT(rng, nu)
		}
		slices.Sort(vals)
		dist := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: nu}
		var ks float64
		for i, v := range vals {
			f := dist.CDF(v)
			ks = math.Max(ks, math.Max(math.Abs(f-float64(i)/n), math.Abs(f-float64(i+1)/n)))
		}
		if ks > 1.95/math.Sqrt(n) {
			t.Errorf("ν = %g: KS distance %.4g > %.4g", nu, ks, 1.95/math.Sqrt(n))
		}
	}
}

// The t draws of the Monte Carlo (tDraw: inversion for ν = 2, Bailey's
// polar method for ν = 1 and 4, normal over Marsaglia–Tsang gamma above)
// against Student's t quantiles from Debian's python3-scipy
// (testdata/ref_tquantile.py: −scipy.stats.t.ppf((1 − p)/2, ν), the upper
// (1 + p)/2 quantile; the lower one by symmetry). For each ν, 10⁶ draws;
// at each level P the count of draws at or below scipy's P-quantile is
// Binomial(n, P) for an exact sampler, and must lie within 5 of its
// standard deviations √(nP(1 − P)) of nP: 5σ per comparison keeps the
// chance of a false alarm over all 8 × 12 comparisons below 10⁻⁴ (normal
// approximation). Tried: draws for ν = 2 scaled by 1 % too much, or the
// gamma's d = ν/2 − 1/3 off by 0.02, fail it.
func TestStudentTQuantiles(t *testing.T) {
	py := reftest.Python(t, "scipy", "mpmath")
	nus := []float64{1, 2, 3, 4, 5, 7, 9, 30}
	twoSided := []float64{0.5, 0.8, 0.9, 0.95, 0.99, 0.999}
	var pts [][2]float64
	for _, nu := range nus {
		for _, p := range twoSided {
			pts = append(pts, [2]float64{p, nu})
		}
	}
	var ref struct{ Scipy []float64 }
	reftest.Run(t, py, reftest.Script(t, "ref_tquantile.py"), map[string]any{"points": pts}, &ref)
	if len(ref.Scipy) != len(pts) {
		t.Fatalf("%d reference quantiles for %d points", len(ref.Scipy), len(pts))
	}
	const n = 1_000_000
	for i, nu := range nus {
		t.Run(fmt.Sprintf("nu=%g", nu), func(t *testing.T) {
			src := rand.NewPCG(21, uint64(nu))
			vals := make([]float64, n)
			for k := range vals {
				vals[k] = eiv.StudentT(src, nu)
			}
			slices.Sort(vals)
			for j, p := range twoSided {
				q := ref.Scipy[i*len(twoSided)+j]
				for _, lv := range []struct {
					P, x float64
				}{{(1 - p) / 2, -q}, {(1 + p) / 2, q}} {
					cnt, _ := slices.BinarySearch(vals, math.Nextafter(lv.x, math.Inf(1)))
					sd := math.Sqrt(n * lv.P * (1 - lv.P))
					if z := (float64(cnt) - n*lv.P) / sd; math.Abs(z) > 5 {
						t.Errorf("P = %g (t = %.6g): %d draws at or below, want %.0f ± %.0f (z = %.2f)", lv.P, lv.x, cnt, n*lv.P, sd, z)
					}
				}
			}
		})
	}
}

// The shortest coverage interval by selection against a full sort and a
// scan of every window (JCGM 101 §7.7.2).
func TestShortestInterval(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 5))
	for _, tc := range []struct {
		name string
		n    int
		p    float64
		ties int // every ties-th value repeats an earlier one (1: all equal)
	}{
		{"n=1000 p=0.95", 1000, 0.95, 50}, {"n=12345 p=0.99", 12345, 0.99, 50},
		{"n=500 p=0.5", 500, 0.5, 50}, {"n=777 p=0.3", 777, 0.3, 50},
		// Large enough for the split at sampled thresholds.
		{"n=200003 p=0.95", 200_003, 0.95, 50}, {"n=100000 p=0.9999", 100_000, 0.9999, 50},
		// All equal: the sampled thresholds coincide and selection takes over.
		{"n=100000 all equal", 100_000, 0.95, 1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			v := make([]float64, tc.n)
			for i := range v {
				v[i] = math.Exp(r.NormFloat64()) // skewed
				if i%tc.ties == 0 && i > 0 {
					v[i] = v[(i-1)/tc.ties*tc.ties] // ties
				}
			}
			s := slices.Clone(v)
			slices.Sort(s)
			q := int(tc.p*float64(tc.n) + 0.5)
			best, lo, hi := math.Inf(1), 0.0, 0.0
			for i := 0; i+q-1 < tc.n; i++ {
				if w := s[i+q-1] - s[i]; w < best {
					best, lo, hi = w, s[i], s[i+q-1]
				}
			}
			glo, ghi := eiv.ShortestInterval(v, tc.p)
			if glo != lo || ghi != hi {
				t.Errorf("[%g, %g], want [%g, %g]", glo, ghi, lo, hi)
			}
		})
	}
}

// JCGM 101:2008 §7.9.2: u written with n significant digits as c·10^l
// gives δ = ½·10^l (values worked by hand).
func TestNumericalTolerance(t *testing.T) {
	for _, tc := range []struct {
		u    float64
		n    int
		want float64
	}{
		{0.322, 2, 0.005}, {0.322, 1, 0.05}, {1.5, 2, 0.05}, {0.0996, 2, 0.005}, {36, 2, 0.5}, {0.00123, 3, 0.000005},
	} {
		if got := eiv.NumericalTolerance(tc.u, tc.n); math.Abs(got-tc.want) > 1e-15*tc.want {
			t.Errorf("u = %g, %d digits: δ = %g, want %g", tc.u, tc.n, got, tc.want)
		}
	}
}

// The radix sort of the shortest interval's tails against slices.Sort:
// the same order bit for bit, over signs, zeros of both signs (sorted
// equal, so compared by value), subnormals and huge values.
func TestRadixSort(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 9))
	for _, tc := range []struct {
		name string
		gen  func(i int) float64
	}{
		{"normal", func(int) float64 { return r.NormFloat64() }},
		{"positive skewed", func(int) float64 { return math.Exp(3 * r.NormFloat64()) }},
		{"wide range", func(int) float64 { return (r.Float64() - 0.5) * math.Pow(10, float64(r.IntN(600)-300)) }},
		{"few values", func(i int) float64 { return float64(i%7) - 3 }},
		{"short", nil},
	} {
		t.Run(tc.name, func(t *testing.T) {
			n := 5000
			gen := tc.gen
			if gen == nil {
				n, gen = 100, func(int) float64 { return r.Float64() }
			}
			v := make([]float64, n)
			for i := range v {
				v[i] = gen(i)
			}
			want := slices.Clone(v)
			slices.Sort(want)
			eiv.RadixSort(v)
			for i := range v {
				if v[i] != want[i] {
					t.Fatalf("at %d: %g, want %g", i, v[i], want[i])
				}
			}
		})
	}
}
