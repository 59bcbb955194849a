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

	"gonum.org/v1/gonum/stat/distuv"
)

// Scheme is a bootstrap resampling scheme.
type Scheme string

const (
	// SchemePairs resamples the points with replacement (Efron & Tibshirani
	// 1993, §9.5), keeping each point's x, y, σ and r together.
	SchemePairs Scheme = "pairs"
	// SchemeParametric draws new x and y around the first estimator's
	// fitted true points with the stated σx, σy and r.
	SchemeParametric Scheme = "parametric"
)

// BootstrapOptions are the settings of Bootstrap. A nil pointer means defaults.
type BootstrapOptions struct {
	// Resamples is B, the number of bootstrap samples. Zero means 2000.
	Resamples int
	// Seed fixes the random streams: resample i draws only from a PCG
	// generator seeded with (Seed, i), so the output is the same bit for bit
	// for any number of workers.
	Seed uint64
	// Scheme is SchemePairs (the default) or SchemeParametric.
	Scheme Scheme
	// Workers is the number of goroutines. Zero means GOMAXPROCS.
	Workers int
	// Confidence of the intervals. Zero means 0.95.
	Confidence float64
	// JackknifeMaxN bounds the n for which the BCa acceleration is computed
	// by refitting each leave-one-out sample; above it the acceleration is
	// set to zero (bias-corrected percentile) and a warning says so.
	// Zero means 5000.
	JackknifeMaxN int
}

var contextBackground = context.Background()

// Line is a fitted straight line y = Intercept + Slope·x.
type Line struct{ Intercept, Slope float64 }

// BootstrapResult holds the replicate lines of every estimator, fitted on
// the same resamples (so differences between estimators are paired).
type BootstrapResult struct {
	Resamples  int
	Failed     int // resamples on which any estimator failed
	Seed       uint64
	Scheme     Scheme
	Confidence float64
	Methods    []Method
	// Full holds each estimator's line on the original sample.
	Full []Line
	// Warnings are non-fatal diagnostics, each a *Warning.
	Warnings []error

	k     int
	lines []Line // resample i, estimator j at lines[i*k+j]; failed resamples hold NaN
	loo   []Line // leave-one-out lines, point i, estimator j at loo[i*k+j]; nil when skipped
}

// Failure thresholds of the bootstrap: above WarnFailedShare of failed
// resamples a warning is added; above MaxFailedShare no interval is given.
const (
	WarnFailedShare = 0.01
	MaxFailedShare  = 0.10
)

// ErrTooManyFailures is returned by Summarize when more than MaxFailedShare
// of the resamples failed.
var ErrTooManyFailures = fmt.Errorf("eiv: more than %.0f%% of the bootstrap resamples failed", 100*MaxFailedShare)

