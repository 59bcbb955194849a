package eiv

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
)

// Spread is how the true values of a planned study spread over its range.
type Spread string

const (
	SpreadUniform    Spread = "uniform"     // uniform on [Low, High]
	SpreadLogUniform Spread = "log_uniform" // ln τ uniform on [ln Low, ln High]
	SpreadLevels     Spread = "levels"      // sample i at Levels[i mod len(Levels)]
)

// ErrorSpec is one method's random error: σ(τ) = √(SD² + (CV·τ)²) at true
// level τ (constant SD, constant CV, or both).
type ErrorSpec struct {
	SD float64 // in the units of the measurand
	CV float64 // a fraction: 0.05 is 5 %
}

func (e ErrorSpec) sigma(t float64) float64 { return math.Hypot(e.SD, e.CV*t) }

// Difference is a systematic difference of y from x: the true y is
// Constant + (1 + Proportional)·τ at true x τ. The zero Difference is "no
// difference".
type Difference struct {
	Constant     float64
	Proportional float64 // a fraction: 0.02 is a slope of 1.02
}

func (d Difference) bias(t float64) float64 { return d.Constant + d.Proportional*t }

// DecisionLevel is a level at which the bias is judged against a limit:
// the larger of Allowable and AllowablePercent % of |X| (at least one > 0).
type DecisionLevel struct {
	X                float64
	Allowable        float64
	AllowablePercent float64
}

// Limit is the allowable bias at the level.
func (l DecisionLevel) Limit() float64 {
	return math.Max(l.Allowable, l.AllowablePercent/100*math.Abs(l.X))
}

// PlanTarget is the measure a target power applies to.
type PlanTarget string

const (
	// TargetSlope: the share of studies whose slope interval excludes 1,
	// under every scenario with a proportional difference.
	TargetSlope PlanTarget = "slope"
	// TargetIntercept: the share whose intercept interval excludes 0, under
	// every scenario with a constant difference.
	TargetIntercept PlanTarget = "intercept"
	// TargetVerdict: the share with the right verdict ("within" when the
	// true |bias| ≤ limit, else "exceeds") at every decision level, under
	// every scenario.
	TargetVerdict PlanTarget = "verdict"
)

// Verdicts on a bias interval against ±limit.
const (
	VerdictWithin       = "within"       // the whole interval inside ±limit
	VerdictExceeds      = "exceeds"      // the whole interval outside ±limit
	VerdictInconclusive = "inconclusive" // otherwise
)

// PlanOptions describe a planned method-comparison study. Fields marked
// "required" have no default; a nil *PlanOptions is an error.
type PlanOptions struct {
	// Low and High bound the measuring range, Low < High (required, except
	// with SpreadLevels, where they default to the levels' extremes).
	Low, High float64
	// Spread of the true values. Empty means SpreadUniform. Levels are the
	// target levels of SpreadLevels.
	Spread Spread
	Levels []float64
	// ErrorX is x's (the comparative method's) error (required). ErrorY is
	// y's; nil means y's error is √Lambda times x's (SD and CV alike), and
	// then Lambda is required.
	ErrorX ErrorSpec
	ErrorY *ErrorSpec
	Lambda float64
	// ReplicatesX and ReplicatesY are the measurements per sample by each
	// method; the fit uses their means. Zero means 1.
	ReplicatesX, ReplicatesY int
	// Sizes are the candidate numbers of samples (each ≥ 3). Empty with
	// TargetPower set: sizes are searched from 10 up to MaxN.
	Sizes []int
	// TargetPower in (0, 1), when set, asks for the smallest n meeting it
	// on Target (empty means TargetSlope). MaxN bounds the search; zero
	// means 2000.
	TargetPower float64
	Target      PlanTarget
	MaxN        int
	// Differences are the true systematic differences to plan against;
	// empty means one scenario, no difference.
	Differences []Difference
	// Decisions are the decision levels with their allowable bias.
	Decisions []DecisionLevel
	// Estimator is MethodDeming (the default), MethodWeightedDeming or
	// MethodPassingBablok. Deming and weighted Deming are given the λ of
	// the error model (PlanResult.Lambda).
	Estimator Method
	// Confidence of the intervals. Zero means 0.95.
	Confidence float64
	// Trials per size and scenario. Zero means 1000.
	Trials int
	// Seed: trial t draws only from PCG(Seed, t), for every size and
	// scenario (common random numbers: sizes and scenarios differ only in
	// what they are asked, which steadies the comparisons), so the result
	// is the same bit for bit for any number of workers.
	Seed uint64
	// Workers is the number of goroutines. Zero means GOMAXPROCS.
	Workers int
	// Units names the unit of the measurand in the sentence (may be empty).
	Units string
}

