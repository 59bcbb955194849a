package eiv_test

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
	"time"

	"eivfit/eiv"
	"eivfit/eiv/reftest"
)

func sampleOf(d dataset) eiv.Sample {
	return eiv.Sample{X: d.x, Y: d.y, SX: d.sx, SY: d.sy, R: d.r}
}

// The same seed gives bit-identical replicates for any number of workers,
// and for GOMAXPROCS 1 and 4 with the default worker count.
func TestBootstrapDeterministic(t *testing.T) {
	d := randomData(21, 50, true)
	s := sampleOf(d)
	ests := []eiv.Estimator{eiv.YorkEstimator{}, eiv.OLSEstimator{}, eiv.DemingEstimator{Lambda: 1.3}}
	run := func(workers int) *eiv.BootstrapResult {
		r, err := eiv.Bootstrap(context.Background(), s, ests, &eiv.BootstrapOptions{Resamples: 1000, Seed: 11, Workers: workers})
		if err != nil {
			t.Fatal(err)
		}
		return r
	}
	same := func(a, b *eiv.BootstrapResult, what string) {
		for j := range ests {
			ra, rb := a.Replicates(eiv.SlopeOf(j)), b.Replicates(eiv.SlopeOf(j))
			if len(ra) != len(rb) {
				t.Fatalf("%s: %d vs %d replicates", what, len(ra), len(rb))
			}
			for i := range ra {
				if math.Float64bits(ra[i]) != math.Float64bits(rb[i]) {
					t.Fatalf("%s: estimator %d resample %d differs: %v vs %v", what, j, i, ra[i], rb[i])
				}
			}
		}
	}
	one := run(1)
	same(one, run(4), "1 vs 4 workers")
	same(one, run(7), "1 vs 7 workers")
	prev := runtime.GOMAXPROCS(1)
	g1 := run(0)
	runtime.GOMAXPROCS(4)
	g4 := run(0)
	runtime.GOMAXPROCS(prev)
	same(g1, g4, "GOMAXPROCS 1 vs 4")
	same(one, g1, "workers 1 vs GOMAXPROCS 1")
	// A different seed gives different resamples.
	other, _ := eiv.Bootstrap(context.Background(), s, ests, &eiv.BootstrapOptions{Resamples: 1000, Seed: 12})
	if other.Replicates(eiv.SlopeOf(0))[0] == one.Replicates(eiv.SlopeOf(0))[0] {
		t.Error("seed 12 reproduced seed 11")
	}
}

// opaqueFitter hides an estimator's fitter from the bootstrap's fused
// Deming/OLS path, so that every resample is materialised and fitted.
type opaqueEstimator struct{ eiv.Estimator }
type opaqueFitter struct{ f eiv.LineFitter }

func (e opaqueEstimator) NewFitter(n int) eiv.LineFitter {
	return opaqueFitter{e.Estimator.NewFitter(n)}
}
func (f opaqueFitter) FitLine(s eiv.Sample) (float64, float64, error) { return f.f.FitLine(s) }

