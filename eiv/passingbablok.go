package eiv

import (
	"context"
	"fmt"
	"math"
	"slices"
)

// PassingBablokResult is the Passing–Bablok line with its checks.
type PassingBablokResult struct {
	Fit *Fit // Slope and Intercept with the paper's CIs; SE is the CI half-width over z (an equivalent, for tables)
	// Slopes is N, the number of pairwise slopes used; Shift is K, the
	// number of them below −1.
	Slopes, Shift int
	// Cusum is the linearity test.
	Cusum CusumResult
	// Kendall is Kendall's τ of x and y: the method assumes a positive
	// correlation (a significant τ > 0).
	Kendall TestResult
}

// CusumResult is Passing & Bablok's cumulative-sum linearity test.
type CusumResult struct {
	// Max is max |cusum| of the residual scores ordered along the line.
	Max float64
	// Above and Below count the points above and below the line (l and L).
	Above, Below int
	// KS is Max/√(l+L), the cusum read as the two-sample Kolmogorov–Smirnov
	// statistic √(lL/(l+L))·D of the positions of the points above and
	// below the line; PValue is its asymptotic Kolmogorov p-value.
	KS, PValue float64
	// Linear is PValue ≥ 0.05 (no evidence against linearity).
	Linear bool
}

// PassingBablok fits y = a + b·x by the method of Passing & Bablok (1983,
// J. Clin. Chem. Clin. Biochem. 21:709), which assumes only that the errors
// of both methods have the same distribution up to a constant ratio and
// that x and y are positively correlated:
//
//   - pairwise slopes S_ij = (y_j − y_i)/(x_j − x_i), i < j; a pair of
//     identical points is skipped, a slope of exactly −1 is skipped, and a
//     pair with equal x (points ordered by x, then y) counts as +∞;
//   - b is the median of the N slopes shifted by K, the number below −1:
//     S₍(N+1)/2+K₎ for odd N, the mean of S₍N/2+K₎ and S₍N/2+1+K₎ for even N;
//   - a = median{y_i − b·x_i};
//   - the CI of b is [S₍M1+K₎, S₍M2+K₎] with C = z_{1−α/2}·√(n(n−1)(2n+5)/18),
//     M1 = round((N − C)/2), M2 = N − M1 + 1; the CI of a is
//     [median{y − b_U·x}, median{y − b_L·x}].
//
// The slopes are not stored: their order statistics are found by slope
// selection (passingbablok_select.go), O(n log n) time per count and O(n)
// memory, with the same values, bit for bit, as sorting all of them.
func PassingBablok(x, y []float64, opt *Options) (*PassingBablokResult, error) {
	return PassingBablokContext(context.Background(), x, y, opt)
}