// Limits on the work one plan may ask for.
const (
	PlanMaxTrials    = 100000
	PlanMaxSizes     = 50
	PlanMaxN         = 20000
	PlanMaxScenarios = 10
	PlanMaxDecisions = 50
	PlanMaxReplicate = 20
)

// PlanResult is the outcome of a simulated study plan.
type PlanResult struct {
	Estimator  Method
	Confidence float64
	Trials     int
	Seed       uint64
	// Lambda is the error-variance ratio of the fitted means given to
	// Deming (var(ȳ error)/var(x̄ error), averaged over the spread) or to
	// weighted Deming (the ratio of squared CVs of the means); zero for
	// Passing–Bablok.
	Lambda float64
	// Scenarios hold the results per difference, each per size in
	// increasing n.
	Scenarios []PlanScenario
	// Target and TargetPower echo the request; SmallestN is the smallest
	// evaluated n meeting it (0 when none did or no target was set).
	Target      PlanTarget
	TargetPower float64
	SmallestN   int
	// Sentence sums the plan up for people.
	Sentence string
	// Warnings are non-fatal diagnostics, each a *Warning.
	Warnings []error
}

// PlanScenario is one true difference.
type PlanScenario struct {
	Difference Difference
	Sizes      []PlanSize
}

// PlanSize is the simulated outcome of Trials studies of N samples.
type PlanSize struct {
	N int
	// Failed counts trials the estimator could not fit (or gave no
	// interval); every share below is over the other trials.
	Failed int
	// SlopePower is the share of slope intervals excluding 1,
	// InterceptPower the share of intercept intervals excluding 0 (under
	// no difference, the false-positive rates). SlopeCoverage and
	// InterceptCoverage are the shares covering the true slope and intercept.
	SlopePower, InterceptPower       float64
	SlopeCoverage, InterceptCoverage float64
	// Levels are the outcomes at each decision level.
	Levels []LevelOutcome
}

// LevelOutcome is the simulated outcome at one decision level.
type LevelOutcome struct {
	X, Limit float64
	// TrueBias is the planned difference at X.
	TrueBias float64
	// Within, Exceeds and Inconclusive are the shares of each verdict.
	Within, Exceeds, Inconclusive float64
	// HalfWidth is the mean half-width of the bias interval, HalfWidthSD
	// the SD of the half-widths (HalfWidthSD/√trials is the Monte Carlo
	// error of HalfWidth).
	HalfWidth, HalfWidthSD float64
	// Coverage is the share of bias intervals covering TrueBias.
	Coverage float64
}

// planConfig is the validated plan.
type planConfig struct {
	o          PlanOptions
	ex, ey     ErrorSpec
	kx, ky     int
	conf       float64
	trials     int
	workers    int
	lambda     float64
	scenarios  []Difference
	target     PlanTarget
	maxN       int
	ratioLevel float64
}

