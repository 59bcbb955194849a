package eiv

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"
)

// KendallTau returns Kendall's τ-b of x and y with its two-sided p-value,
// computed as scipy.stats.kendalltau does (method "auto"): the exact null
// distribution when there are no ties and n ≤ 33, else the normal
// approximation with the tie-corrected variance (Kendall 1970):
//
//	var(S) = [n(n−1)(2n+5) − Σt(t−1)(2t+5) − Σu(u−1)(2u+5)]/18
//	       + Σt(t−1)(t−2)·Σu(u−1)(u−2)/(9n(n−1)(n−2)) + Σt(t−1)·Σu(u−1)/(2n(n−1))
//
// where S is concordant minus discordant pairs and t, u the sizes of tie
// groups in x and y. O(n log n).
func KendallTau(x, y []float64) (TestResult, error) {
	n := len(x)
	if n != len(y) {
		return TestResult{}, ErrLengthMismatch
	}
	if n < 3 {
		return TestResult{}, ErrTooFewPoints
	}
	s, dis := kendallPairs(x, y)
	xt, x0, x1 := tieSums(x)
	yt, y0, y1 := tieSums(y)
	tot := float64(n) * float64(n-1) / 2
	if xt == tot || yt == tot {
		return TestResult{}, ErrDegenerate
	}
	res := TestResult{Statistic: tauB(s, tot-xt, tot-yt)}
	if xt == 0 && yt == 0 && (n <= 33 || min(dis, int64(tot)-dis) <= 1) {
		c := min(dis, int64(tot)-dis)
		res.PValue = math.Min(1, 2*kendallExactCDF(n, int(c)))
		res.Detail = "τ-b, exact null distribution, two-sided"
		return res, nil
	}
	m := float64(n) * float64(n-1)
	v := (m*(2*float64(n)+5)-x1-y1)/18 + 2*xt*yt/m + x0*y0/(9*m*float64(n-2))
	z := float64(s) / math.Sqrt(v)
	res.PValue = normalTwoSided(z)
	res.Detail = "τ-b, normal approximation with tie correction, two-sided"
	return res, nil
}

// tauB is S/√(ab) for a and b the untied pair counts in x and y. |τ| = 1
// exactly when every pair is concordant (or discordant), |S| = a = b; the
// quotient is then formed without a square root, so that perfectly
// concordant data give τ = 1, not 1 − ε. Otherwise one square root of the
// product (exact below 2⁵³) rounds once, and the result is kept in [−1, 1].
func tauB(s int64, a, b float64) float64 {
	if a == b {
		return float64(s) / a
	}
	return math.Max(-1, math.Min(1, float64(s)/math.Sqrt(a*b)))
}

// tieSums returns Σt(t−1)/2, Σt(t−1)(t−2) and Σt(t−1)(2t+5) over tie groups.
func tieSums(v []float64) (pairs, s0, s1 float64) {
	s := slices.Clone(v)
	slices.Sort(s)
	for i := 0; i < len(s); {
		j := i
		for j < len(s) && s[j] == s[i] {
			j++
		}
		if t := float64(j - i); t > 1 {
			pairs += t * (t - 1) / 2
			s0 += t * (t - 1) * (t - 2)
			s1 += t * (t - 1) * (2*t + 5)
		}
		i = j
	}
	return
}

// kendallExactCDF is P(D ≤ c) for the number D of discordant pairs (the
// inversions of a random permutation of n), by the recursion over the
// Mahonian numbers in probabilities.
func kendallExactCDF(n, c int) float64 {
	p := make([]float64, c+1)
	p[0] = 1
	next := make([]float64, c+1)
	for k := 2; k <= n; k++ {
		// Adding element k adds 0..k−1 inversions, uniformly.
		var run float64
		for j := 0; j <= c; j++ {
			run += p[j]
			if j-k >= 0 {
				run -= p[j-k]
			}
			next[j] = run / float64(k)
		}
		p, next = next, p
	}
	var s float64
	for _, v := range p {
		s += v
	}
	return s
}

// rankInto sets r to the average ranks (1-based) of key(v[i]), ties
// sharing the mean rank; idx is scratch of len(v) for their order.
func rankInto(r []float64, idx []int, v []float64, key func(float64) float64) {
	n := len(v)
	for i := range idx {
		idx[i] = i
	}
	slices.SortStableFunc(idx, func(a, b int) int { return cmpFloat(key(v[a]), key(v[b])) })
	for i := 0; i < n; {
		j := i
		for j < n && key(v[idx[j]]) == key(v[idx[i]]) {
			j++
		}
		avg := float64(i+j+1) / 2
		for k := i; k < j; k++ {
			r[idx[k]] = avg
		}
		i = j
	}
}