// PassingBablokContext is PassingBablok that stops with ctx's error when ctx
// is cancelled or its deadline passes.
func PassingBablokContext(ctx context.Context, x, y []float64, opt *Options) (*PassingBablokResult, error) {
	conf, err := opt.confidence()
	if err != nil {
		return nil, err
	}
	if err := checkXY(x, y); err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	n := len(x)
	sel := newPBSet(ctx, x, y)
	k64, e, err := sel.minusOne()
	if err != nil {
		return nil, err
	}
	if sel.ntot-e < 2 {
		return nil, fmt.Errorf("%w: too few distinct pairs for Passing–Bablok", ErrDegenerate)
	}
	N, k := int(sel.ntot-e), int(k64)
	// at is the r-th (1-based) of the N slopes other than −1; false when r
	// is out of range.
	at := func(r int) (float64, bool, error) {
		if r < 1 || r > N {
			return 0, false, nil
		}
		v, err := sel.nth(int64(r), k64, e)
		return v, err == nil, err
	}
	var b float64
	var ok1, ok2 bool
	if N%2 == 1 {
		b, ok1, err = at((N+1)/2 + k)
		ok2 = ok1
	} else {
		var lo, hi float64
		lo, ok1, err = at(N/2 + k)
		if err == nil {
			hi, ok2, err = at(N/2 + 1 + k)
		}
		b = (lo + hi) / 2
	}
	if err != nil {
		return nil, err
	}
	if !ok1 || !ok2 || math.IsInf(b, 0) {
		return nil, fmt.Errorf("%w: the shifted median slope is not finite (x and y show no positive relation)", ErrDegenerate)
	}
	z := zQuantile(conf)
	c := z * math.Sqrt(float64(n)*float64(n-1)*float64(2*n+5)/18)
	m1 := int(math.Round((float64(N) - c) / 2))
	m2 := N - m1 + 1
	bl, okl, err := at(m1 + k)
	if err != nil {
		return nil, err
	}
	bu, oku, err := at(m2 + k)
	if err != nil {
		return nil, err
	}
	res := &PassingBablokResult{Slopes: N, Shift: k}
	f := &Fit{Method: MethodPassingBablok, N: n, Confidence: conf, DOF: n - 2, Converged: true}
	a := medianOf(y, x, b)
	f.Slope.Value, f.Intercept.Value = b, a
	// The data lie on one line exactly when every pairwise slope is the same.
	onLine := false
	if okl && oku && bl == bu {
		first, _, err := at(1)
		if err != nil {
			return nil, err
		}
		last, _, err := at(N)
		if err != nil {
			return nil, err
		}
		onLine = first == last
	}
	switch {
	case okl && oku && bl == bu && !onLine:
		// Many tied pairwise slopes (rounded data) can make both rank
		// bounds the same slope. A zero-width interval would claim an
		// exact slope the scatter does not support, so none is given.
		f.Warnings = append(f.Warnings, &Warning{Code: "interval_degenerate", Message: "passing_bablok: many pairwise slopes are tied (rounded data), so the rank interval has zero width and would understate the uncertainty; it is left out: ask for a bootstrap (resamples) for an interval"})
	case okl && oku && !math.IsInf(bl, 0) && !math.IsInf(bu, 0):
		al, au := medianOf(y, x, bu), medianOf(y, x, bl)
		f.Slope.CI = Interval{Lower: bl, Upper: bu, Level: conf, Method: "Passing-Bablok rank interval"}
		f.Intercept.CI = Interval{Lower: al, Upper: au, Level: conf, Method: "Passing-Bablok rank interval"}
		f.Slope.SE = (bu - bl) / (2 * z)
		f.Intercept.SE = (au - al) / (2 * z)
	default:
		// No interval and no SE: both stay unset (CI.Method empty).
		f.Warnings = append(f.Warnings, &Warning{Code: "interval_unavailable", Message: "passing_bablok: too few slopes for a confidence interval at this level"})
	}
	if err := f.finite(); err != nil {
		return nil, err
	}
	res.Fit = f
	res.Cusum = cusumTest(x, y, a, b)
	if !res.Cusum.Linear {
		f.Warnings = append(f.Warnings, &Warning{Code: "nonlinear", Message: fmt.Sprintf(
			"passing_bablok: the cusum test finds a departure from linearity (p = %.2g)", res.Cusum.PValue)})
	}
	if kt, err := KendallTau(x, y); err == nil {
		res.Kendall = kt
		if !(kt.Statistic > 0 && kt.PValue < 0.05) {
			f.Warnings = append(f.Warnings, &Warning{Code: "no_positive_correlation", Message: fmt.Sprintf(
				"passing_bablok: Kendall's τ = %.3g (p = %.2g) does not show the significant positive correlation the method assumes", kt.Statistic, kt.PValue)})
		}
	}
	return res, nil
}

// MethodPassingBablok is the Passing–Bablok estimator.
const MethodPassingBablok Method = "passing_bablok"

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// medianOf returns median{y_i − b·x_i}.
func medianOf(y, x []float64, b float64) float64 {
	r := make([]float64, len(y))
	for i := range y {
		r[i] = y[i] - b*x[i]
	}
	return median(r)
}