// Bootstrap refits every estimator on the same B resamples of s. The first
// estimator is the primary one: the parametric scheme draws around its
// fitted true points. Cancellation of ctx stops the workers and returns
// ctx's error. The hot loop allocates nothing per resample.
func Bootstrap(ctx context.Context, s Sample, ests []Estimator, opt *BootstrapOptions) (*BootstrapResult, error) {
	if opt == nil {
		opt = &BootstrapOptions{}
	}
	conf, err := checkConfidence(opt.Confidence)
	if err != nil {
		return nil, err
	}
	B := opt.Resamples
	if B == 0 {
		B = 2000
	}
	if B < 0 {
		return nil, &OptionError{Option: "resamples", Reason: "must be positive"}
	}
	scheme := opt.Scheme
	if scheme == "" {
		scheme = SchemePairs
	}
	n := s.Len()
	if err := checkXY(s.X, s.Y); err != nil {
		return nil, err
	}
	if scheme == SchemeParametric && (s.SX == nil || s.SY == nil) {
		return nil, &OptionError{Option: "scheme", Reason: "the parametric bootstrap needs sx and sy"}
	}
	if scheme != SchemePairs && scheme != SchemeParametric {
		return nil, &OptionError{Option: "scheme", Reason: "must be pairs or parametric"}
	}
	if len(ests) == 0 {
		return nil, &OptionError{Option: "estimators", Reason: "at least one is needed"}
	}
	k := len(ests)
	res := &BootstrapResult{Resamples: B, Seed: opt.Seed, Scheme: scheme, Confidence: conf, k: k,
		lines: make([]Line, B*k)}
	for _, e := range ests {
		res.Methods = append(res.Methods, e.Method())
		a, b, err := e.NewFitter(n).FitLine(s)
		if err != nil {
			return nil, fmt.Errorf("eiv: %s on the original sample: %w", e.Method(), err)
		}
		res.Full = append(res.Full, Line{a, b})
	}
	var xh, yh []float64
	if scheme == SchemeParametric {
		xh, yh = make([]float64, n), make([]float64, n)
		ests[0].TruePoints(s, res.Full[0].Intercept, res.Full[0].Slope, xh, yh)
	}

	workers := opt.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = min(workers, B)
	const chunk = 32
	var next atomic.Int64
	var failed atomic.Int64
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			w := newBootWorker(s, ests, n)
			for ctx.Err() == nil {
				start := int(next.Add(chunk)) - chunk
				if start >= B {
					return
				}
				for i := start; i < min(start+chunk, B); i++ {
					w.pcg.Seed(opt.Seed, uint64(i))
					out := res.lines[i*k : (i+1)*k]
					done, ok := false, true
					if scheme == SchemePairs && w.lambdas != nil {
						done, ok = w.fitMoments(opt.Seed, uint64(i), out)
					}
					if !done {
						ok = true
						if scheme == SchemePairs {
							w.drawPairs(s)
						} else {
							w.drawParametric(s, xh, yh)
						}
						for j, f := range w.fitters {
							a, b, err := f.FitLine(w.s)
							if err != nil || !allFinite(a, b) {
								ok = false
								break
							}
							out[j] = Line{a, b}
						}
					}
					if !ok {
						failed.Add(1)
						for j := range out {
							out[j] = Line{math.NaN(), math.NaN()}
						}
					}
				}
			}
		}()
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	res.Failed = int(failed.Load())
	share := float64(res.Failed) / float64(B)
	if share > WarnFailedShare {
		res.Warnings = append(res.Warnings, &Warning{Code: WarnBootstrapFailures, Message: fmt.Sprintf(
			"%d of %d bootstrap resamples (%.1f%%) could not be fitted (degenerate or not converged)%s",
			res.Failed, B, 100*share, map[bool]string{true: "; no bootstrap interval is given above 10%", false: ""}[share > MaxFailedShare])})
	}

	maxN := opt.JackknifeMaxN
	if maxN <= 0 {
		maxN = 5000
	}
	if n <= maxN {
		if err := res.jackknife(ctx, s, ests); err != nil {
			return nil, err
		}
	} else {
		res.Warnings = append(res.Warnings, &Warning{Code: WarnJackknifeSkipped, Message: fmt.Sprintf(
			"n = %d exceeds %d, so the BCa acceleration was set to zero (a bias-corrected percentile interval)", n, maxN)})
	}
	return res, nil
}

type bootWorker struct {
	pcg     rand.PCG
	rng     *rand.Rand
	s       Sample
	fitters []LineFitter
	// lambdas holds λ of every fitter (+Inf for OLS) when all of them fit
	// from the moments of (x, y) alone (Deming, OLS); nil otherwise.
	lambdas []float64
	// xy holds the points (x, y) side by side for fitMoments when lambdas
	// is set.
	xy []xyPoint
}

type xyPoint struct{ x, y float64 }

