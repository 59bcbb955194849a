package eiv_test

import (
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"testing"

	"eivfit/eiv"
)

// residualCase is seeded residuals, levels and a run order (a permutation
// of the input, with ties in the order values when ties is set).
type residualCase struct {
	name      string
	n         int
	seed      uint64
	ties      bool
	shuffled  bool
	zeroLevel bool // a level of exactly 0 and residuals of ±0
}

var residualCases = []residualCase{
	{name: "n=4 in order", n: 4, seed: 1},
	{name: "n=7 shuffled", n: 7, seed: 2, shuffled: true},
	{name: "n=50 shuffled with ties", n: 50, seed: 3, shuffled: true, ties: true},
	{name: "n=1000 shuffled", n: 1000, seed: 4, shuffled: true},
	{name: "n=31 signed zeros", n: 31, seed: 5, shuffled: true, zeroLevel: true},
}

// data returns residuals e, levels and the indices ord of the samples in
// run order (a stable sort of the order values).
func (c residualCase) data() (e, level []float64, ord []int) {
	r := rand.New(rand.NewPCG(c.seed, 13))
	e, level = make([]float64, c.n), make([]float64, c.n)
	order := make([]float64, c.n)
	for i := range c.n {
		level[i] = 10 + 90*r.Float64()
		e[i] = r.NormFloat64() * (0.5 + level[i]/100)
		order[i] = float64(i)
		if c.ties {
			order[i] = float64(i / 3)
		}
	}
	if c.zeroLevel {
		level[0], e[1], e[2] = 0, 0, math.Copysign(0, -1)
	}
	if c.shuffled {
		r.Shuffle(c.n, func(i, j int) { order[i], order[j] = order[j], order[i] })
	}
	ord = make([]int, c.n)
	for i := range ord {
		ord[i] = i
	}
	slices.SortStableFunc(ord, func(a, b int) int {
		switch {
		case order[a] < order[b]:
			return -1
		case order[a] > order[b]:
			return 1
		}
		return 0
	})
	return e, level, ord
}

// Durbin–Watson and the runs test in run order through a permutation equal
// the tests on copies permuted into run order. d and the runs statistic are
// the same sums in the same order: equal to the bit. DW's p-value takes the
// levels' mean and Sxx in input order, not run order; the sums differ by
// rounding only, which moves p by ~1e-15 relative: 1e-12.
func TestTestsInRunOrder(t *testing.T) {
	for _, c := range residualCases {
		t.Run(c.name, func(t *testing.T) {
			e, level, ord := c.data()
			eo, lo := permuted(e, ord), permuted(level, ord)
			got, err := eiv.DurbinWatsonInOrder(e, level, ord)
			if err != nil {
				t.Fatal(err)
			}
			want, err := eiv.DurbinWatson(eo, lo)
			if err != nil {
				t.Fatal(err)
			}
			if got.Statistic != want.Statistic {
				t.Errorf("d = %.17g, want %.17g", got.Statistic, want.Statistic)
			}
			closeRel(t, "DW p", got.PValue, want.PValue, 1e-12)
			rg, err := eiv.RunsTestInOrder(e, ord)
			if err != nil {
				t.Fatal(err)
			}
			rw, err := eiv.RunsTest(eo)
			if err != nil {
				t.Fatal(err)
			}
			if rg != rw {
				t.Errorf("runs in order %+v, on the permuted copy %+v", rg, rw)
			}
		})
	}
}

