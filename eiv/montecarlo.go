package eiv

import (
	"context"
	"fmt"
	"math"
	"math/bits"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
)

// MonteCarloOptions are the settings of Calibration.MonteCarlo. A nil
// pointer means the defaults.
type MonteCarloOptions struct {
	// Trials is the number of Monte Carlo trials M. Zero means 10⁶ (JCGM
	// 101:2008 §7.2.1: often adequate for a 95 % coverage interval correct to
	// one or two significant digits). At most 10⁸.
	Trials int
	// Seed fixes the random streams: block j of MonteCarloBlock trials draws
	// only from PCG(Seed, j), so the result is the same bit for bit for any
	// number of workers.
	Seed uint64
	// CoverageProbability p of the coverage interval. Zero means 0.95.
	CoverageProbability float64
	// Digits is the number of significant digits of u(x₀) that the
	// validation holds the linear result to (JCGM 101 §8.2, n_dig). Zero
	// means 2.
	Digits int
	// Workers is the number of goroutines. Zero means GOMAXPROCS.
	Workers int
}

// MonteCarloBlock is the number of trials drawn from one random stream.
const MonteCarloBlock = 1 << 14

// MonteCarloResult is the distribution of x₀ by Monte Carlo (JCGM 101:2008).
type MonteCarloResult struct {
	Trials int
	Seed   uint64
	// Mean and SD of the M values of x₀ (the estimate and its standard
	// uncertainty, JCGM 101 §7.6).
	Mean, SD float64
	// CoverageProbability p and the shortest coverage interval [Lower,
	// Upper] holding a fraction p of the values (JCGM 101 §7.7.2).
	CoverageProbability float64
	Lower, Upper        float64
	// LinearLower and LinearUpper are the law-of-propagation interval at the
	// same p, x₀ ∓ k_p·u(x₀) with k_p from ν_eff (JCGM 101 §8.1).
	LinearLower, LinearUpper float64
	// Tolerance is δ = ½·10^l with u(x₀) written as c·10^l, c an integer of
	// Digits digits; DLow = |LinearLower − Lower|, DHigh = |LinearUpper −
	// Upper|. Validated says both are at most δ (JCGM 101 §8.2): the linear
	// result is then valid at that numerical tolerance.
	Tolerance   float64
	DLow, DHigh float64
	Validated   bool
	// Warnings: WarnMonteCarloDiff when not validated.
	Warnings []error
}

