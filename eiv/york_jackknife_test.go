package eiv_test

import (
	"fmt"
	"math"
	"testing"

	"eivfit/eiv"
)

// York's jackknife starts each refit at a slope predicted from the full
// data's sums; the refits still iterate on their own data, so each
// leave-one-out line must equal York fitted afresh (tolerance 1e-15) to
// the sample without the point. Tolerance 1e-12 relative (intercepts
// relative to |a| + |b·x̄|, the condition of ȳ − b·x̄): the refits stop at
// a relative slope change of 1e-12, and York's map contracts, so the
// slope is within a fraction of that; the jackknife SEs, formed from the
// lines' differences of about 1 % of the slope, within 1e-10.
func TestYorkJackknifePredictedStarts(t *testing.T) {
	type dcase struct {
		name string
		d    dataset
		r    bool
	}
	var cases []dcase
	for _, n := range []int{6, 10, 40, 400} {
		for _, corr := range []bool{false, true} {
			cases = append(cases, dcase{fmt.Sprintf("n=%d/corr=%v", n, corr), randomData(uint64(40+n), n, corr), corr})
		}
	}
	// One point with σ a thousandth of the others' carries most of the
	// weight: the full sums less its terms lose digits.
	dom := randomData(77, 40, false)
	dom.sx[5], dom.sy[5] = dom.sx[5]/1000, dom.sy[5]/1000
	cases = append(cases, dcase{"dominating point", dom, false})
	// Every point with the same σx, σy (and ρ), as when the uncertainties
	// are stated once for each instrument: the refits' first passes work a
	// point's weight out once for all points.
	for _, corr := range []bool{false, true} {
		eq := randomData(91, 40, corr)
		for i := range eq.sx {
			eq.sx[i], eq.sy[i], eq.r[i] = eq.sx[0], eq.sy[0], eq.r[0]
		}
		cases = append(cases, dcase{fmt.Sprintf("equal sigma/corr=%v", corr), eq, corr})
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := c.d
			var r []float64
			if c.r {
				r = d.r
			}
			f := must(t)(eiv.York(d.x, d.y, d.sx, d.sy, r, &eiv.YorkOptions{Jackknife: true}))
			if f.Jackknife == nil {
				t.Fatalf("no jackknife: %v", f.Warnings)
			}
			drop := func(v []float64, i int) []float64 {
				if v == nil {
					return nil
				}
				return append(append([]float64{}, v[:i]...), v[i+1:]...)
			}
			var xbar float64
			for _, v := range d.x {
				xbar += v / float64(len(d.x))
			}
			as, bs := make([]float64, len(d.x)), make([]float64, len(d.x))
			for i := range d.x {
				g := must(t)(eiv.York(drop(d.x, i), drop(d.y, i), drop(d.sx, i), drop(d.sy, i), drop(r, i), nil))
				as[i], bs[i] = g.Intercept.Value, g.Slope.Value
				if e := math.Abs(f.Jackknife.SlopeLOO[i]-bs[i]) / math.Abs(bs[i]); !(e <= 1e-12) {
					t.Errorf("slope without point %d: %.17g, refit %.17g (relative %.2g)", i, f.Jackknife.SlopeLOO[i], bs[i], e)
				}
				scale := math.Abs(as[i]) + math.Abs(bs[i]*xbar)
				if e := math.Abs(f.Jackknife.InterceptLOO[i]-as[i]) / scale; !(e <= 1e-12) {
					t.Errorf("intercept without point %d: %.17g, refit %.17g (relative %.2g)", i, f.Jackknife.InterceptLOO[i], as[i], e)
				}
			}
			// The jackknife SE: √((n−1)/n·Σ(θᵢ − θ̄)²) (Efron & Tibshirani 1993, eq. 11.5).
			se := func(v []float64) float64 {
				var m, ss float64
				for _, x := range v {
					m += x / float64(len(v))
				}
				for _, x := range v {
					ss += (x - m) * (x - m)
				}
				return math.Sqrt(float64(len(v)-1) / float64(len(v)) * ss)
			}
			near(t, "jackknife se(slope)", f.Jackknife.Slope.SE, se(bs), 1e-10)
			near(t, "jackknife se(intercept)", f.Jackknife.Intercept.SE, se(as), 1e-10)
		})
	}
}