// The fused draw-and-sum path of Deming and OLS gives the same lines bit for
// bit as materialising each resample and fitting it, including the
// resamples it hands back (first point far from the rest, values outside
// the moments' safe band) and the ones that cannot be fitted.
func TestBootstrapFusedMomentsMatchMaterialised(t *testing.T) {
	far := sampleOf(randomData(31, 30, false))
	far.X[3], far.Y[3] = 1e4, 2e4 // resamples that start with it take the two-pass moments
	tiny := sampleOf(randomData(32, 25, false))
	for i := range tiny.X {
		tiny.X[i] *= 0x1p-450 // s_xx below 2^-800: the rescaled fit
		tiny.Y[i] *= 0x1p-450
	}
	few := eiv.Sample{X: []float64{1, 1, 1, 2}, Y: []float64{1, 1.2, 0.9, 2.1}} // constant-x resamples fail
	for _, c := range []struct {
		name string
		s    eiv.Sample
	}{{"ordinary", sampleOf(randomData(30, 40, true))}, {"far point", far}, {"tiny values", tiny}, {"failures", few}} {
		t.Run(c.name, func(t *testing.T) {
			fused := []eiv.Estimator{eiv.DemingEstimator{Lambda: 1.7}, eiv.OLSEstimator{}}
			plain := []eiv.Estimator{opaqueEstimator{fused[0]}, opaqueEstimator{fused[1]}}
			opt := &eiv.BootstrapOptions{Resamples: 3000, Seed: 5, Workers: 2}
			rf, err := eiv.Bootstrap(context.Background(), c.s, fused, opt)
			if err != nil {
				t.Fatal(err)
			}
			rp, err := eiv.Bootstrap(context.Background(), c.s, plain, opt)
			if err != nil {
				t.Fatal(err)
			}
			if rf.Failed != rp.Failed {
				t.Errorf("failed resamples: fused %d, materialised %d", rf.Failed, rp.Failed)
			}
			for j := range fused {
				for _, st := range []eiv.Statistic{eiv.SlopeOf(j), eiv.InterceptOf(j)} {
					a, b := rf.Replicates(st), rp.Replicates(st)
					if len(a) != len(b) {
						t.Fatalf("estimator %d: %d vs %d replicates", j, len(a), len(b))
					}
					for i := range a {
						if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
							t.Fatalf("estimator %d, replicate %d: fused %v, materialised %v", j, i, a[i], b[i])
						}
					}
				}
			}
		})
	}
}

// The hot loop allocates nothing per resample: the allocations of a whole
// bootstrap do not grow with B.
func TestBootstrapAllocationsIndependentOfB(t *testing.T) {
	s := sampleOf(randomData(5, 40, true))
	for _, ests := range [][]eiv.Estimator{
		{eiv.YorkEstimator{}, eiv.OLSEstimator{}},
		{eiv.DemingEstimator{Lambda: 2}},
		{eiv.WeightedDemingEstimator{Lambda: 1}},
	} {
		allocs := func(B int) float64 {
			return testing.AllocsPerRun(3, func() {
				if _, err := eiv.Bootstrap(context.Background(), s, ests, &eiv.BootstrapOptions{Resamples: B, Seed: 3, Workers: 2}); err != nil {
					t.Fatal(err)
				}
			})
		}
		small, large := allocs(200), allocs(4000)
		if large > small+2 { // slack for the scheduler's goroutine bookkeeping
			t.Errorf("%s: %v allocations at B = 200 but %v at B = 4000", ests[0].Method(), small, large)
		}
	}
}

func TestBootstrapCancel(t *testing.T) {
	s := sampleOf(randomData(5, 200, false))
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	start := time.Now()
	_, err := eiv.Bootstrap(ctx, s, []eiv.Estimator{eiv.YorkEstimator{}}, &eiv.BootstrapOptions{Resamples: 100000})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("err = %v", err)
	}
	if time.Since(start) > 5*time.Second {
		t.Errorf("cancellation took %v", time.Since(start))
	}
}