// MonteCarlo propagates the distributions of the line and of the unknown's
// mean reading to x₀ = XRef + (ȳ₀ − YRef)/b (JCGM 101:2008 §5–7):
//
//   - (YRef, b), the line in its centred form, bivariate normal with the
//     line's covariance (uncorrelated in that form);
//   - ȳ₀ normal with u(ȳ₀) when its u is stated (ν infinite), else the
//     scaled and shifted t distribution t_ν(ȳ₀, u²(ȳ₀)) with the
//     reading's ν (JCGM 101 §6.4.9.7, for the mean of few readings),
//     drawn by tDraw.
//
// inv is the unknown's linear result from Inverse, against which the Monte
// Carlo interval is compared. Cancelling ctx stops the workers and returns
// ctx's error.
func (c *Calibration) MonteCarlo(ctx context.Context, inv *InverseResult, opt *MonteCarloOptions) (*MonteCarloResult, error) {
	if opt == nil {
		opt = &MonteCarloOptions{}
	}
	M := opt.Trials
	if M == 0 {
		M = 1_000_000
	}
	if M < 100 || M > 100_000_000 {
		return nil, &OptionError{Option: "trials", Reason: "must lie between 100 and 10⁸"}
	}
	p := opt.CoverageProbability
	if p == 0 {
		p = 0.95
	}
	if !(p > 0 && p < 1) {
		return nil, &OptionError{Option: "coverage_probability", Reason: "must lie strictly between 0 and 1"}
	}
	digits := opt.Digits
	if digits == 0 {
		digits = 2
	}
	if digits < 1 || digits > 6 {
		return nil, &OptionError{Option: "digits", Reason: "must lie between 1 and 6"}
	}
	if inv == nil {
		return nil, &OptionError{Option: "unknown", Reason: "the linear result of the unknown is needed"}
	}
	vals := make([]float64, M)
	draw := mcDraw{xr: c.XRef, yr: c.YRef.Value, uyr: c.YRef.U, b: c.Slope.Value, ub: c.Slope.U,
		y0: inv.Y.Value, uy0: inv.Y.U, nu: inv.YDOF}
	workers := opt.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	blocks := (M + MonteCarloBlock - 1) / MonteCarloBlock
	workers = min(workers, blocks)
	// Each block's sum, added in block order below, so that the mean does
	// not depend on which worker drew which block.
	sums := make([]float64, blocks)
	parallelBlocks(ctx, workers, blocks, func(j int) {
		var pcg rand.PCG
		pcg.Seed(opt.Seed, uint64(j))
		blk := vals[j*MonteCarloBlock : min((j+1)*MonteCarloBlock, M)]
		draw.fill(&pcg, blk)
		var s float64
		for _, v := range blk {
			s += v
		}
		sums[j] = s
	})
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	var sum float64
	for _, s := range sums {
		sum += s
	}
	mean := sum / float64(M)
	parallelBlocks(ctx, workers, blocks, func(j int) {
		var ss float64
		for _, v := range vals[j*MonteCarloBlock : min((j+1)*MonteCarloBlock, M)] {
			ss += (v - mean) * (v - mean)
		}
		sums[j] = ss
	})
	var ss float64
	for _, s := range sums {
		ss += s
	}
	if !allFinite(mean, ss) {
		return nil, fmt.Errorf("%w: a Monte Carlo trial drew a slope of zero", ErrDegenerate)
	}
	lo, hi := shortestInterval(vals, p)
	res := &MonteCarloResult{Trials: M, Seed: opt.Seed, Mean: mean, SD: math.Sqrt(ss / float64(M-1)),
		CoverageProbability: p, Lower: lo, Upper: hi}
	up := coverageK(p, inv.DOF) * inv.X.U
	res.LinearLower, res.LinearUpper = inv.X.Value-up, inv.X.Value+up
	res.Tolerance = NumericalTolerance(inv.X.U, digits)
	res.DLow, res.DHigh = math.Abs(res.LinearLower-lo), math.Abs(res.LinearUpper-hi)
	res.Validated = res.DLow <= res.Tolerance && res.DHigh <= res.Tolerance
	if !res.Validated {
		res.Warnings = append(res.Warnings, &Warning{Code: WarnMonteCarloDiff, Message: fmt.Sprintf(
			"the Monte Carlo %g %% interval [%.6g, %.6g] differs from the linear one [%.6g, %.6g] by more than δ = %.2g (JCGM 101 §8): the linear result is not validated; prefer the Monte Carlo one",
			100*p, lo, hi, res.LinearLower, res.LinearUpper, res.Tolerance)})
	}
	return res, nil
}

// parallelBlocks runs do(j) for j = 0..blocks−1 on workers goroutines,
// stopping early when ctx is cancelled.
func parallelBlocks(ctx context.Context, workers, blocks int, do func(j int)) {
	var next atomic.Int64
	var wg sync.WaitGroup
	for range workers {
		wg.Go(func() {
			for ctx.Err() == nil {
				j := int(next.Add(1)) - 1
				if j >= blocks {
					return
				}
				do(j)
			}
		})
	}
	wg.Wait()
}

// NumericalTolerance is JCGM 101:2008 §7.9.2's δ for a standard
// uncertainty u stated to n significant digits: with u = c·10^l, c an
// n-digit integer, δ = ½·10^l.
func NumericalTolerance(u float64, n int) float64 {
	if !(u > 0) {
		return 0
	}
	l := math.Floor(math.Log10(u)) - float64(n-1)
	// Rounding u to n digits can carry into one more digit (9.96 → 10).
	if math.Round(u/math.Pow(10, l)) >= math.Pow(10, float64(n)) {
		l++
	}
	return 0.5 * math.Pow(10, l)
}