func newBootWorker(s Sample, ests []Estimator, n int) *bootWorker {
	w := &bootWorker{}
	w.rng = rand.New(&w.pcg)
	w.s.X, w.s.Y = make([]float64, n), make([]float64, n)
	if s.SX != nil {
		w.s.SX = make([]float64, n)
	}
	if s.SY != nil {
		w.s.SY = make([]float64, n)
	}
	if s.R != nil {
		w.s.R = make([]float64, n)
	}
	for _, e := range ests {
		w.fitters = append(w.fitters, e.NewFitter(n))
	}
	if is32bit { // math/rand/v2 bounds its numbers differently there
		return w
	}
	for _, f := range w.fitters {
		var lam float64
		switch f := f.(type) {
		case demingFitter:
			lam = f.lambda
		case olsFitter:
			lam = math.Inf(1)
		default:
			w.lambdas = nil
			return w
		}
		w.lambdas = append(w.lambdas, lam)
	}
	w.xy = make([]xyPoint, n)
	for i := range w.xy {
		w.xy[i] = xyPoint{s.X[i], s.Y[i]}
	}
	return w
}

// is32bit: math/rand/v2 draws bounded integers differently there.
const is32bit = ^uint(0)>>32 == 0

// intN is w.rng.IntN(n), the same number from the same stream (Lemire's
// multiply-and-reject, as math/rand/v2's uint64n), with the generator
// called directly rather than through the rand.Source interface so that
// it inlines into the draw loops.
func (w *bootWorker) intN(n int) int {
	if is32bit {
		return w.rng.IntN(n)
	}
	un := uint64(n)
	if un&(un-1) == 0 {
		return int(w.pcg.Uint64() & (un - 1))
	}
	hi, lo := bits.Mul64(w.pcg.Uint64(), un)
	if lo < un {
		thresh := -un % un
		for lo < thresh {
			hi, lo = bits.Mul64(w.pcg.Uint64(), un)
		}
	}
	return int(hi)
}

// pcgStep advances the state (hi, lo) of a rand.PCG by one step and returns
// the new state and its output, as (*rand.PCG).Uint64 does (a 128-bit LCG
// with the DXSM output function; the constants are those of math/rand/v2),
// but with the state in local variables, so that a draw loop keeps it in
// registers. rand.PCG.Seed(s1, s2) is the state (s1, s2).
func pcgStep(hi, lo uint64) (nhi, nlo, v uint64) {
	const (
		mulHi    = 2549297995355413924
		mulLo    = 4865540595714422341
		incHi    = 6364136223846793005
		incLo    = 1442695040888963407
		cheapMul = 0xda942042e4dd58b5
	)
	h, l := bits.Mul64(lo, mulLo)
	h += hi*mulLo + lo*mulHi
	l, c := bits.Add64(l, incLo, 0)
	h, _ = bits.Add64(h, incHi, c)
	v = h
	v ^= v >> 32
	v *= cheapMul
	v ^= v >> 48
	v *= l | 1
	return h, l, v
}

// fitMoments draws the pairs resample of the PCG state (s1, s2) of the
// points w.xy and fits
// every estimator of w.lambdas to it, writing the lines to out, without
// materialising the resample: one pass draws each index (the numbers
// rand.New(rand.NewPCG(s1, s2)).IntN(n) gives) and adds the point to the
// sums of shiftedMoments about the first point drawn, in the order that
// shiftedMoments would sum the materialised resample, so that the lines
// are the same bit for bit. It returns done false, with out untouched,
// when the moments need the points themselves (the first point lies far
// from the rest, or the sums leave the safe band of demingFitter): the
// caller then draws the resample again from the same seed and fits it as
// usual. ok is false when an estimator cannot fit the resample.
func (w *bootWorker) fitMoments(s1, s2 uint64, out []Line) (done, ok bool) {
	xy := w.xy
	n := len(xy)
	un := uint64(n)
	pow2 := un&(un-1) == 0
	// The first point drawn adds +0 to every sum: it only sets (x0, y0).
	hi, lo, j := drawIndex(s1, s2, un, pow2)
	p := xy[j]
	x0, y0 := p.x, p.y
	var sx, sy, sxx, syy, sxy float64
	for range n - 1 {
		var v, l uint64
		hi, lo, v = pcgStep(hi, lo)
		if pow2 { // math/rand/v2's uint64n: a mask, else multiply and reject
			j = v & (un - 1)
		} else if j, l = bits.Mul64(v, un); l < un {
			j, hi, lo = redraw(hi, lo, l, j, un)
		}
		p := xy[j]
		dx, dy := p.x-x0, p.y-y0
		sx += dx
		sy += dy
		sxx += dx * dx
		syy += dy * dy
		sxy += dx * dy
	}
	m, far := shiftedSums(n, x0, y0, sx, sy, sxx, syy, sxy)
	if far || !safeMoments(m) {
		return false, false
	}
	for i, lam := range w.lambdas {
		a, b, err := lineFrom(m, lam)
		if err != nil || !allFinite(a, b) {
			return true, false
		}
		out[i] = Line{a, b}
	}
	return true, true
}

