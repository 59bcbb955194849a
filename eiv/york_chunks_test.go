package eiv_test

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"testing"

	"eivfit/eiv"
)

// largeYork draws n points about a line with errors ratio times the spread
// of x (σx and σy alike): small ratios give an ordinary fit, ratios near 1
// hard data, where the global search runs.
func largeYork(seed uint64, n int, ratio float64, corr bool) (x, y, sx, sy, r []float64) {
	rng := rand.New(rand.NewPCG(seed, 11))
	x, y, sx, sy = make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	if corr {
		r = make([]float64, n)
	}
	for i := range n {
		xt := 100 * rng.Float64()
		sx[i] = ratio * 30 * (0.5 + rng.Float64())
		sy[i] = ratio * 30 * (0.5 + rng.Float64())
		rho := 0.0
		if corr {
			rho = 1.6*rng.Float64() - 0.8
			r[i] = rho
		}
		z1, z2 := rng.NormFloat64(), rng.NormFloat64()
		x[i] = xt + sx[i]*z1
		y[i] = 2 + 0.7*xt + sy[i]*(rho*z1+math.Sqrt(1-rho*rho)*z2)
	}
	return x, y, sx, sy, r
}

func sameBits(t *testing.T, what string, a, b float64) {
	t.Helper()
	if math.Float64bits(a) != math.Float64bits(b) {
		t.Errorf("%s: %v vs %v (not the same bits)", what, a, b)
	}
}

// Large York fits split their passes into chunks fixed by n alone and add
// the chunks' sums in order: the fit is the same bit for bit on one core,
// two or four (and so from run to run).
func TestYorkChunkedSameBitsAnyCores(t *testing.T) {
	for _, c := range []struct {
		name  string
		n     int
		ratio float64
		corr  bool
	}{
		{"ordinary", 200_000, 0.01, false},
		{"correlated, n not a multiple of the chunk", 100_003, 0.01, true},
		{"hard (global search)", 70_001, 0.4, false},
	} {
		t.Run(c.name, func(t *testing.T) {
			x, y, sx, sy, r := largeYork(5, c.n, c.ratio, c.corr)
			var fits []*eiv.Fit
			for _, procs := range []int{1, 2, 4} {
				prev := runtime.GOMAXPROCS(procs)
				f, err := eiv.York(x, y, sx, sy, r, nil)
				runtime.GOMAXPROCS(prev)
				if err != nil {
					t.Fatalf("GOMAXPROCS %d: %v", procs, err)
				}
				fits = append(fits, f)
			}
			for i, f := range fits[1:] {
				g := fits[0]
				what := []string{"GOMAXPROCS 2 vs 1", "GOMAXPROCS 4 vs 1"}[i]
				sameBits(t, what+": slope", f.Slope.Value, g.Slope.Value)
				sameBits(t, what+": intercept", f.Intercept.Value, g.Intercept.Value)
				sameBits(t, what+": SE of the slope", f.Slope.SE, g.Slope.SE)
				sameBits(t, what+": SE of the intercept", f.Intercept.SE, g.Intercept.SE)
				sameBits(t, what+": covariance", f.CovSlopeIntercept, g.CovSlopeIntercept)
				sameBits(t, what+": χ²", f.Chi2, g.Chi2)
				sameBits(t, what+": centre", f.Centre.X, g.Centre.X)
				if f.Iterations != g.Iterations {
					t.Errorf("%s: %d vs %d iterations", what, f.Iterations, g.Iterations)
				}
			}
		})
	}
}