// Durbin–Watson's p-value against its definition evaluated with dense
// matrices (Durbin & Watson 1950, 1951; the formula in DurbinWatson's doc
// comment): M = I − X(XᵀX)⁻¹Xᵀ for X = [1, level], A the first-difference
// matrix, E d = tr(MA)/(n−2), var d = 2[(n−2)·tr((MA)²) − tr(MA)²]/((n−2)²·n),
// p = Φ((d − E d)/SD). The O(n) rank-2 evaluation and the O(n³) dense one
// round differently: 1e-10 relative on p (n ≤ 40, well-conditioned X).
func TestDurbinWatsonDense(t *testing.T) {
	for _, c := range residualCases {
		if c.n > 60 {
			continue
		}
		t.Run(c.name, func(t *testing.T) {
			e, level, ord := c.data()
			got, err := eiv.DurbinWatsonInOrder(e, level, ord)
			if err != nil {
				t.Fatal(err)
			}
			mean, variance := denseDWMoments(permuted(level, ord))
			z := (got.Statistic - mean) / math.Sqrt(variance)
			closeRel(t, "DW p", got.PValue, 0.5*math.Erfc(-z/math.Sqrt2), 1e-10)
		})
	}
}

// denseDWMoments is E d and var d for design [1, level] in the given order,
// from explicit n × n matrices.
func denseDWMoments(level []float64) (mean, variance float64) {
	n := len(level)
	// (XᵀX)⁻¹ of X = [1, level], then M = I − X(XᵀX)⁻¹Xᵀ.
	var s1, s2 float64
	for _, v := range level {
		s1 += v
		s2 += v * v
	}
	det := float64(n)*s2 - s1*s1
	inv := [2][2]float64{{s2 / det, -s1 / det}, {-s1 / det, float64(n) / det}}
	m := make([][]float64, n)
	for i := range n {
		m[i] = make([]float64, n)
		xi := [2]float64{1, level[i]}
		for j := range n {
			xj := [2]float64{1, level[j]}
			var h float64
			for a := range 2 {
				for b := range 2 {
					h += xi[a] * inv[a][b] * xj[b]
				}
			}
			m[i][j] = -h
			if i == j {
				m[i][j]++
			}
		}
	}
	a := func(i, j int) float64 { // the first-difference Gram matrix
		switch {
		case i == j && (i == 0 || i == n-1):
			return 1
		case i == j:
			return 2
		case i-j == 1 || j-i == 1:
			return -1
		}
		return 0
	}
	ma := make([][]float64, n)
	var tr, tr2 float64
	for i := range n {
		ma[i] = make([]float64, n)
		for j := range n {
			for k := range n {
				ma[i][j] += m[i][k] * a(k, j)
			}
		}
		tr += ma[i][i]
	}
	for i := range n {
		for k := range n {
			tr2 += ma[i][k] * ma[k][i]
		}
	}
	nu := float64(n - 2)
	return tr / nu, 2 * (nu*tr2 - tr*tr) / (nu * nu * float64(n))
}

// The residual checks a report of 10⁶ points runs read the residuals in
// place: Durbin–Watson, the runs test (in run order through a permutation)
// and Breusch–Pagan allocate a few hundred bytes (their Detail text)
// whatever n, where one copy of the residuals at n = 100,000 is 800 kB.
func TestResidualChecksAllocateNoCopies(t *testing.T) {
	const n = 100_000
	c := residualCase{n: n, seed: 9, shuffled: true}
	e, level, ord := c.data()
	checks := []struct {
		name string
		run  func() error
	}{
		{"Durbin–Watson in run order", func() error { _, err := eiv.DurbinWatsonInOrder(e, level, ord); return err }},
		{"runs test in run order", func() error { _, err := eiv.RunsTestInOrder(e, ord); return err }},
		{"Breusch–Pagan", func() error { _, err := eiv.BreuschPagan(e, level); return err }},
	}
	for _, ch := range checks {
		t.Run(ch.name, func(t *testing.T) {
			if err := ch.run(); err != nil { // warm up (lazy tables)
				t.Fatal(err)
			}
			var before, after runtime.MemStats
			runtime.ReadMemStats(&before)
			if err := ch.run(); err != nil {
				t.Fatal(err)
			}
			runtime.ReadMemStats(&after)
			if b := after.TotalAlloc - before.TotalAlloc; b > 4<<10 {
				t.Errorf("allocated %d bytes at n = %d, want < 4 KiB (no copy of the residuals)", b, n)
			}
		})
	}
}