// mcDraw holds what one Monte Carlo trial draws from.
type mcDraw struct {
	xr, yr, uyr, b, ub float64
	y0, uy0, nu        float64
}

// fill writes one x₀ per element of out.
func (d *mcDraw) fill(src *rand.PCG, out []float64) {
	rng := rand.New(src)
	if math.IsInf(d.nu, 1) {
		// ȳ₀ − YRef is the difference of two independent normals, itself
		// normal with the sum of their variances: one draw instead of two.
		dy, udy := d.y0-d.yr, math.Hypot(d.uy0, d.uyr)
		for i := range out {
			b := d.b + d.ub*rng.NormFloat64()
			out[i] = d.xr + (dy+udy*rng.NormFloat64())/b
		}
		return
	}
	t := newTDraw(d.nu)
	for i := range out {
		c := d.yr + d.uyr*rng.NormFloat64()
		b := d.b + d.ub*rng.NormFloat64()
		y := d.y0 + d.uy0*t.draw(rng, src)
		out[i] = d.xr + (y-c)/b
	}
}

// tMethod is how tDraw draws Student's t for its ν.
type tMethod uint8

const (
	tInverse2 tMethod = iota // ν = 2: inversion of the closed-form CDF (studentT2)
	tBailey                  // Bailey's polar method
	tGamma                   // Z/√(χ²_ν/ν), χ²_ν = 2·Gamma(ν/2) by Marsaglia–Tsang
)

// tDraw draws from Student's t with ν degrees of freedom, by the fastest of
// three exact methods for that ν (BenchmarkTDrawMethods):
//
//   - ν = 2: inversion of its distribution function (studentT2), one
//     uniform;
//   - ν = 1 and 4: Bailey's polar method (Bailey, R. W. (1994). Polar
//     generation of random variates with the t-distribution. Math. Comp.
//     62:779–781): (U, V) uniform in the unit disc, W = U² + V²,
//     T = U·√(ν·(W^(−2/ν) − 1)/W), where W^(−2/ν) − 1 has no logarithm:
//     (1 − W²)/W² for ν = 1, 1/√W − 1 for ν = 4;
//   - other ν > 2: T = Z/√(χ²_ν/ν), Z standard normal and χ²_ν independent
//     (the definition of t), χ²_ν = 2·G with G ~ Gamma(ν/2, 1) by Marsaglia
//     and Tsang's method (Marsaglia, G., Tsang, W. W. (2000). A simple
//     method for generating gamma variables. ACM TOMS 26:363–372; shape
//     ν/2 ≥ 1 as it requires): two normals and one uniform, a logarithm
//     only when the squeeze fails;
//   - any other ν (non-integer, below 2): Bailey with W^(−2/ν) − 1 by
//     logarithms.
//
// The normals are math/rand/v2's ziggurat (rand.Rand.NormFloat64) on the
// same PCG stream; the uniforms are drawn from src directly as
// rand.Rand.Float64 forms them (the low 53 bits over 2⁵³), without the
// interface call.
type tDraw struct {
	nu     float64
	method tMethod
	d, c   float64 // Marsaglia–Tsang: d = ν/2 − 1/3, c = 1/√(9d)
}

func newTDraw(nu float64) tDraw {
	t := tDraw{nu: nu, method: tBailey}
	switch {
	case nu == 2:
		t.method = tInverse2
	case nu == 1 || nu == 4:
	case nu > 2:
		t.method = tGamma
		t.d = nu/2 - 1.0/3
		t.c = 1 / math.Sqrt(9*t.d)
	}
	return t
}

// draw returns one t variate; rng must draw from src.
func (t *tDraw) draw(rng *rand.Rand, src *rand.PCG) float64 {
	switch t.method {
	case tInverse2:
		return studentT2(src.Uint64())
	case tGamma:
		z := rng.NormFloat64()
		return z * math.Sqrt(t.nu/(2*t.gamma(rng, src)))
	}
	for {
		u := 2*(float64(src.Uint64()<<11>>11)/(1<<53)) - 1
		v := 2*(float64(src.Uint64()<<11>>11)/(1<<53)) - 1
		w := u*u + v*v
		if !(w > 0 && w < 1) {
			continue
		}
		var g float64 // W^(−2/ν) − 1
		switch t.nu {
		case 1:
			g = (1 - w) * (1 + w) / (w * w)
		case 4:
			g = 1/math.Sqrt(w) - 1
		default:
			g = math.Expm1(-2 / t.nu * math.Log(w))
		}
		return u * math.Sqrt(t.nu*g/w)
	}
}