// The chunked passes compute the same fit as the single loop: repeating
// every point of a dataset leaves York's S with the same minimiser (S
// doubles), halves the variances of the line and doubles χ². The dataset
// of m < 2¹⁵ points is fitted by the single loop, its doubled copy (2m ≥
// 2¹⁵) by the chunks. Tolerance 1e-12 relative: the two sum the same terms
// in a different order (about 6·10⁴ terms, each sum's rounding ~1e-16·√n);
// the hard case's χ² is compared to 1e-9 since its minimum is polished to
// the slope's rounding floor only.
func TestYorkChunkedMatchesSingleLoop(t *testing.T) {
	for _, c := range []struct {
		name  string
		ratio float64
		corr  bool
	}{{"ordinary", 0.01, false}, {"correlated", 0.01, true}, {"hard", 0.4, false}} {
		t.Run(c.name, func(t *testing.T) {
			const m = 30_000
			x, y, sx, sy, r := largeYork(9, m, c.ratio, c.corr)
			twice := func(v []float64) []float64 {
				if v == nil {
					return nil
				}
				return append(append([]float64{}, v...), v...)
			}
			one, err := eiv.York(x, y, sx, sy, r, nil)
			if err != nil {
				t.Fatal(err)
			}
			two, err := eiv.York(twice(x), twice(y), twice(sx), twice(sy), twice(r), nil)
			if err != nil {
				t.Fatal(err)
			}
			rel := func(what string, got, want, tol float64) {
				t.Helper()
				if d := math.Abs(got-want) / math.Abs(want); !(d <= tol) {
					t.Errorf("%s: %.17g vs %.17g (relative %.2g > %.0e)", what, got, want, d, tol)
				}
			}
			rel("slope", two.Slope.Value, one.Slope.Value, 1e-12)
			rel("intercept", two.Intercept.Value, one.Intercept.Value, 1e-12)
			rel("SE of the slope ×√2", two.Slope.SE*math.Sqrt2, one.Slope.SE, 1e-10)
			rel("SE of the intercept ×√2", two.Intercept.SE*math.Sqrt2, one.Intercept.SE, 1e-10)
			rel("χ²/2", two.Chi2/2, one.Chi2, 1e-9)
		})
	}
}

// York's validation reads the four columns in one chunked pass for large
// n, and answers as checking x and y row by row first and the σ after:
// the first bad x or y anywhere before any bad σ, each the first of its
// kind, with its absolute row.
func TestYorkCheckChunkedOrder(t *testing.T) {
	// An edit puts v in column col at row at·n: rows far apart lie in
	// different chunks when n is large.
	type edit struct {
		col string
		at  float64
		v   float64
	}
	for _, n := range []int{1_000, 100_000} {
		for _, c := range []struct {
			name  string
			edits []edit
			field string
			at    float64
			want  error
		}{
			{"y after a bad σ", []edit{{"sx", 0.01, -1}, {"y", 0.99, math.NaN()}}, "y", 0.99, eiv.ErrNonFinite},
			{"first of two bad σ", []edit{{"sy", 0.9, math.Inf(1)}, {"sx", 0.3, -2}}, "sx", 0.3, eiv.ErrInvalidUncertainty},
			{"both σ zero", []edit{{"sx", 0.7, 0}, {"sy", 0.7, 0}}, "sy", 0.7, eiv.ErrInvalidUncertainty},
			{"first of two bad x", []edit{{"x", 0.95, math.NaN()}, {"x", 0.5, math.Inf(-1)}}, "x", 0.5, eiv.ErrNonFinite},
		} {
			t.Run(fmt.Sprintf("n=%d/%s", n, c.name), func(t *testing.T) {
				x, y, sx, sy, _ := largeYork(3, n, 0.01, false)
				cols := map[string][]float64{"x": x, "y": y, "sx": sx, "sy": sy}
				for _, e := range c.edits {
					cols[e.col][int(e.at*float64(n))] = e.v
				}
				_, err := eiv.York(x, y, sx, sy, nil, nil)
				var pe *eiv.PointError
				row := int(c.at * float64(n))
				if !errors.As(err, &pe) || pe.Field != c.field || pe.Index != row || !errors.Is(err, c.want) {
					t.Fatalf("got %v, want %v at %s row %d", err, c.want, c.field, row)
				}
			})
		}
		t.Run(fmt.Sprintf("n=%d/constant x", n), func(t *testing.T) {
			x, y, sx, sy, _ := largeYork(3, n, 0.01, false)
			for i := range x {
				x[i] = 2
			}
			if _, err := eiv.York(x, y, sx, sy, nil, nil); !errors.Is(err, eiv.ErrConstantX) {
				t.Fatalf("got %v, want ErrConstantX", err)
			}
		})
	}
}