// Spearman returns Spearman's ρ (Pearson's r of the average ranks) and its
// two-sided p-value from t = ρ√((n−2)/(1−ρ²)) on n−2 df, as
// scipy.stats.spearmanr does.
func Spearman(x, y []float64) (TestResult, error) { return spearman(x, y, same) }

// SpearmanAbs is Spearman's ρ of x with |y| (a spread growing with x),
// ranked without a copy of |y|.
func SpearmanAbs(x, y []float64) (TestResult, error) { return spearman(x, y, math.Abs) }

func same(v float64) float64 { return v }

// spearman is Spearman's ρ of x with key(y).
func spearman(x, y []float64, key func(float64) float64) (TestResult, error) {
	n := len(x)
	if n != len(y) {
		return TestResult{}, ErrLengthMismatch
	}
	if n < 3 {
		return TestResult{}, ErrTooFewPoints
	}
	rx, ry, idx := make([]float64, n), make([]float64, n), make([]int, n)
	rankInto(rx, idx, x, same)
	rankInto(ry, idx, y, key)
	m := centredMoments(rx, ry)
	if m.sxx == 0 || m.syy == 0 {
		return TestResult{}, ErrDegenerate
	}
	// ρ = ±1 exactly when the rank vectors coincide (or mirror each other):
	// an affine relation between two vectors of mid-ranks forces the same
	// order and tie groups. Otherwise the quotient is kept in [−1, 1].
	rho := math.Max(-1, math.Min(1, m.sxy/math.Sqrt(m.sxx*m.syy)))
	switch {
	case slices.Equal(rx, ry):
		rho = 1
	case mirrored(rx, ry):
		rho = -1
	}
	res := TestResult{Statistic: rho, Detail: "two-sided, t approximation on n−2 df"}
	if math.Abs(rho) >= 1 {
		res.PValue = 0
		return res, nil
	}
	t := rho * math.Sqrt(float64(n-2)/((1-rho)*(1+rho)))
	res.PValue = tTwoSided(t, float64(n-2))
	return res, nil
}

// mirrored says whether the ranks rx and ry add up to n + 1 everywhere.
func mirrored(rx, ry []float64) bool {
	n1 := float64(len(rx) + 1)
	for i := range rx {
		if rx[i]+ry[i] != n1 {
			return false
		}
	}
	return true
}

// DurbinWatson returns d = Σ(e_t − e_{t−1})²/Σe_t² of residuals e in run
// order, with the p-value for positive serial correlation (small d) from
// the normal approximation with d's exact null mean and variance for the
// straight-line design X = [1, level] (Durbin & Watson 1950, 1951):
//
//	E d = tr(MA)/(n−2),  var d = 2[(n−2)·tr((MA)²) − tr(MA)²]/((n−2)²·n)
//
// with M = I − X(XᵀX)⁻¹Xᵀ and A the first-difference matrix (computed in
// O(n) from the rank-2 structure of I − M, without allocating).
func DurbinWatson(e, level []float64) (TestResult, error) {
	return DurbinWatsonInOrder(e, level, nil)
}