// gamma draws G ~ Gamma(ν/2, 1) by Marsaglia and Tsang (2000): X standard
// normal, V = (1 + c·X)³, accepted when V > 0 and U < 1 − 0.0331·X⁴ (the
// squeeze) or ln U < X²/2 + d·(1 − V + ln V); then G = d·V.
func (t *tDraw) gamma(rng *rand.Rand, src *rand.PCG) float64 {
	for {
		x := rng.NormFloat64()
		v := 1 + t.c*x
		if v <= 0 {
			continue
		}
		v = v * v * v
		u := float64(src.Uint64()<<11>>11) / (1 << 53)
		x2 := x * x
		if u < 1-0.0331*x2*x2 || math.Log(u) < 0.5*x2+t.d*(1-v+math.Log(v)) {
			return t.d * v
		}
	}
}

// studentT draws one t variate with nu degrees of freedom from src (for the
// tests; the Monte Carlo loop keeps its tDraw).
func studentT(src *rand.PCG, nu float64) float64 {
	t := newTDraw(nu)
	return t.draw(rand.New(src), src)
}

// studentT2 turns 64 random bits into a draw from Student's t with two
// degrees of freedom by inverting its distribution function, which has a
// closed form for ν = 2: F(t) = ½ + t/(2·√(2 + t²)), so with F = ½ + u,
// t = u·√(2/(¼ − u²)) (solve (2u)²·(2 + t²) = t²; the t₂ CDF from memory,
// the draws checked against scipy's t quantiles in TestStudentTQuantiles).
// One uniform, no rejection, no logarithm: for the mean of three
// readings, the common case, this replaces Bailey's ~2.5 uniforms.
//
// The uniform is U = (2k + 1)/2⁵³ from the top 52 bits k, so u = U − ½ is
// an exact odd multiple of 2⁻⁵³, never 0 or ±½; ½ − u and ½ + u are exact
// and ¼ − u² is formed as their product (one rounding, none of the
// cancellation of ¼ − u² near the tails).
func studentT2(r uint64) float64 {
	u := float64(int64(r>>12)*2+1-(1<<52)) / (1 << 53)
	return u * math.Sqrt(2/((0.5-u)*(0.5+u)))
}

// shortestInterval returns the shortest interval holding q = ⌊pM + ½⌋ of
// the M values (JCGM 101 §7.7.2): [y₍ᵣ₎, y₍ᵣ₊q₋₁₎] over r, the first such r
// when several are equally short. Only the L = M − q + 1 smallest and
// largest values need to be in order. They are found by splitting at two
// thresholds taken from a sample of the values, with a margin, and checked
// to hold at least L values each (then they hold the L smallest and
// largest exactly); the two tails are sorted concurrently. When the check
// fails (heavy ties) they are separated by selection instead. vals is
// reordered.
func shortestInterval(vals []float64, p float64) (lo, hi float64) {
	M := len(vals)
	q := int(p*float64(M) + 0.5)
	q = max(1, min(q, M))
	L := M - q + 1          // candidate lower ends: ranks 0..L−1; upper ends: ranks q−1..M−1
	var low, high []float64 // low[r] = y₍ᵣ₎, high[len(high)−L+r] = y₍ᵣ₊q₋₁₎
	switch {
	case 2*L >= M:
		slices.Sort(vals)
		low, high = vals, vals
	default:
		var ok bool
		if low, high, ok = splitTails(vals, L); !ok {
			selectK(vals, L)
			selectK(vals[L:], q-1-L)
			low, high = vals[:L], vals[q-1:]
		}
		var wg sync.WaitGroup
		wg.Go(func() { radixSort(low) })
		radixSort(high)
		wg.Wait()
	}
	off := len(high) - L
	best := math.Inf(1)
	for r := range L {
		if w := high[off+r] - low[r]; w < best {
			best, lo, hi = w, low[r], high[off+r]
		}
	}
	return lo, hi
}