func median(v []float64) float64 {
	s := slices.Clone(v)
	slices.Sort(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

// CusumLinearity runs Passing & Bablok's cusum linearity test for any line
// (a, b) fitted to (x, y).
func CusumLinearity(x, y []float64, a, b float64) CusumResult { return cusumTest(x, y, a, b) }

// cusumTest scores each point +√(L/l) above the line and −√(l/L) below it
// (0 on it), orders the points by their position along the line
// D_i = (y_i + x_i/b − a)/√(1 + 1/b²), and takes the largest |cusum|.
func cusumTest(x, y []float64, a, b float64) CusumResult {
	n := len(x)
	var l, L int
	for i := range n {
		switch r := y[i] - a - b*x[i]; {
		case r > 0:
			l++
		case r < 0:
			L++
		}
	}
	res := CusumResult{Above: l, Below: L, PValue: 1, Linear: true}
	if l == 0 || L == 0 || b == 0 {
		return res
	}
	up, down := math.Sqrt(float64(L)/float64(l)), -math.Sqrt(float64(l)/float64(L))
	idx := make([]int, n)
	pos := make([]float64, n)
	norm := math.Sqrt(1 + 1/(b*b))
	for i := range n {
		idx[i] = i
		pos[i] = (y[i] + x[i]/b - a) / norm
	}
	slices.SortStableFunc(idx, func(p, q int) int { return cmpFloat(pos[p], pos[q]) })
	var cs float64
	for _, i := range idx {
		switch r := y[i] - a - b*x[i]; {
		case r > 0:
			cs += up
		case r < 0:
			cs += down
		}
		res.Max = math.Max(res.Max, math.Abs(cs))
	}
	res.KS = res.Max / math.Sqrt(float64(l+L))
	res.PValue = KolmogorovSurvival(res.KS)
	res.Linear = res.PValue >= 0.05
	return res
}

// PassingBablokEstimator is Passing–Bablok for the resampling engines. Up
// to pbFitterBruteMaxN points its fitter keeps a buffer for the n(n−1)/2
// slopes and sorts them (after the first fit it allocates nothing); above,
// it selects the order statistics as PassingBablok does.
type PassingBablokEstimator struct{}

// pbFitterBruteMaxN is the largest sample the fitter sorts all slopes of.
const pbFitterBruteMaxN = 128

func (PassingBablokEstimator) Method() Method { return MethodPassingBablok }
func (PassingBablokEstimator) NewFitter(n int) LineFitter {
	f := &pbFitter{r: make([]float64, n)}
	if n <= pbFitterBruteMaxN {
		f.s = make([]float64, 0, n*(n-1)/2)
	}
	return f
}

// TruePoints for Passing–Bablok move each point to the line along the
// direction of equal error ratio 1 (the method's assumption of errors of
// equal size in x and y, up to the slope).
func (PassingBablokEstimator) TruePoints(s Sample, a, b float64, xh, yh []float64) {
	adjustDeming(s.X, s.Y, a, b, b*b, xh, yh)
}

type pbFitter struct{ s, r []float64 }

func (f *pbFitter) FitLine(smp Sample) (float64, float64, error) {
	x, y := smp.X, smp.Y
	n := len(x)
	var b float64
	var err error
	if n <= pbFitterBruteMaxN {
		b, err = f.sortedSlope(x, y)
	} else {
		b, err = selectedSlope(x, y)
	}
	if err != nil {
		return 0, 0, err
	}
	if math.IsInf(b, 0) || math.IsNaN(b) {
		return 0, 0, ErrDegenerate
	}
	res := f.r[:n]
	for i := range n {
		res[i] = y[i] - b*x[i]
	}
	slices.Sort(res)
	var a float64
	if n%2 == 1 {
		a = res[n/2]
	} else {
		a = (res[n/2-1] + res[n/2]) / 2
	}
	return a, b, nil
}

// sortedSlope is the shifted median of the slopes, all stored and sorted.
func (f *pbFitter) sortedSlope(x, y []float64) (float64, error) {
	n := len(x)
	s := f.s[:0]
	k := 0
	for i := range n {
		for j := i + 1; j < n; j++ {
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
			if sl < -1 {
				k++
			}
			s = append(s, sl)
		}
	}
	f.s = s
	N := len(s)
	if N < 2 {
		return 0, ErrDegenerate
	}
	slices.Sort(s)
	if N%2 == 1 {
		r := (N+1)/2 + k
		if r > N {
			return 0, ErrDegenerate
		}
		return s[r-1], nil
	}
	r := N/2 + k
	if r+1 > N {
		return 0, ErrDegenerate
	}
	return (s[r-1] + s[r]) / 2, nil
}

// selectedSlope is the shifted median of the slopes by slope selection.
func selectedSlope(x, y []float64) (float64, error) {
	if len(x) < 2 {
		return 0, ErrDegenerate
	}
	sel := newPBSet(context.Background(), x, y)
	k, e, err := sel.minusOne()
	if err != nil {
		return 0, err
	}
	N := sel.ntot - e
	if N < 2 {
		return 0, ErrDegenerate
	}
	at := func(r int64) (float64, error) { return sel.nth(r, k, e) }
	if N%2 == 1 {
		r := (N+1)/2 + k
		if r > N {
			return 0, ErrDegenerate
		}
		return at(r)
	}
	r := N/2 + k
	if r+1 > N {
		return 0, ErrDegenerate
	}
	lo, err := at(r)
	if err != nil {
		return 0, err
	}
	hi, err := at(r + 1)
	return (lo + hi) / 2, err
}