// Resamples that cannot be fitted are counted; above 10 % no interval is given.
func TestBootstrapFailures(t *testing.T) {
	// Four points, two of them sharing x: about 1 in 10 pairs resamples has
	// constant x (only x = 1 values, or one point repeated).
	s := eiv.Sample{X: []float64{1, 1, 1, 2}, Y: []float64{1, 1.2, 0.9, 2.1}}
	r, err := eiv.Bootstrap(context.Background(), s, []eiv.Estimator{eiv.OLSEstimator{}}, &eiv.BootstrapOptions{Resamples: 2000, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	// P(no x = 2 among 4 draws) = (3/4)^4 = 0.316; P(all four x = 2) = 1/256.
	share := float64(r.Failed) / 2000
	if math.Abs(share-(0.31640625+1.0/256)) > 0.04 {
		t.Errorf("failed share %.3f, expected about 0.32", share)
	}
	if len(r.Warnings) == 0 {
		t.Error("no warning")
	}
	if _, err := r.Summarize(eiv.SlopeOf(0)); !errors.Is(err, eiv.ErrTooManyFailures) {
		t.Errorf("Summarize: %v, want ErrTooManyFailures", err)
	}
}

// BCa and percentile intervals against scipy.stats.bootstrap (Debian
// python3-scipy 1.10, paired=True) on the same data and statistic at
// B = 20,000 each. The two use different random streams, so they agree
// only within Monte Carlo error: an endpoint's SD is about
// SE·√(α(1−α)/B)/φ(z_α) ≈ 0.019·SE here, 0.027·SE for the difference of two
// independent runs; the tolerance is 4 times that, 0.11·SE.
func TestBCaAgainstSciPy(t *testing.T) {
	py := reftest.Python(t, "scipy.stats", "numpy")
	rng := rand.New(rand.NewPCG(77, 1))
	var x, y []float64
	for range 30 {
		// Skewed x and heavy-tailed errors make BCa differ from percentile.
		xt := 5 + 20*math.Pow(rng.Float64(), 2)
		x = append(x, xt+0.8*rng.NormFloat64())
		y = append(y, 1+0.9*xt+math.Abs(xt-5)*0.15*rng.NormFloat64()*rng.NormFloat64())
	}
	const B = 20000
	for _, c := range []struct {
		name string
		est  eiv.Estimator
		stat string
	}{
		{"ols slope", eiv.OLSEstimator{}, "ols_slope"},
		{"deming slope", eiv.DemingEstimator{Lambda: 1.5}, "deming_slope"},
	} {
		t.Run(c.name, func(t *testing.T) {
			var ref struct {
				BCa           []float64 `json:"bca"`
				Percentile    []float64 `json:"percentile"`
				StandardError float64   `json:"standard_error"`
			}
			reftest.Run(t, py, reftest.Script(t, "ref_bootstrap.py"), map[string]any{
				"x": x, "y": y, "statistic": c.stat, "lambda": 1.5, "n_resamples": B, "confidence": 0.95, "seed": 5,
			}, &ref)
			r, err := eiv.Bootstrap(context.Background(), eiv.Sample{X: x, Y: y}, []eiv.Estimator{c.est},
				&eiv.BootstrapOptions{Resamples: B, Seed: 9})
			if err != nil {
				t.Fatal(err)
			}
			s, err := r.Summarize(eiv.SlopeOf(0))
			if err != nil {
				t.Fatal(err)
			}
			tol := 0.11 * ref.StandardError
			check := func(what string, got, want float64) {
				if math.Abs(got-want) > tol {
					t.Errorf("%s = %.5f, scipy %.5f (tolerance %.5f)", what, got, want, tol)
				}
			}
			check("BCa lower", s.BCa.Lower, ref.BCa[0])
			check("BCa upper", s.BCa.Upper, ref.BCa[1])
			check("percentile lower", s.Percentile.Lower, ref.Percentile[0])
			check("percentile upper", s.Percentile.Upper, ref.Percentile[1])
			// The SE of the replicates: relative MC error √(1/(2B)) ≈ 0.5 % each.
			if math.Abs(s.SE-ref.StandardError) > 0.03*ref.StandardError {
				t.Errorf("SE %.5f, scipy %.5f", s.SE, ref.StandardError)
			}
			t.Logf("BCa [%.5f, %.5f] scipy [%.5f, %.5f]", s.BCa.Lower, s.BCa.Upper, ref.BCa[0], ref.BCa[1])
		})
	}
}

// The parametric scheme draws around the fitted true points: its bootstrap
// SE of the York slope matches York's analytic SE when the stated
// uncertainties are right (both estimate the same sampling SD; 2,000
// resamples give about 1.6 % Monte Carlo error, and the analytic SE is a
// first-order approximation, so 10 % is allowed).
func TestParametricMatchesAnalytic(t *testing.T) {
	d := randomData(31, 60, true)
	f := must(t)(eiv.York(d.x, d.y, d.sx, d.sy, d.r, nil))
	r, err := eiv.Bootstrap(context.Background(), sampleOf(d), []eiv.Estimator{eiv.YorkEstimator{}},
		&eiv.BootstrapOptions{Resamples: 2000, Seed: 4, Scheme: eiv.SchemeParametric})
	if err != nil {
		t.Fatal(err)
	}
	s, _ := r.Summarize(eiv.SlopeOf(0))
	if math.Abs(s.SE/f.Slope.SE-1) > 0.10 {
		t.Errorf("parametric SE %.5g vs analytic %.5g", s.SE, f.Slope.SE)
	}
}
