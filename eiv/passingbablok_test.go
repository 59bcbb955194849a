package eiv_test

import (
	"math"
	"math/rand/v2"
	"sort"
	"testing"

	"eivfit/eiv"
)

// pbBrute is Passing & Bablok (1983) computed the plain way, written from
// the paper in the test: every pair (i, j), i < j, in input order; a pair of
// identical points and a slope of −1 are left out; a vertical pair counts as
// +∞ (the paper's ±∞ with the sign made order-free); b is the median of the
// sorted slopes shifted by K = #{S < −1}; a = median(y − b·x); the
// confidence bounds are the (M1+K)th and (M2+K)th slopes.
func pbBrute(x, y []float64, z float64) (a, b, bl, bu, al, au float64) {
	var s []float64
	for i := range x {
		for j := i + 1; j < len(x); j++ {
			dx, dy := x[j]-x[i], y[j]-y[i]
			if dx == 0 && dy == 0 {
				continue
			}
			sl := math.Inf(1)
			if dx != 0 {
				sl = dy / dx
			}
			if sl == -1 {
				continue
			}
			s = append(s, sl)
		}
	}
	sort.Float64s(s)
	k := 0
	for _, v := range s {
		if v < -1 {
			k++
		}
	}
	N := len(s)
	if N%2 == 1 {
		b = s[(N+1)/2+k-1]
	} else {
		b = (s[N/2+k-1] + s[N/2+k]) / 2
	}
	med := func(bb float64) float64 {
		r := make([]float64, len(x))
		for i := range x {
			r[i] = y[i] - bb*x[i]
		}
		sort.Float64s(r)
		if len(r)%2 == 1 {
			return r[len(r)/2]
		}
		return (r[len(r)/2-1] + r[len(r)/2]) / 2
	}
	n := float64(len(x))
	c := z * math.Sqrt(n*(n-1)*(2*n+5)/18)
	m1 := int(math.Round((float64(N) - c) / 2))
	m2 := N - m1 + 1
	bl, bu = s[m1+k-1], s[m2+k-1]
	return med(b), b, bl, bu, med(bu), med(bl)
}

func pbData(seed uint64, n int, ties bool) (x, y []float64) {
	r := rand.New(rand.NewPCG(seed, 5))
	for range n {
		t := 5 + 100*r.Float64()
		xv := t + 2*r.NormFloat64()
		yv := 3 + 0.95*t + 2.5*r.NormFloat64()
		if ties {
			xv, yv = math.Round(xv/4)*4, math.Round(yv/4)*4
		}
		x, y = append(x, xv), append(y, yv)
	}
	return
}

func TestPassingBablokBruteForce(t *testing.T) {
	for seed := uint64(1); seed <= 6; seed++ {
		for _, ties := range []bool{false, true} {
			x, y := pbData(seed, 15+10*int(seed), ties)
			pb, err := eiv.PassingBablok(x, y, nil)
			if err != nil {
				t.Fatal(err)
			}
			a, b, bl, bu, al, au := pbBrute(x, y, 1.959963984540054)
			// Order statistics and medians: the same numbers, bit for bit
			// up to the last rounding of a mean of two.
			near(t, "slope", pb.Fit.Slope.Value, b, 1e-14)
			near(t, "intercept", pb.Fit.Intercept.Value, a, 1e-12)
			near(t, "slope lower", pb.Fit.Slope.CI.Lower, bl, 1e-14)
			near(t, "slope upper", pb.Fit.Slope.CI.Upper, bu, 1e-14)
			near(t, "intercept lower", pb.Fit.Intercept.CI.Lower, al, 1e-12)
			near(t, "intercept upper", pb.Fit.Intercept.CI.Upper, au, 1e-12)
		}
	}
}

func TestPassingBablokProperties(t *testing.T) {
	// n = 42 gives N = 861 slopes, an odd number: the shifted median is one
	// order statistic, and exchanging the methods inverts it exactly (the
	// shift by K makes the estimator symmetric; Passing & Bablok 1983). For
	// even N the estimate is the mean of two slopes and inverts only
	// approximately.
	x, y := pbData(3, 42, false)
	pb, err := eiv.PassingBablok(x, y, nil)
	if err != nil {
		t.Fatal(err)
	}
	if pb.Slopes%2 != 1 {
		t.Fatalf("N = %d is even", pb.Slopes)
	}
	sw, err := eiv.PassingBablok(y, x, nil)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "exchanged slope", sw.Fit.Slope.Value, 1/pb.Fit.Slope.Value, 1e-12)
	near(t, "exchanged CI", sw.Fit.Slope.CI.Lower, 1/pb.Fit.Slope.CI.Upper, 1e-12)
	// The order of the samples changes nothing.
	p := rand.New(rand.NewPCG(1, 2)).Perm(len(x))
	px, py := make([]float64, len(x)), make([]float64, len(x))
	for i, j := range p {
		px[i], py[i] = x[j], y[j]
	}
	pp, _ := eiv.PassingBablok(px, py, nil)
	if pp.Fit.Slope.Value != pb.Fit.Slope.Value || pp.Fit.Intercept.Value != pb.Fit.Intercept.Value ||
		pp.Fit.Slope.CI != pb.Fit.Slope.CI || pp.Cusum != pb.Cusum {
		t.Error("permuting the samples changed the result")
	}
	// Kendall's τ confirms the positive correlation the method needs.
	if !(pb.Kendall.Statistic > 0.5 && pb.Kendall.PValue < 1e-6) {
		t.Errorf("kendall %+v", pb.Kendall)
	}
}