// SpearmanAbs(x, y) is Spearman(x, |y|) to the bit; NormalQQSample and
// BlomQuantile are NormalQQ's Sample and Theoretical to the bit, with ties
// and signed zeros (Spearman's and the Q-Q values are checked against scipy
// in TestDiagnosticsAgainstReferences; these are the same numbers without
// the copies).
func TestInPlaceVariantsEqual(t *testing.T) {
	for _, c := range residualCases {
		t.Run(c.name, func(t *testing.T) {
			e, level, _ := c.data()
			abs := make([]float64, len(e))
			for i, v := range e {
				abs[i] = math.Abs(v)
			}
			got, err1 := eiv.SpearmanAbs(level, e)
			want, err2 := eiv.Spearman(level, abs)
			if got != want || (err1 == nil) != (err2 == nil) {
				t.Errorf("SpearmanAbs %+v (%v), Spearman of |e| %+v (%v)", got, err1, want, err2)
			}
			qq, s := eiv.NormalQQ(e), eiv.NormalQQSample(e)
			if len(qq) != len(s) {
				t.Fatalf("%d Q-Q points, %d sample values", len(qq), len(s))
			}
			for r := range qq {
				if qq[r].Sample != s[r] || qq[r].Theoretical != eiv.BlomQuantile(r, len(e)) {
					t.Fatalf("point %d: NormalQQ %+v, NormalQQSample %v, BlomQuantile %v", r, qq[r], s[r], eiv.BlomQuantile(r, len(e)))
				}
			}
		})
	}
}

// BlandAltmanLimits is BlandAltman's bias and limits without the copies of
// the differences and means (nor the regression of one on the other): to
// the bit, and the same error for the same fault. BlandAltman itself is
// checked against Bland & Altman (1986) in TestBlandAltman1986.
func TestBlandAltmanLimitsEqual(t *testing.T) {
	nan := math.NaN()
	for _, c := range []struct {
		name string
		x, y []float64
		mult float64
	}{
		{"seeded 200", nil, nil, 0},
		{"seeded 200, 2.576", nil, nil, 2.576},
		{"three points", []float64{1, 2, 3}, []float64{1.1, 2.3, 2.8}, 0},
		{"equal differences", []float64{1, 2, 3, 4}, []float64{2, 3, 4, 5}, 0},
		{"two points", []float64{1, 2}, []float64{1, 2}, 0},
		{"NaN at 2", []float64{1, 2, nan, 4}, []float64{1, 2, 3, 4}, 0},
		{"overflowing mean at 1", []float64{1, math.MaxFloat64, 3}, []float64{1, math.MaxFloat64, 3}, 0},
		{"lengths differ", []float64{1, 2, 3}, []float64{1, 2}, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			x, y := c.x, c.y
			if x == nil {
				r := rand.New(rand.NewPCG(8, 8))
				for range 200 {
					v := 1e6 + 100*r.Float64()
					x, y = append(x, v), append(y, v*1.01+r.NormFloat64())
				}
			}
			opt := &eiv.Options{Confidence: 0.9}
			got, err1 := eiv.BlandAltmanLimits(x, y, c.mult, opt)
			want, err2 := eiv.BlandAltman(x, y, c.mult, opt)
			if (err1 == nil) != (err2 == nil) || err1 != nil && err1.Error() != err2.Error() {
				t.Fatalf("errors %v, BlandAltman %v", err1, err2)
			}
			if err1 != nil {
				return
			}
			if got.Proportional != nil {
				t.Error("the limits carry a regression")
			}
			want.Proportional, want.ProportionalP = nil, 0
			if *got != *want {
				t.Errorf("limits %+v\nBlandAltman %+v", *got, *want)
			}
		})
	}
}

// permuted is v read in the order ord (v[ord[0]], v[ord[1]], …).
func permuted(v []float64, ord []int) []float64 {
	out := make([]float64, len(ord))
	for k, i := range ord {
		out[k] = v[i]
	}
	return out
}