// DurbinWatsonInOrder is DurbinWatson of e and level taken in the order
// ord (e[ord[0]], e[ord[1]], …; nil: as given), so that residuals kept in
// input order are tested in run order without a permuted copy.
func DurbinWatsonInOrder(e, level []float64, ord []int) (TestResult, error) {
	n := len(e)
	if n != len(level) || ord != nil && len(ord) != n {
		return TestResult{}, ErrLengthMismatch
	}
	if n < 4 {
		return TestResult{}, ErrTooFewPoints
	}
	at := func(k int) int {
		if ord == nil {
			return k
		}
		return ord[k]
	}
	var num, den float64
	for k := range n {
		v := e[at(k)]
		den += v * v
		if k > 0 {
			d := v - e[at(k-1)]
			num += d * d
		}
	}
	if den == 0 {
		return TestResult{}, ErrDegenerate
	}
	d := num / den
	// Moments under H0 for design X = [1, level] (of the levels, which
	// their order does not change).
	m := centredMoments(level, level)
	if m.sxx == 0 {
		return TestResult{Statistic: d, PValue: math.NaN()}, ErrConstantX
	}
	// Orthonormal basis of span(X) in run order: q1 = 1/√n,
	// q2 = (level − mean)/√Sxx; A q_k at t from q_k at t−1, t and t+1.
	c1, rs := 1/math.Sqrt(float64(n)), math.Sqrt(m.sxx)
	q2 := func(k int) float64 { return (level[at(k)] - m.mx) / rs }
	var qaq [2][2]float64 // QᵀAQ
	var aa [2]float64     // ‖A q_k‖²
	prev, cur := 0.0, q2(0)
	for k := range n {
		q := [2]float64{c1, cur}
		var aq [2]float64
		if k > 0 {
			aq[0] += q[0] - c1
			aq[1] += q[1] - prev
		}
		next := 0.0
		if k < n-1 {
			next = q2(k + 1)
			aq[0] += q[0] - c1
			aq[1] += q[1] - next
		}
		for i := range 2 {
			for j := range 2 {
				qaq[i][j] += q[i] * aq[j]
			}
			aa[i] += aq[i] * aq[i]
		}
		prev, cur = cur, next
	}
	qa2q := aa[0] + aa[1] // tr(QᵀA²Q) = Σ_k ‖A q_k‖²
	// tr(A) = 2(n−1); tr(A²) = Σ (A²)_ii = 4(n−2) + 2 + 2(n−1)·1 ... computed directly:
	trA := 2*float64(n) - 2
	trA2 := 6*float64(n) - 8 // diag(A) = (1, 2, …, 2, 1), off-diagonals −1
	trMA := trA - (qaq[0][0] + qaq[1][1])
	// tr((MA)²) = tr(A²) − 2 tr(QᵀA²Q) + tr((QᵀAQ)²)
	var tq2 float64
	for k := range 2 {
		for l := range 2 {
			tq2 += qaq[k][l] * qaq[l][k]
		}
	}
	trMA2 := trA2 - 2*qa2q + tq2
	nu := float64(n - 2)
	mean := trMA / nu
	variance := 2 * (nu*trMA2 - trMA*trMA) / (nu * nu * (nu + 2))
	p := normalCDF((d - mean) / math.Sqrt(variance))
	return TestResult{Statistic: d, PValue: p, Detail: fmt.Sprintf(
		"one-sided for positive serial correlation; normal approximation, E d = %.4g, SD %.3g", mean, math.Sqrt(variance))}, nil
}

// RunsTest is the Wald–Wolfowitz runs test on the signs of e in run order
// (e ≥ 0 counts as positive), two-sided, by the normal approximation
// without continuity correction:
//
//	μ = 2n₊n₋/n + 1,  σ² = 2n₊n₋(2n₊n₋ − n)/(n²(n − 1)),  z = (R − μ)/σ
//
// Too few runs (z < 0) suggest drift or serial correlation.
func RunsTest(e []float64) (TestResult, error) { return RunsTestInOrder(e, nil) }

// RunsTestInOrder is RunsTest of e taken in the order ord (nil: as given).
func RunsTestInOrder(e []float64, ord []int) (TestResult, error) {
	n := len(e)
	if ord != nil && len(ord) != n {
		return TestResult{}, ErrLengthMismatch
	}
	if n < 3 {
		return TestResult{}, ErrTooFewPoints
	}
	var pos, runs int
	last := false
	for k := range n {
		v := e[k]
		if ord != nil {
			v = e[ord[k]]
		}
		if v >= 0 {
			pos++
		}
		if k == 0 || (v >= 0) != last {
			runs++
		}
		last = v >= 0
	}
	neg := n - pos
	if pos == 0 || neg == 0 {
		return TestResult{}, ErrDegenerate
	}
	np, nn, N := float64(pos), float64(neg), float64(n)
	mu := 2*np*nn/N + 1
	v := 2 * np * nn * (2*np*nn - N) / (N * N * (N - 1))
	if !(v > 0) {
		return TestResult{}, ErrDegenerate
	}
	z := (float64(runs) - mu) / math.Sqrt(v)
	return TestResult{Statistic: z, PValue: normalTwoSided(z),
		Detail: fmt.Sprintf("%d runs, %.1f expected; z, two-sided", runs, mu)}, nil
}

// BreuschPagan is Koenker's studentized Breusch–Pagan test: LM = n·R² of
// the regression of e² on [1, level], referred to χ² with 1 df (as
// statsmodels' het_breuschpagan with robust=True).
func BreuschPagan(e, level []float64) (TestResult, error) {
	n := len(e)
	if n != len(level) {
		return TestResult{}, ErrLengthMismatch
	}
	if n < 4 {
		return TestResult{}, ErrTooFewPoints
	}
	m := squareMoments(level, e)
	if m.sxx == 0 || m.syy == 0 {
		return TestResult{}, ErrDegenerate
	}
	r2 := m.sxy * m.sxy / (m.sxx * m.syy)
	lm := float64(n) * r2
	return TestResult{Statistic: lm, PValue: chiSquaredSF(lm, 1),
		Detail: "Koenker's studentized LM = n·R² of e² on level, χ²(1)"}, nil
}