// Ties and slopes of exactly −1 are handled as the paper says: identical
// points and −1 slopes are left out, vertical pairs count as +∞.
func TestPassingBablokTies(t *testing.T) {
	// Points 0 and 1 identical; 2–3 vertical; 4–5 with slope exactly −1.
	x := []float64{1, 1, 2, 2, 3, 4, 5, 6, 7, 8}
	y := []float64{1, 1, 2, 3, 4, 3, 5, 6, 7, 8}
	pb, err := eiv.PassingBablok(x, y, nil)
	if err != nil {
		t.Fatal(err)
	}
	n := len(x)
	// All 45 pairs less one identical pair and the −1 slope(s).
	minus1 := 0
	for i := range n {
		for j := i + 1; j < n; j++ {
			if x[j] != x[i] && (y[j]-y[i])/(x[j]-x[i]) == -1 {
				minus1++
			}
		}
	}
	if pb.Slopes != n*(n-1)/2-1-minus1 {
		t.Errorf("slopes used %d, want %d", pb.Slopes, n*(n-1)/2-1-minus1)
	}
	a, b, _, _, _, _ := pbBrute(x, y, 1.959963984540054)
	near(t, "slope", pb.Fit.Slope.Value, b, 1e-14)
	near(t, "intercept", pb.Fit.Intercept.Value, a, 1e-14)
}

// The allocation-free fitter used by the bootstrap gives the same line as
// PassingBablok.
func TestPassingBablokEstimatorMatches(t *testing.T) {
	for _, ties := range []bool{false, true} {
		x, y := pbData(11, 37, ties)
		pb, err := eiv.PassingBablok(x, y, nil)
		if err != nil {
			t.Fatal(err)
		}
		a, b, err := eiv.PassingBablokEstimator{}.NewFitter(len(x)).FitLine(eiv.Sample{X: x, Y: y})
		if err != nil {
			t.Fatal(err)
		}
		if a != pb.Fit.Intercept.Value || b != pb.Fit.Slope.Value {
			t.Errorf("fitter (%v, %v), PassingBablok (%v, %v)", a, b, pb.Fit.Intercept.Value, pb.Fit.Slope.Value)
		}
	}
}

// Rounded (integer) data along a line can tie so many pairwise slopes that both rank
// bounds are the same slope. The brute force written from Passing & Bablok
// (1983) in this file shows the zero width; the estimator then gives no
// interval (and no SE of 0) with a warning, while data exactly on a line
// keep their zero-width interval.
func TestPassingBablokDegenerateInterval(t *testing.T) {
	n := 40
	x, y := make([]float64, n), make([]float64, n)
	for i := range n {
		x[i] = float64(i + 1)
		y[i] = 2*x[i] + float64(i%2) // integer readings, alternately 0 and 1 above the line
	}
	z := 1.959963984540054 // the 0.975 normal quantile (scipy.stats.norm.ppf)
	_, _, bl, bu, _, _ := pbBrute(x, y, z)
	if bl != bu {
		t.Fatalf("brute force: rank bounds %v, %v differ; the case no longer tests a zero-width interval", bl, bu)
	}
	r, err := eiv.PassingBablok(x, y, nil)
	if err != nil {
		t.Fatal(err)
	}
	if r.Fit.Slope.CI.Method != "" || r.Fit.Slope.SE != 0 || r.Fit.Intercept.CI.Method != "" {
		t.Errorf("slope %+v, intercept %+v: want no interval", r.Fit.Slope, r.Fit.Intercept)
	}
	if !hasWarning(r.Fit, "interval_degenerate") {
		t.Errorf("warnings %v: want interval_degenerate", r.Fit.Warnings)
	}
	for i := range n {
		y[i] = 2 + 0.5*x[i] // exactly on a line: every slope is 0.5
	}
	r, err = eiv.PassingBablok(x, y, nil)
	if err != nil {
		t.Fatal(err)
	}
	if s := r.Fit.Slope; s.CI.Method == "" || s.CI.Lower != 0.5 || s.CI.Upper != 0.5 || s.SE != 0 {
		t.Errorf("exact line: slope %+v, want the interval [0.5, 0.5]", s)
	}
}