// Plan simulates method-comparison studies of each candidate size: trial
// t draws the true values τ_i, the replicates x_ik = τ_i + σx(τ_i)·z and
// y_ik = Δ(τ_i) + σy(Δ(τ_i))·z around the planned truth Δ(τ) = a + (1+p)·τ,
// fits the means with the estimator, and records at each decision level
// X_c the bias interval of a + (b − 1)·X_c and its verdict, and whether
// the slope and intercept intervals exclude 1 and 0.
//
// Bias intervals: Deming and weighted Deming use Fit.At (Fuller's
// large-sample SEs; weighted Deming's jackknife), t on n−2 df.
// Passing–Bablok has no slope–intercept covariance; its bias interval is
// the jackknife's (JackknifeLines, JackknifeAt: t on n−2 df), as the
// method-comparison study reports it, and its slope and intercept tests use
// the paper's rank intervals. Each trial refits n leave-one-out samples,
// so Passing–Bablok plans are bounded at n = 200.
//
// Trials run on Workers goroutines and honour ctx; cancellation returns
// ctx's error.
func Plan(ctx context.Context, opt *PlanOptions) (*PlanResult, error) {
	cfg, err := planValidate(opt)
	if err != nil {
		return nil, err
	}
	res := &PlanResult{Estimator: cfg.o.Estimator, Confidence: cfg.conf, Trials: cfg.trials, Seed: cfg.o.Seed,
		Lambda: cfg.lambda, Target: cfg.o.Target, TargetPower: cfg.o.TargetPower}
	if res.TargetPower > 0 {
		res.Target = cfg.target
	}
	for _, d := range cfg.scenarios {
		res.Scenarios = append(res.Scenarios, PlanScenario{Difference: d})
	}
	// evaluate runs every scenario at n (once) and says whether the target is met.
	evaluated := map[int]bool{}
	evaluate := func(n int) (bool, error) {
		if met, ok := evaluated[n]; ok {
			return met, nil
		}
		for i, d := range cfg.scenarios {
			ps, err := cfg.simulate(ctx, d, n)
			if err != nil {
				return false, err
			}
			res.Scenarios[i].Sizes = append(res.Scenarios[i].Sizes, ps)
		}
		met := cfg.met(res, n)
		evaluated[n] = met
		return met, nil
	}
	if len(cfg.o.Sizes) > 0 {
		for _, n := range cfg.o.Sizes {
			if _, err := evaluate(n); err != nil {
				return nil, err
			}
		}
	} else {
		// Doubling from 10 until the target is met, then bisection to
		// within 5 % (power rises with n; common random numbers keep the
		// simulated curve close to monotone).
		lo, hi := 0, 0
		for n := 10; ; n *= 2 {
			n = min(n, cfg.maxN)
			met, err := evaluate(n)
			if err != nil {
				return nil, err
			}
			if met {
				hi = n
				break
			}
			lo = n
			if n == cfg.maxN {
				break
			}
		}
		for hi > 0 && hi-lo > max(1, hi/20) {
			mid := (lo + hi) / 2
			met, err := evaluate(mid)
			if err != nil {
				return nil, err
			}
			if met {
				hi = mid
			} else {
				lo = mid
			}
		}
	}
	for i := range res.Scenarios {
		slices.SortFunc(res.Scenarios[i].Sizes, func(a, b PlanSize) int { return a.N - b.N })
	}
	if res.TargetPower > 0 {
		for _, ps := range res.Scenarios[0].Sizes {
			if evaluated[ps.N] {
				res.SmallestN = ps.N
				break
			}
		}
	}
	for _, sc := range res.Scenarios {
		for _, ps := range sc.Sizes {
			if share := float64(ps.Failed) / float64(cfg.trials); share > WarnFailedShare {
				res.Warnings = append(res.Warnings, &Warning{Code: WarnPlanFailures, Message: fmt.Sprintf(
					"%s could not be fitted (or gave no interval) in %.1f%% of the trials at n = %d", cfg.o.Estimator, 100*share, ps.N)})
				break
			}
		}
	}
	res.Sentence = cfg.sentence(res)
	return res, nil
}

// WarnPlanFailures: the estimator failed in more than 1 % of a plan's trials.
const WarnPlanFailures = "plan_failures"