// splitTails copies the values at or below a low threshold and at or above a
// high one, thresholds read from a strided sample of 4096 values with a
// margin of about eight sampling standard deviations beyond rank L. ok says
// that each tail holds at least L values, hence the L smallest (largest)
// values of all, and that the tails are disjoint.
func splitTails(vals []float64, L int) (low, high []float64, ok bool) {
	M := len(vals)
	const ns = 4096
	if M < 8*ns {
		return nil, nil, false
	}
	sample := make([]float64, ns)
	stride := M / ns
	for i := range sample {
		sample[i] = vals[i*stride]
	}
	slices.Sort(sample)
	e := float64(L) / float64(M) * ns // expected sample rank of the L-th value
	k := int(e + 8*math.Sqrt(e) + 8)
	if 2*k >= ns {
		return nil, nil, false
	}
	tLow, tHigh := sample[k], sample[ns-1-k]
	if !(tLow < tHigh) {
		return nil, nil, false
	}
	c := int(float64(M)*float64(k+1)/ns*1.25) + 64
	low, high = make([]float64, 0, c), make([]float64, 0, c)
	for _, v := range vals {
		if v <= tLow {
			low = append(low, v)
		} else if v >= tHigh {
			high = append(high, v)
		}
	}
	return low, high, len(low) >= L && len(high) >= L
}

// radixSort sorts finite values in ascending order by a least-significant-
// digit radix sort of their IEEE 754 bits, mapped to unsigned keys whose
// order is the values' order (negative values: all bits flipped; others:
// the sign bit set), eight passes of eight bits, a pass skipped when every
// key has the same digit. O(n), against O(n log n) comparisons.
func radixSort(a []float64) {
	n := len(a)
	if n < 256 {
		slices.Sort(a)
		return
	}
	keys, tmp := make([]uint64, n), make([]uint64, n)
	for i, v := range a {
		k := math.Float64bits(v)
		if k>>63 == 1 {
			k = ^k
		} else {
			k |= 1 << 63
		}
		keys[i] = k
	}
	var count [8][256]int
	for _, k := range keys {
		for d := range 8 {
			count[d][byte(k>>(8*d))]++
		}
	}
	for d := range 8 {
		c := &count[d]
		if c[byte(keys[0]>>(8*d))] == n {
			continue
		}
		sum := 0
		for i, v := range c {
			c[i] = sum
			sum += v
		}
		for _, k := range keys {
			b := byte(k >> (8 * d))
			tmp[c[b]] = k
			c[b]++
		}
		keys, tmp = tmp, keys
	}
	for i, k := range keys {
		if k>>63 == 1 {
			k &^= 1 << 63
		} else {
			k = ^k
		}
		a[i] = math.Float64frombits(k)
	}
}

// selectK reorders a so that a[:k] ≤ a[k] ≤ a[k+1:] (Hoare's selection with
// a median-of-three pivot; sorting when the ranges stop shrinking).
func selectK(a []float64, k int) {
	lo, hi := 0, len(a)-1
	budget := 4 * bits.Len(uint(len(a)))
	for hi > lo {
		if budget--; budget < 0 {
			slices.Sort(a[lo : hi+1])
			return
		}
		mid := lo + (hi-lo)/2
		if a[mid] < a[lo] {
			a[mid], a[lo] = a[lo], a[mid]
		}
		if a[hi] < a[lo] {
			a[hi], a[lo] = a[lo], a[hi]
		}
		if a[hi] < a[mid] {
			a[hi], a[mid] = a[mid], a[hi]
		}
		pivot := a[mid]
		i, j := lo, hi
		for i <= j {
			for a[i] < pivot {
				i++
			}
			for a[j] > pivot {
				j--
			}
			if i <= j {
				a[i], a[j] = a[j], a[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return
		}
	}
}