// drawIndex steps the PCG state (hi, lo) and draws an index below un as
// math/rand/v2's uint64n does.
func drawIndex(hi, lo, un uint64, pow2 bool) (nhi, nlo, j uint64) {
	hi, lo, v := pcgStep(hi, lo)
	if pow2 {
		return hi, lo, v & (un - 1)
	}
	j, l := bits.Mul64(v, un)
	if l < un {
		j, hi, lo = redraw(hi, lo, l, j, un)
	}
	return hi, lo, j
}

// redraw finishes math/rand/v2's multiply-and-reject draw of an index
// below un when the first product's low word l fell below un: it rejects
// while l < 2⁶⁴ mod un, stepping the generator (hi, lo), and returns the
// index and the state.
func redraw(hi, lo, l, j, un uint64) (uint64, uint64, uint64) {
	thresh := -un % un
	for l < thresh {
		var v uint64
		hi, lo, v = pcgStep(hi, lo)
		j, l = bits.Mul64(v, un)
	}
	return j, hi, lo
}

func (w *bootWorker) drawPairs(s Sample) {
	n := len(s.X)
	for i := range n {
		j := w.intN(n)
		w.s.X[i], w.s.Y[i] = s.X[j], s.Y[j]
		if s.SX != nil {
			w.s.SX[i] = s.SX[j]
		}
		if s.SY != nil {
			w.s.SY[i] = s.SY[j]
		}
		if s.R != nil {
			w.s.R[i] = s.R[j]
		}
	}
}

// drawParametric draws x* = x̂ + σx·z1, y* = ŷ + σy·(r·z1 + √(1−r²)·z2).
func (w *bootWorker) drawParametric(s Sample, xh, yh []float64) {
	copy(w.s.SX, s.SX)
	copy(w.s.SY, s.SY)
	if s.R != nil {
		copy(w.s.R, s.R)
	}
	for i := range s.X {
		z1, z2 := w.rng.NormFloat64(), w.rng.NormFloat64()
		r := rAt(s.R, i)
		w.s.X[i] = xh[i] + s.SX[i]*z1
		w.s.Y[i] = yh[i] + s.SY[i]*(r*z1+math.Sqrt(1-r*r)*z2)
	}
}

// jackknife fits every estimator to each leave-one-out sample, for the BCa
// acceleration.
func (res *BootstrapResult) jackknife(ctx context.Context, s Sample, ests []Estimator) error {
	n := s.Len()
	k := res.k
	res.loo = make([]Line, n*k)
	drop := func(dst, src []float64, i int) []float64 {
		if src == nil {
			return nil
		}
		copy(dst, src[:i])
		copy(dst[i:], src[i+1:])
		return dst
	}
	buf := make([]float64, 5*(n-1))
	cols := [5][]float64{buf[:n-1], buf[n-1 : 2*(n-1)], buf[2*(n-1) : 3*(n-1)], buf[3*(n-1) : 4*(n-1)], buf[4*(n-1):]}
	fitters := make([]LineFitter, k)
	for j, e := range ests {
		fitters[j] = e.NewFitter(n)
	}
	for i := range n {
		if i%256 == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
		ls := Sample{X: drop(cols[0], s.X, i), Y: drop(cols[1], s.Y, i), SX: drop(cols[2], s.SX, i),
			SY: drop(cols[3], s.SY, i), R: drop(cols[4], s.R, i)}
		for j, f := range fitters {
			a, b, err := f.FitLine(ls)
			if err != nil || !allFinite(a, b) {
				res.loo = nil // a degenerate leave-one-out sample: no acceleration
				res.Warnings = append(res.Warnings, &Warning{Code: WarnJackknifeSkipped, Message: fmt.Sprintf(
					"%s could not be fitted without point %d, so the BCa acceleration was set to zero", ests[j].Method(), i+1)})
				return nil
			}
			res.loo[i*k+j] = Line{a, b}
		}
	}
	return nil
}