func planValidate(opt *PlanOptions) (*planConfig, error) {
	if opt == nil {
		return nil, &OptionError{Option: "plan", Reason: "options are required"}
	}
	c := &planConfig{o: *opt}
	o := &c.o
	bad := func(name, reason string) error { return &OptionError{Option: name, Reason: reason} }
	var err error
	if c.conf, err = checkConfidence(o.Confidence); err != nil {
		return nil, err
	}
	if o.Spread == "" {
		o.Spread = SpreadUniform
	}
	switch o.Spread {
	case SpreadUniform, SpreadLogUniform:
		if len(o.Levels) > 0 {
			return nil, bad("levels", "levels are used only with the spread \"levels\"")
		}
	case SpreadLevels:
		if len(o.Levels) == 0 {
			return nil, bad("levels", "the spread \"levels\" needs at least one level")
		}
		lo, hi := math.Inf(1), math.Inf(-1)
		for i, v := range o.Levels {
			if !allFinite(v) {
				return nil, bad(fmt.Sprintf("levels[%d]", i), "must be a finite number")
			}
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		if o.Low == 0 && o.High == 0 {
			o.Low, o.High = lo, hi
		}
		if lo < o.Low || hi > o.High {
			return nil, bad("levels", "every level must lie within [low, high]")
		}
		if lo == hi {
			return nil, bad("levels", "at least two different levels are needed to fit a line")
		}
	default:
		return nil, bad("spread", "must be uniform, log_uniform or levels")
	}
	if !allFinite(o.Low, o.High) || !(o.Low < o.High) {
		return nil, bad("high", "the range needs finite low < high")
	}
	if o.Spread == SpreadLogUniform && !(o.Low > 0) {
		return nil, bad("low", "a log-uniform spread needs low > 0")
	}
	c.ex = o.ErrorX
	if err := checkErrorSpec("error_x", c.ex); err != nil {
		return nil, err
	}
	switch {
	case o.ErrorY != nil:
		c.ey = *o.ErrorY
		if o.Lambda != 0 {
			return nil, bad("lambda", "give either the error of y or lambda, not both")
		}
		if err := checkErrorSpec("error_y", c.ey); err != nil {
			return nil, err
		}
	case o.Lambda > 0 && !math.IsInf(o.Lambda, 0):
		r := math.Sqrt(o.Lambda)
		c.ey = ErrorSpec{SD: r * c.ex.SD, CV: r * c.ex.CV}
	default:
		return nil, bad("lambda", "without the error of y, lambda (> 0, finite) is required")
	}
	if c.ex.SD == 0 && c.ex.CV == 0 && c.ey.SD == 0 && c.ey.CV == 0 {
		return nil, bad("error_x", "at least one method must have a random error")
	}
	c.kx, c.ky = max(o.ReplicatesX, 1), max(o.ReplicatesY, 1)
	if o.ReplicatesX < 0 || o.ReplicatesY < 0 || c.kx > PlanMaxReplicate || c.ky > PlanMaxReplicate {
		return nil, bad("replicates", fmt.Sprintf("must lie between 1 and %d", PlanMaxReplicate))
	}
	if o.Estimator == "" {
		o.Estimator = MethodDeming
	}
	maxN := PlanMaxN
	switch o.Estimator {
	case MethodDeming, MethodPassingBablok:
	case MethodWeightedDeming:
		if !(o.Low > 0) {
			return nil, bad("low", "weighted Deming needs positive values: low > 0")
		}
		maxN = 5000
	default:
		return nil, bad("estimator", "must be deming, weighted_deming or passing_bablok")
	}
	if o.Estimator == MethodPassingBablok {
		maxN = 200
	}
	c.trials = o.Trials
	if c.trials == 0 {
		c.trials = 1000
	}
	if c.trials < 10 || c.trials > PlanMaxTrials {
		return nil, bad("trials", fmt.Sprintf("must lie between 10 and %d", PlanMaxTrials))
	}
	if len(o.Sizes) > PlanMaxSizes {
		return nil, bad("sizes", fmt.Sprintf("at most %d sizes", PlanMaxSizes))
	}
	for i, n := range o.Sizes {
		if n < 3 || n > maxN {
			return nil, bad(fmt.Sprintf("sizes[%d]", i), fmt.Sprintf("must lie between 3 and %d for %s", maxN, o.Estimator))
		}
		if slices.Contains(o.Sizes[:i], n) {
			return nil, bad(fmt.Sprintf("sizes[%d]", i), "repeats an earlier size")
		}
	}
	c.maxN = o.MaxN
	if c.maxN == 0 {
		c.maxN = min(2000, maxN)
	}
	if c.maxN < 10 || c.maxN > maxN {
		return nil, bad("max_n", fmt.Sprintf("must lie between 10 and %d for %s", maxN, o.Estimator))
	}
	if o.TargetPower != 0 && !(o.TargetPower > 0 && o.TargetPower < 1) {
		return nil, bad("target_power", "must lie strictly between 0 and 1")
	}
	if o.TargetPower == 0 && o.Target != "" {
		return nil, bad("target", "a target needs target_power")
	}
	if len(o.Sizes) == 0 && o.TargetPower == 0 {
		return nil, bad("sizes", "give candidate sizes or a target power")
	}
	c.target = o.Target
	if c.target == "" {
		c.target = TargetSlope
	}
	c.scenarios = o.Differences
	if len(c.scenarios) == 0 {
		c.scenarios = []Difference{{}}
	}
	if len(c.scenarios) > PlanMaxScenarios {
		return nil, bad("differences", fmt.Sprintf("at most %d", PlanMaxScenarios))
	}
	for i, d := range c.scenarios {
		if !allFinite(d.Constant, d.Proportional) || !(d.Proportional > -1) {
			return nil, bad(fmt.Sprintf("differences[%d]", i), "needs finite parts and a proportional part above −1")
		}
	}
	if len(o.Decisions) > PlanMaxDecisions {
		return nil, bad("decision_levels", fmt.Sprintf("at most %d", PlanMaxDecisions))
	}
	for i, l := range o.Decisions {
		if !allFinite(l.X, l.Allowable, l.AllowablePercent) || l.Allowable < 0 || l.AllowablePercent < 0 || !(l.Limit() > 0) {
			return nil, bad(fmt.Sprintf("decision_levels[%d]", i), "needs a finite level and an allowable bias > 0 (absolute or percent)")
		}
	}
	if o.TargetPower > 0 {
		ok := false
		for _, d := range c.scenarios {
			switch c.target {
			case TargetSlope:
				ok = ok || d.Proportional != 0
			case TargetIntercept:
				ok = ok || d.Constant != 0
			case TargetVerdict:
				ok = len(o.Decisions) > 0
			default:
				return nil, bad("target", "must be slope, intercept or verdict")
			}
		}
		if !ok {
			return nil, bad("target", fmt.Sprintf("the %s target needs %s", c.target, map[PlanTarget]string{
				TargetSlope: "a difference with a proportional part", TargetIntercept: "a difference with a constant part",
				TargetVerdict: "decision levels"}[c.target]))
		}
	}
	c.workers = o.Workers
	if c.workers <= 0 {
		c.workers = runtime.GOMAXPROCS(0)
	}
	c.lambda = c.planLambda()
	if !(c.lambda > 0) && o.Estimator != MethodPassingBablok || !allFinite(c.lambda) {
		return nil, bad("error_y", "the errors give no finite positive error-variance ratio for the estimator")
	}
	return c, nil
}

func checkErrorSpec(name string, e ErrorSpec) error {
	if !allFinite(e.SD, e.CV) || e.SD < 0 || e.CV < 0 {
		return &OptionError{Option: name, Reason: "sd and cv must be finite and not negative"}
	}
	return nil
}

// moments of the spread: E[τ], E[τ²], E[1/τ²].
func (c *planConfig) spreadMoments() (m1, m2, inv2 float64) {
	L, H := c.o.Low, c.o.High
	switch c.o.Spread {
	case SpreadLogUniform:
		l := math.Log(H / L)
		return (H - L) / l, (H*H - L*L) / (2 * l), (1/(L*L) - 1/(H*H)) / (2 * l)
	case SpreadLevels:
		for _, v := range c.o.Levels {
			m1 += v
			m2 += v * v
			if v != 0 {
				inv2 += 1 / (v * v)
			}
		}
		k := float64(len(c.o.Levels))
		return m1 / k, m2 / k, inv2 / k
	}
	inv := 0.0
	if L > 0 {
		inv = 1 / (L * H)
	}
	return (L + H) / 2, (L*L + L*H + H*H) / 3, inv
}

// planLambda is the λ the estimator is given. Deming: the mean error
// variance of ȳ over the mean error variance of x̄ across the spread (y's
// error evaluated at τ; the planned difference is left out, as a study
// would state λ before knowing it). Weighted Deming: the same for the
// squared relative errors, E[σ²/τ²] = CV² + SD²·E[1/τ²].
func (c *planConfig) planLambda() float64 {
	_, m2, inv2 := c.spreadMoments()
	kx, ky := float64(c.kx), float64(c.ky)
	switch c.o.Estimator {
	case MethodDeming:
		vx := (c.ex.SD*c.ex.SD + c.ex.CV*c.ex.CV*m2) / kx
		vy := (c.ey.SD*c.ey.SD + c.ey.CV*c.ey.CV*m2) / ky
		return vy / vx
	case MethodWeightedDeming:
		vx := (c.ex.CV*c.ex.CV + c.ex.SD*c.ex.SD*inv2) / kx
		vy := (c.ey.CV*c.ey.CV + c.ey.SD*c.ey.SD*inv2) / ky
		return vy / vx
	}
	return 0
}

// trialOut is one trial's record.
type trialOut struct {
	ok                  bool
	slopeExcl, icptExcl bool
	slopeCover, icptCov bool
	verdict             []int8 // 0 within, 1 exceeds, 2 inconclusive
	half                []float64
	cover               []bool
}

// simulate runs the trials of one scenario at size n.
func (c *planConfig) simulate(ctx context.Context, d Difference, n int) (PlanSize, error) {
	T := c.trials
	L := len(c.o.Decisions)
	outs := make([]trialOut, T)
	verd := make([]int8, T*L)
	half := make([]float64, T*L)
	cover := make([]bool, T*L)
	for t := range outs {
		outs[t].verdict, outs[t].half, outs[t].cover = verd[t*L:(t+1)*L], half[t*L:(t+1)*L], cover[t*L:(t+1)*L]
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	const chunk = 8
	for range min(c.workers, T) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var pcg rand.PCG
			rng := rand.New(&pcg)
			x, y := make([]float64, n), make([]float64, n)
			for ctx.Err() == nil {
				start := int(next.Add(chunk)) - chunk
				if start >= T {
					return
				}
				for t := start; t < min(start+chunk, T); t++ {
					pcg.Seed(c.o.Seed, uint64(t))
					c.draw(rng, d, x, y)
					c.trial(d, x, y, &outs[t])
				}
			}
		}()
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return PlanSize{}, err
	}
	ps := PlanSize{N: n, Levels: make([]LevelOutcome, L)}
	ok := 0
	for _, o := range outs {
		if !o.ok {
			ps.Failed++
			continue
		}
		ok++
		ps.SlopePower += b2f(o.slopeExcl)
		ps.InterceptPower += b2f(o.icptExcl)
		ps.SlopeCoverage += b2f(o.slopeCover)
		ps.InterceptCoverage += b2f(o.icptCov)
	}
	for j, lv := range c.o.Decisions {
		lo := &ps.Levels[j]
		lo.X, lo.Limit, lo.TrueBias = lv.X, lv.Limit(), d.bias(lv.X)
		var hs []float64
		for _, o := range outs {
			if !o.ok {
				continue
			}
			switch o.verdict[j] {
			case 0:
				lo.Within++
			case 1:
				lo.Exceeds++
			default:
				lo.Inconclusive++
			}
			lo.Coverage += b2f(o.cover[j])
			hs = append(hs, o.half[j])
		}
		if len(hs) > 0 {
			m, ss := meanSSOf(hs)
			lo.HalfWidth = m
			if len(hs) > 1 {
				lo.HalfWidthSD = math.Sqrt(ss / float64(len(hs)-1))
			}
		}
		if ok > 0 {
			f := float64(ok)
			lo.Within, lo.Exceeds, lo.Inconclusive, lo.Coverage = lo.Within/f, lo.Exceeds/f, lo.Inconclusive/f, lo.Coverage/f
		}
	}
	if ok > 0 {
		f := float64(ok)
		ps.SlopePower, ps.InterceptPower, ps.SlopeCoverage, ps.InterceptCoverage = ps.SlopePower/f, ps.InterceptPower/f, ps.SlopeCoverage/f, ps.InterceptCoverage/f
	}
	return ps, nil
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// draw fills x and y with one simulated study: per sample the true value,
// then the x replicates, then the y replicates, so the first n samples of a
// trial are the same for every size.
func (c *planConfig) draw(rng *rand.Rand, d Difference, x, y []float64) {
	L, H := c.o.Low, c.o.High
	for i := range x {
		var t float64
		switch c.o.Spread {
		case SpreadLogUniform:
			t = L * math.Exp(rng.Float64()*math.Log(H/L))
		case SpreadLevels:
			t = c.o.Levels[i%len(c.o.Levels)]
			rng.Float64() // keep the stream aligned with the other spreads
		default:
			t = L + rng.Float64()*(H-L)
		}
		sx := c.ex.sigma(t)
		var sum float64
		for range c.kx {
			sum += t + sx*rng.NormFloat64()
		}
		x[i] = sum / float64(c.kx)
		ty := d.Constant + (1+d.Proportional)*t
		sy := c.ey.sigma(ty)
		sum = 0
		for range c.ky {
			sum += ty + sy*rng.NormFloat64()
		}
		y[i] = sum / float64(c.ky)
	}
}

// trial fits one simulated study and records its outcome.
func (c *planConfig) trial(d Difference, x, y []float64, out *trialOut) {
	out.ok = false
	var a, b Estimate
	var at func(x0 float64) (lo, hi float64)
	switch c.o.Estimator {
	case MethodDeming, MethodWeightedDeming:
		opt := &DemingOptions{Options: Options{Confidence: c.conf}, Lambda: c.lambda}
		var f *Fit
		var err error
		if c.o.Estimator == MethodDeming {
			f, err = Deming(x, y, opt)
		} else {
			f, err = WeightedDeming(x, y, opt)
		}
		if err != nil {
			return
		}
		a, b = f.Intercept, f.Slope
		at = func(x0 float64) (float64, float64) {
			ci := f.At(x0).Bias.CI
			return ci.Lower, ci.Upper
		}
	case MethodPassingBablok:
		r, err := PassingBablok(x, y, &Options{Confidence: c.conf})
		if err != nil || r.Fit.Slope.CI.Method == "" {
			return
		}
		a, b = r.Fit.Intercept, r.Fit.Slope
		jl, err := JackknifeLines(Sample{X: x, Y: y}, []Estimator{PassingBablokEstimator{}})
		if err != nil {
			return
		}
		loo := make([]Line, len(jl))
		for i, l := range jl {
			loo[i] = l[0]
		}
		full := Line{Intercept: a.Value, Slope: b.Value}
		at = func(x0 float64) (float64, float64) {
			ci := JackknifeAt(full, loo, x0, c.conf).Bias.CI
			return ci.Lower, ci.Upper
		}
	}
	if !allFinite(a.CI.Lower, a.CI.Upper, b.CI.Lower, b.CI.Upper) {
		return
	}
	out.ok = true
	out.slopeExcl = b.CI.Lower > 1 || b.CI.Upper < 1
	out.icptExcl = a.CI.Lower > 0 || a.CI.Upper < 0
	tb := 1 + d.Proportional
	out.slopeCover = b.CI.Lower <= tb && tb <= b.CI.Upper
	out.icptCov = a.CI.Lower <= d.Constant && d.Constant <= a.CI.Upper
	for j, lv := range c.o.Decisions {
		lo, hi := at(lv.X)
		lim := lv.Limit()
		switch {
		case lo >= -lim && hi <= lim:
			out.verdict[j] = 0
		case lo > lim || hi < -lim:
			out.verdict[j] = 1
		default:
			out.verdict[j] = 2
		}
		out.half[j] = (hi - lo) / 2
		tbias := d.bias(lv.X)
		out.cover[j] = lo <= tbias && tbias <= hi
	}
}

// met says whether size n meets the target in every scenario it applies to.
func (c *planConfig) met(res *PlanResult, n int) bool {
	if c.o.TargetPower == 0 {
		return false
	}
	applies := false
	for i, d := range c.scenarios {
		var ps *PlanSize
		for k := range res.Scenarios[i].Sizes {
			if res.Scenarios[i].Sizes[k].N == n {
				ps = &res.Scenarios[i].Sizes[k]
			}
		}
		var p float64
		switch c.target {
		case TargetSlope:
			if d.Proportional == 0 {
				continue
			}
			p = ps.SlopePower
		case TargetIntercept:
			if d.Constant == 0 {
				continue
			}
			p = ps.InterceptPower
		case TargetVerdict:
			p = 1
			for _, lo := range ps.Levels {
				right := lo.Exceeds
				if math.Abs(lo.TrueBias) <= lo.Limit {
					right = lo.Within
				}
				p = math.Min(p, right)
			}
		}
		applies = true
		if p < c.o.TargetPower {
			return false
		}
	}
	return applies
}

// sentence sums the plan up: the size it speaks of is the smallest meeting
// the target, else the largest evaluated.
func (c *planConfig) sentence(res *PlanResult) string {
	sc := res.Scenarios[0]
	for _, s := range res.Scenarios {
		if s.Difference != (Difference{}) {
			sc = s
			break
		}
	}
	ps := sc.Sizes[len(sc.Sizes)-1]
	for _, s := range sc.Sizes {
		if s.N == res.SmallestN {
			ps = s
		}
	}
	u := ""
	if c.o.Units != "" {
		u = " " + c.o.Units
	}
	var b strings.Builder
	fmt.Fprintf(&b, "With %d samples over %.4g–%.4g%s %s", ps.N, c.o.Low, c.o.High, u, replicateWords(c.kx, c.ky))
	truth := "if there is no systematic difference"
	if d := sc.Difference; d != (Difference{}) {
		truth = "if the true difference is " + differenceWords(d, u)
	}
	if len(ps.Levels) > 0 {
		lo := ps.Levels[0]
		lv := c.o.Decisions[0]
		lim := fmt.Sprintf("%.4g%s", lo.Limit, u)
		if lv.AllowablePercent > 0 && lv.AllowablePercent/100*math.Abs(lv.X) >= lv.Allowable {
			lim = fmt.Sprintf("%.3g %%", lv.AllowablePercent)
		}
		v, p := VerdictWithin, lo.Within
		if math.Abs(lo.TrueBias) > lo.Limit {
			v, p = VerdictExceeds, lo.Exceeds
		}
		fmt.Fprintf(&b, ", an allowable bias of %s at %.4g%s is shown '%s' %.0f %% of the time %s", lim, lo.X, u, v, 100*p, truth)
		fmt.Fprintf(&b, " (bias interval ±%.3g%s on average)", lo.HalfWidth, u)
	} else {
		fmt.Fprintf(&b, ", %s", truth)
	}
	if sc.Difference.Proportional != 0 {
		fmt.Fprintf(&b, "; a slope different from 1 is detected %.0f %% of the time", 100*ps.SlopePower)
	} else if sc.Difference.Constant != 0 {
		fmt.Fprintf(&b, "; an intercept different from 0 is detected %.0f %% of the time", 100*ps.InterceptPower)
	}
	b.WriteString(".")
	if res.TargetPower > 0 {
		if res.SmallestN > 0 {
			fmt.Fprintf(&b, " %d samples are the fewest of those simulated that reach %.0f %% on the %s target.", res.SmallestN, 100*res.TargetPower, res.Target)
		} else {
			fmt.Fprintf(&b, " No size simulated reaches %.0f %% on the %s target.", 100*res.TargetPower, res.Target)
		}
	}
	return b.String()
}

func replicateWords(kx, ky int) string {
	w := func(k int) string {
		switch k {
		case 1:
			return "singly"
		case 2:
			return "in duplicate"
		case 3:
			return "in triplicate"
		}
		return fmt.Sprintf("in %d replicates", k)
	}
	if kx == ky {
		return "measured " + w(kx)
	}
	return fmt.Sprintf("measured %s by x and %s by y", w(kx), w(ky))
}

func differenceWords(d Difference, u string) string {
	var parts []string
	if d.Constant != 0 {
		parts = append(parts, fmt.Sprintf("%+.4g%s", d.Constant, u))
	}
	if d.Proportional != 0 {
		parts = append(parts, fmt.Sprintf("%+.3g %%", 100*d.Proportional))
	}
	return strings.Join(parts, " and ")
}