// squareMoments is centredMoments(x, e²) with each square formed as it is
// read, without a copy of e².
func squareMoments(x, e []float64) moments {
	n := float64(len(x))
	var sx, sy float64
	for i, v := range e {
		sx += x[i]
		sy += v * v
	}
	m := moments{n: n, mx: sx / n, my: sy / n}
	var cx, cy, xx, yy, xy float64
	for i, v := range e {
		dx, dy := x[i]-m.mx, v*v-m.my
		cx, cy = cx+dx, cy+dy
		xx, yy, xy = xx+dx*dx, yy+dy*dy, xy+dx*dy
	}
	m.mx, m.lx = twoSum(m.mx, cx/n)
	m.my, m.ly = twoSum(m.my, cy/n)
	m.sxx, m.syy, m.sxy = xx-cx*cx/n, yy-cy*cy/n, xy-cx*cy/n
	return m
}

// ESDResult is the outcome of the generalized ESD many-outlier procedure.
type ESDResult struct {
	// R and Lambda are the test statistics R_i and critical values λ_i,
	// i = 1..r; Removed[i] is the index of the value removed at step i.
	R, Lambda []float64
	Removed   []int
	// Outliers holds the indices of the values declared outliers: the
	// first k removed, k the largest i with R_i > λ_i.
	Outliers []int
}

// GeneralizedESD runs Rosner's (1983, Technometrics 25:165) generalized
// extreme studentized deviate procedure for up to r outliers at level alpha:
//
//	R_i = max |x − x̄|/s over the values left after i−1 removals
//	λ_i = (n−i)·t_{p, n−i−1} / √((n−i−1 + t²_{p, n−i−1})(n−i+1)),  p = 1 − α/(2(n−i+1))
func GeneralizedESD(x []float64, r int, alpha float64) (*ESDResult, error) {
	n := len(x)
	if r < 1 || n-r < 3 {
		return nil, &OptionError{Option: "r", Reason: "need 1 ≤ r ≤ n − 3"}
	}
	if !(alpha > 0 && alpha < 1) {
		return nil, &OptionError{Option: "alpha", Reason: "must lie in (0, 1)"}
	}
	left := make([]bool, n)
	res := &ESDResult{}
	for i := 1; i <= r; i++ {
		var sum float64
		cnt := 0
		for j, v := range x {
			if !left[j] {
				sum += v
				cnt++
			}
		}
		mean := sum / float64(cnt)
		var ss float64
		for j, v := range x {
			if !left[j] {
				ss += (v - mean) * (v - mean)
			}
		}
		sd := math.Sqrt(ss / float64(cnt-1))
		best, bi := -1.0, -1
		for j, v := range x {
			if !left[j] && math.Abs(v-mean) > best {
				best, bi = math.Abs(v-mean), j
			}
		}
		ri := 0.0
		if sd > 0 {
			ri = best / sd
		}
		left[bi] = true
		nf := float64(n - i)
		p := 1 - alpha/(2*(nf+1))
		t := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: nf - 1}.Quantile(p)
		lam := nf * t / math.Sqrt((nf-1+t*t)*(nf+1))
		res.R = append(res.R, ri)
		res.Lambda = append(res.Lambda, lam)
		res.Removed = append(res.Removed, bi)
	}
	k := 0
	for i := range res.R {
		if res.R[i] > res.Lambda[i] {
			k = i + 1
		}
	}
	res.Outliers = slices.Clone(res.Removed[:k])
	return res, nil
}

// KolmogorovSurvival is P(K > t) for the Kolmogorov distribution,
// 2·Σ_{k≥1} (−1)^{k−1} exp(−2k²t²).
func KolmogorovSurvival(t float64) float64 {
	if t <= 0 {
		return 1
	}
	if t < 0.3 {
		// The alternating series converges slowly here; use the dual form
		// 1 − (√(2π)/t)·Σ exp(−(2k−1)²π²/(8t²)).
		var s float64
		for k := 1; k <= 50; k++ {
			f := float64(2*k - 1)
			s += math.Exp(-f * f * math.Pi * math.Pi / (8 * t * t))
		}
		return 1 - math.Sqrt(2*math.Pi)/t*s
	}
	var s float64
	for k := 1; k <= 100; k++ {
		term := math.Exp(-2 * float64(k*k) * t * t)
		if k%2 == 1 {
			s += term
		} else {
			s -= term
		}
		if term < 1e-17 {
			break
		}
	}
	return math.Max(0, math.Min(1, 2*s))
}