// BootSummary is the bootstrap uncertainty of one statistic.
type BootSummary struct {
	Estimate   float64   // the statistic on the original sample
	SE         float64   // standard deviation of the replicates
	Percentile *Interval // nil when refused (too many failures)
	BCa        *Interval // nil when refused
}

// Statistic computes a number from the lines of every estimator (in the
// order they were given to Bootstrap) on one sample.
type Statistic func(lines []Line) float64

// SlopeOf and InterceptOf are the statistics of estimator j.
func SlopeOf(j int) Statistic     { return func(l []Line) float64 { return l[j].Slope } }
func InterceptOf(j int) Statistic { return func(l []Line) float64 { return l[j].Intercept } }

// Summarize returns the bootstrap SE and the percentile and BCa intervals
// (Efron 1987, JASA 82:171) of a statistic:
//
//	z0 = Φ⁻¹(share of replicates below the estimate, ties counted half)
//	â  = Σ(θ̄₍.₎ − θ₍ᵢ₎)³ / (6·[Σ(θ̄₍.₎ − θ₍ᵢ₎)²]^{3/2})    (jackknife)
//	α₁,₂ = Φ(z0 + (z0 + z_{α})/(1 − â(z0 + z_{α}))),  α = (1 ∓ level)/2
//
// and the interval is the α₁ and α₂ quantiles of the replicates (linear
// interpolation between order statistics, as numpy's default).
func (res *BootstrapResult) Summarize(stat Statistic) (BootSummary, error) {
	k := res.k
	full := stat(res.Full)
	vals := make([]float64, 0, res.Resamples)
	for i := range res.Resamples {
		l := res.lines[i*k : (i+1)*k]
		if math.IsNaN(l[0].Slope) {
			continue
		}
		if v := stat(l); allFinite(v) {
			vals = append(vals, v)
		}
	}
	sum := BootSummary{Estimate: full}
	if len(vals) < 2 {
		return sum, ErrTooManyFailures
	}
	var m float64
	for _, v := range vals {
		m += v
	}
	m /= float64(len(vals))
	var ss float64
	for _, v := range vals {
		ss += (v - m) * (v - m)
	}
	sum.SE = math.Sqrt(ss / float64(len(vals)-1))
	if float64(res.Resamples-len(vals)) > MaxFailedShare*float64(res.Resamples) {
		return sum, ErrTooManyFailures
	}
	var fixed [8]int // the four quantiles need at most eight order statistics
	ord := orderStats{v: vals, fixed: fixed[:0]}
	lo, hi := (1-res.Confidence)/2, (1+res.Confidence)/2
	sum.Percentile = &Interval{Lower: ord.quantile7(lo), Upper: ord.quantile7(hi),
		Level: res.Confidence, Method: "percentile"}

	// Bias correction: mid-rank share of replicates below the estimate.
	below, equal := 0, 0
	for _, v := range vals {
		if v < full {
			below++
		} else if v == full {
			equal++
		}
	}
	p0 := (float64(below) + 0.5*float64(equal)) / float64(len(vals))
	if p0 <= 0 || p0 >= 1 {
		// Every replicate on one side: BCa is undefined (Efron & Tibshirani 1993, §14.3).
		return sum, nil
	}
	z0 := distuv.UnitNormal.Quantile(p0)
	acc := 0.0
	if res.loo != nil {
		n := len(res.loo) / k
		th := make([]float64, n)
		var mean float64
		for i := range n {
			th[i] = stat(res.loo[i*k : (i+1)*k])
			mean += th[i]
		}
		mean /= float64(n)
		var num, den float64
		for _, t := range th {
			d := mean - t
			num += d * d * d
			den += d * d
		}
		if den > 0 {
			acc = num / (6 * math.Pow(den, 1.5))
		}
	}
	adj := func(alpha float64) float64 {
		z := distuv.UnitNormal.Quantile(alpha)
		return distuv.UnitNormal.CDF(z0 + (z0+z)/(1-acc*(z0+z)))
	}
	a1, a2 := adj(lo), adj(hi)
	if allFinite(a1, a2) {
		sum.BCa = &Interval{Lower: ord.quantile7(a1), Upper: ord.quantile7(a2),
			Level: res.Confidence, Method: "BCa"}
	}
	return sum, nil
}

// quantile7 is the p quantile of sorted data by linear interpolation
// between order statistics (Hyndman & Fan 1996, definition 7).
func quantile7(sorted []float64, p float64) float64 {
	h := p * float64(len(sorted)-1)
	lo := int(math.Floor(h))
	if lo < 0 {
		return sorted[0]
	}
	if lo >= len(sorted)-1 {
		return sorted[len(sorted)-1]
	}
	return sorted[lo] + (h-float64(lo))*(sorted[lo+1]-sorted[lo])
}

// orderStats reads order statistics of v by selection rather than by
// sorting it all: a bootstrap interval needs four quantiles of B values.
// fixed lists the indices already selected: v[f] holds the f-th smallest
// value, every element before it is ≤ and every one after is ≥, so that a
// later selection works between the two nearest of them.
type orderStats struct {
	v     []float64
	fixed []int
}

// nth returns the k-th smallest value (from 0).
func (o *orderStats) nth(k int) float64 {
	lo, hi := 0, len(o.v)
	for _, f := range o.fixed {
		switch {
		case f == k:
			return o.v[k]
		case f < k:
			lo = max(lo, f+1)
		default:
			hi = min(hi, f)
		}
	}
	selectNth(o.v[lo:hi], k-lo)
	o.fixed = append(o.fixed, k)
	return o.v[k]
}

// quantile7 is quantile7 of the sorted values.
func (o *orderStats) quantile7(p float64) float64 {
	n := len(o.v)
	h := p * float64(n-1)
	lo := int(math.Floor(h))
	if lo < 0 {
		return o.nth(0)
	}
	if lo >= n-1 {
		return o.nth(n - 1)
	}
	a, b := o.nth(lo), o.nth(lo+1)
	return a + (h-float64(lo))*(b-a)
}

// selectNth reorders v so that v[k] is its k-th smallest value with every
// element before it ≤ and every one after ≥ (quickselect with a median of
// three and a three-way partition, so that ties cost nothing; it sorts
// instead after more rounds than a balanced split needs, which bounds the
// worst case at O(n log n)). v holds no NaN.
func selectNth(v []float64, k int) {
	for depth := 2*bits.Len(uint(len(v))) + 8; len(v) > 12; depth-- {
		if depth == 0 {
			slices.Sort(v)
			return
		}
		a, b, c := v[0], v[len(v)/2], v[len(v)-1]
		pivot := max(min(a, b), min(max(a, b), c))
		lt, i, gt := 0, 0, len(v)
		for i < gt {
			switch x := v[i]; {
			case x < pivot:
				v[lt], v[i] = x, v[lt]
				lt++
				i++
			case x > pivot:
				gt--
				v[i], v[gt] = v[gt], x
			default:
				i++
			}
		}
		switch {
		case k < lt:
			v = v[:lt]
		case k >= gt:
			v, k = v[gt:], k-gt
		default:
			return
		}
	}
	slices.Sort(v)
}

// Replicates returns the statistic on every successful resample, in
// resample order (for plots of the bootstrap distribution).
func (res *BootstrapResult) Replicates(stat Statistic) []float64 {
	k := res.k
	out := make([]float64, 0, res.Resamples)
	for i := range res.Resamples {
		l := res.lines[i*k : (i+1)*k]
		if !math.IsNaN(l[0].Slope) {
			out = append(out, stat(l))
		}
	}
	return out
}
