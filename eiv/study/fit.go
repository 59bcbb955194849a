package study

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
	"time"

	"eivfit/eiv"
)

// Data holds paired measurements column-wise, as the estimators take them.
// SX, SY, R and Order are nil when the input states none; ID is nil or
// holds "" for a point without an id.
type Data struct {
	X, Y   []float64
	SX, SY []float64 // standard uncertainties (1 SD)
	R      []float64 // correlation of the x and y errors
	Order  []float64 // run order
	ID     []string
}

// Len is the number of points.
func (d *Data) Len() int { return len(d.X) }

func (d *Data) hasSigma() bool { return d.SX != nil && d.SY != nil }

// Limits bound what one study may ask for. Zero means no limit.
type Limits struct {
	MaxPoints    int // points (samples) per dataset
	MaxResamples int // bootstrap resamples per fit
	MaxAt        int // entries in "at" (decision levels)
}

// DefaultLimits serve real studies.
var DefaultLimits = Limits{MaxPoints: 1_000_000, MaxResamples: 100_000, MaxAt: 1000}

// Settings of the computation that are the server's (or the CLI's), not
// the client's.
type Settings struct {
	Limits
	// Workers for the bootstrap; zero means GOMAXPROCS.
	Workers int
	// JackknifeMaxN bounds the York jackknife and the paired jackknife of
	// the OLS comparison (each costs n refits). Zero means 2000.
	JackknifeMaxN int
	// Observe, when set, is told the time each method took (bootstrap
	// included) and the resamples it computed; the service feeds metrics.
	Observe func(method string, d time.Duration, resamples int)
}

func (s Settings) jackMax() int {
	if s.JackknifeMaxN > 0 {
		return s.JackknifeMaxN
	}
	return 2000
}

// BootstrapOptions select the bootstrap.
type BootstrapOptions struct {
	// Resamples is B; 0 means no bootstrap, else at least MinResamples.
	Resamples int
	// Seed of the resamples; nil means drawn at random (and reported).
	Seed *uint64
	// Scheme is "pairs" (the default, "") or "parametric".
	Scheme string
}

// MinResamples is the fewest resamples a bootstrap may have.
const MinResamples = 100

// FitOptions are a line fit's options; nil fields mean the documented
// defaults.
type FitOptions struct {
	// Methods to fit, by registry name. Empty means every method whose
	// Default accepts the data (passing_bablok only when asked for).
	Methods []string
	// Lambda is the error-variance ratio var(y error)/var(x error) for the
	// Deming fits. Nil means: derived from SX and SY when stated, else 1.
	Lambda *float64
	// Confidence is the level of every interval; nil means 0.95.
	Confidence *float64
	// Bootstrap, when its Resamples > 0, adds bootstrap intervals: every
	// method refitted on the same resamples, paired with OLS.
	Bootstrap *BootstrapOptions
	// At lists x values at which to predict y and the bias y − x.
	At []float64
	Settings
}

// Warning is a non-fatal diagnostic; Method is empty for the whole study.
type Warning struct {
	Method  string
	Code    string
	Message string
}

// FitResult is a line fit's answer.
type FitResult struct {
	N          int
	Confidence float64
	// Fits holds one result per method that ran, in registry order.
	Fits []*MethodResult
	// OLSBias compares OLS with each other fit (when OLS and another ran).
	OLSBias []*eiv.OLSComparison
	// Warnings are non-fatal diagnostics; never nil.
	Warnings []Warning
}

// Get returns the fit of the named method, or nil.
func (r *FitResult) Get(name string) *MethodResult { return getFit(r.Fits, name) }

// Primary returns the fit a report draws when none is named: the one of
// lowest ReportRank.
func (r *FitResult) Primary() *MethodResult { return primary(r.Fits) }

func getFit(fs []*MethodResult, name string) *MethodResult {
	for _, f := range fs {
		if f.Method.Name == name {
			return f
		}
	}
	return nil
}

func primary(fs []*MethodResult) *MethodResult {
	var best *MethodResult
	for _, f := range fs {
		if best == nil || f.Method.ReportRank < best.Method.ReportRank {
			best = f
		}
	}
	return best
}

// MethodResult is one method's line with its uncertainty.
type MethodResult struct {
	Method *Method
	// Fit is the estimator's answer; Fit.Lambda is the λ used by a Deming fit.
	Fit *eiv.Fit
	// LambdaSource says where λ came from ("given", "uncertainties",
	// "replicates" or "assumed"); empty for a method without λ.
	LambdaSource string
	// PassingBablok holds the method's own checks (passing_bablok only).
	PassingBablok *eiv.PassingBablokResult
	// Bootstrap is the bootstrap of this method, nil when none ran.
	Bootstrap *Bootstrap
	// At holds the predictions at FitOptions.At, in order.
	At []Prediction

	est     eiv.Estimator
	elapsed time.Duration
	// Passing–Bablok: its predictions come from the jackknife lines.
	pbLine eiv.Line
	pbLOO  []eiv.Line
}

// Bootstrap is a method's bootstrap: the resamples with the seed that drew
// them (drawn at random when none was given).
type Bootstrap struct {
	Result *eiv.BootstrapResult
	Seed   uint64
}

// Slopes returns the bootstrap replicates of the slope (for a histogram).
func (b *Bootstrap) Slopes() []float64 { return b.Result.Replicates(eiv.SlopeOf(0)) }

// Prediction is the fitted y and the bias y − x at one x.
type Prediction struct {
	eiv.Prediction
	// Available is false when the method gives no interval here (Passing–
	// Bablok above its jackknife limit): the estimates then have no SE and
	// no interval (an empty CI.Method).
	Available bool
	// Boot is the bootstrap interval of the fitted y (BCa, else
	// percentile), nil without a bootstrap; the bias's is Boot − X.
	Boot *eiv.Interval
	// BootSE is the bootstrap SE of the fitted y (and of the bias): the SD
	// of its replicates; zero without a bootstrap.
	BootSE float64
	// Extrapolated says X lies outside the range of the fitted x values
	// (the study then warns with WarnExtrapolated).
	Extrapolated bool
}

// WarnExtrapolated is the code of the warning given for each "at" value
// or decision level outside the range of the data's x values.
const WarnExtrapolated = "extrapolated"

// Predict returns the prediction at x0 and whether it has an interval.
func (m *MethodResult) Predict(x0 float64) (eiv.Prediction, bool) {
	if m.Method.Name != "passing_bablok" {
		return m.Fit.At(x0), true
	}
	conf := m.Fit.Confidence
	if m.pbLOO == nil {
		// No uncertainty to give: the estimates alone, no SE, no interval.
		y := m.pbLine.Intercept + m.pbLine.Slope*x0
		return eiv.Prediction{X: x0, Y: eiv.Estimate{Value: y}, Bias: eiv.Estimate{Value: y - x0}}, false
	}
	return eiv.JackknifeAt(m.pbLine, m.pbLOO, x0, conf), true
}

// Band returns the pointwise confidence band of the line at x0.
func (m *MethodResult) Band(x0 float64) (lo, hi float64, ok bool) {
	p, ok := m.Predict(x0)
	return p.Y.CI.Lower, p.Y.CI.Upper, ok
}

// Fit validates the options against d and the limits, then fits every
// requested method (Methods' defaults when none is named) with its
// predictions, bootstrap and OLS comparison. Errors are *Error or ErrorList
// (or ctx's error).
func Fit(ctx context.Context, d Data, o *FitOptions) (*FitResult, error) {
	if o == nil {
		o = &FitOptions{}
	}
	if err := CheckFit(&d, o); err != nil {
		return nil, err
	}
	n := d.Len()
	conf := confidence(o.Confidence)
	res := &FitResult{N: n, Confidence: conf, Warnings: []Warning{}}
	var methods []*Method
	if len(o.Methods) > 0 {
		for _, name := range o.Methods {
			methods = append(methods, MethodNamed(name))
		}
	} else {
		for _, m := range Methods {
			if m.Default != nil && m.Default(&d, o) {
				methods = append(methods, m)
			}
		}
		if exactAxis(&d, o) {
			res.Warnings = append(res.Warnings, Warning{Code: eiv.WarnNoUncertaintyInX, Message: "every stated uncertainty of one axis is zero, so that axis is taken as exact: the Deming fits are left out (they reduce to OLS), and york is weighted least squares"})
		}
	}
	// Report in registry order whatever order the client listed.
	slices.SortFunc(methods, func(a, b *Method) int { return a.order() - b.order() })
	if n < 10 {
		res.Warnings = append(res.Warnings, Warning{Code: eiv.WarnFewPoints, Message: fmt.Sprintf(
			"only %d points: intervals are wide and the checks of the assumptions have little power", n)})
	}
	s := eiv.Sample{X: d.X, Y: d.Y, SX: d.SX, SY: d.SY, R: d.R}
	for _, m := range methods {
		t0 := time.Now()
		p := fitParams{ctx: ctx, conf: conf, jackknife: true, jackMax: o.jackMax()}
		lsrc := ""
		if m.Name == "deming" || m.Name == "weighted_deming" {
			var err error
			if p.lambda, lsrc, err = fitLambda(m.Name, &d, o.Lambda); err != nil {
				return nil, fitError(err, m.Name, nil)
			}
		}
		r, err := m.fit(s, p)
		if err != nil {
			if ctx.Err() != nil {
				return nil, ctx.Err()
			}
			return nil, fitError(err, m.Name, nil)
		}
		r.Method, r.LambdaSource, r.elapsed = m, lsrc, time.Since(t0)
		res.Fits = append(res.Fits, r)
	}
	var err error
	res.OLSBias, err = finish(ctx, s, res.Fits, o.At, "at value", o.Bootstrap, o.Settings, &res.Warnings, nil)
	if err != nil {
		return nil, err
	}
	return res, nil
}

// The confidence levels taken. An interval at level c uses the quantiles
// at (1 ± c)/2; in double precision 1 − c must stay well above the spacing
// of numbers near 1 (2.2e-16) for the tail probability, and so the
// quantile, to mean anything: at 0.9999999999999999 the upper quantile
// probability rounds to exactly 1 and the quantile is infinite. Bounding c
// to [1e-9, 1 − 1e-9] keeps the tail probability to seven significant
// digits or better, covers every level in use (0.68 to 0.999999, about
// ±5σ), and keeps the interval from collapsing to a point at the low end.
const (
	MinConfidence = 1e-9
	MaxConfidence = 1 - 1e-9
)

// CheckConfidence says why c is not a usable confidence level, or returns
// nil. The message names no field: the caller's Source adds the JSON
// pointer, query parameter or flag.
func CheckConfidence(c float64) error {
	if !(c >= MinConfidence && c <= MaxConfidence) {
		return fmt.Errorf("confidence must lie between %g and %.9f (e.g. 0.95), not %v: closer to 0 or 1 its quantiles are not resolved in double precision",
			MinConfidence, MaxConfidence, c)
	}
	return nil
}

func confidence(c *float64) float64 {
	if c != nil {
		return *c
	}
	return eiv.DefaultConfidence
}

// fitLambda says which λ a line fit's Deming method uses, and where it
// came from: given, from the stated uncertainties, or assumed 1 (0 here;
// eiv warns).
func fitLambda(method string, d *Data, given *float64) (float64, string, error) {
	switch {
	case given != nil:
		return *given, "given", nil
	case d.hasSigma():
		var l float64
		var err error
		if method == "deming" {
			l, err = eiv.LambdaFromUncertainties(d.SX, d.SY)
		} else {
			l, err = eiv.RelativeLambdaFromUncertainties(d.X, d.Y, d.SX, d.SY)
		}
		if err != nil {
			return 0, "", &eiv.OptionError{Option: "sx, sy", Reason: "the stated uncertainties give no error-variance ratio (all zero on one axis); give lambda"}
		}
		return l, "uncertainties", nil
	}
	return 0, "assumed", nil
}

// CheckFit checks a line fit's data and options against their documented
// ranges and the limits, reporting up to 20 offending fields at once.
func CheckFit(d *Data, o *FitOptions) error {
	var c checker
	n := d.Len()
	if n == 0 {
		c.add(FieldData, -1, "points are required: at least 3 pairs of x and y")
	}
	if o.MaxPoints > 0 && n > o.MaxPoints {
		return &Error{Kind: TooLarge, Field: FieldData, Index: -1,
			Err: fmt.Errorf("%d points exceed this server's limit of %d per dataset", n, o.MaxPoints)}
	}
	for _, col := range []struct {
		name string
		v    []float64
	}{{"sx", d.SX}, {"sy", d.SY}} {
		if allNonNegative(col.v) {
			continue
		}
		for i, v := range col.v {
			if !(v >= 0) {
				c.add(col.name, i, "%s must be a standard uncertainty ≥ 0, not %g", col.name, v)
			}
		}
	}
	for i, v := range d.R {
		if !(v > -1 && v < 1) {
			c.add("r", i, "r must lie strictly between -1 and 1, not %g", v)
		}
	}
	for k, m := range o.Methods {
		switch {
		case MethodNamed(m) == nil:
			c.add("methods", k, "unknown method %q (known: %s)", truncate(m), joinNames())
		case slices.Index(o.Methods, m) < k:
			c.add("methods", k, "method %q is listed twice", m)
		}
	}
	checkCommon(&c, o.Lambda, o.Confidence, o.Bootstrap, d.hasSigma(), o.Limits)
	if o.MaxAt > 0 && len(o.At) > o.MaxAt {
		c.add("at", -1, "at most %d values in at", o.MaxAt)
	}
	return c.err()
}

// allNonNegative says whether every value of v is ≥ 0 (none NaN). A long
// column is read in two halves at once: a fit's validation runs before its
// estimators, alone on the cores, and reading σx and σy of 10⁶ points took
// 2.4 ms of the command line's run, 1.5 ms in halves.
func allNonNegative(v []float64) bool {
	part := func(v []float64) bool {
		ok := true
		for _, x := range v {
			if !(x >= 0) {
				ok = false
			}
		}
		return ok
	}
	if len(v) < 1<<16 || runtime.GOMAXPROCS(0) == 1 {
		return part(v)
	}
	var second bool
	var wg sync.WaitGroup
	wg.Go(func() { second = part(v[len(v)/2:]) })
	first := part(v[:len(v)/2])
	wg.Wait()
	return first && second
}

// checkCommon checks the options a fit and a comparison share.
func checkCommon(c *checker, lambda, conf *float64, b *BootstrapOptions, hasSigma bool, lim Limits) {
	if lambda != nil && !(*lambda > 0 && !math.IsInf(*lambda, 0)) {
		c.add("lambda", -1, "lambda (the error-variance ratio) must be a finite number greater than 0")
	}
	if conf != nil {
		if err := CheckConfidence(*conf); err != nil {
			c.add("confidence", -1, "%s", err)
		}
	}
	if b == nil {
		return
	}
	switch {
	case b.Resamples < 0:
		c.add("bootstrap/resamples", -1, "resamples must be 0 (no bootstrap) or at least %d", MinResamples)
	case b.Resamples > 0 && b.Resamples < MinResamples:
		c.add("bootstrap/resamples", -1, "resamples must be 0 (no bootstrap) or at least %d for stable intervals", MinResamples)
	case lim.MaxResamples > 0 && b.Resamples > lim.MaxResamples:
		c.add("bootstrap/resamples", -1, "resamples must not exceed this server's limit of %d", lim.MaxResamples)
	}
	switch b.Scheme {
	case "", "pairs":
	case "parametric":
		if !hasSigma {
			c.add("bootstrap/scheme", -1, "the parametric bootstrap draws around the fitted points with the stated uncertainties, so every point needs sx and sy")
		}
	default:
		c.add("bootstrap/scheme", -1, "scheme must be \"pairs\" or \"parametric\", not %q", truncate(b.Scheme))
	}
}

func joinNames() string {
	s := ""
	for i, m := range Methods {
		if i > 0 {
			s += ", "
		}
		s += m.Name
	}
	return s
}

// truncate shortens a client's string for a message.
func truncate(s string) string {
	if len(s) > 40 {
		return s[:37] + "..."
	}
	return s
}

// finish adds to each fit its predictions at the x values in at (what
// names them in the warning each one outside the range of s.X gets), its
// bootstrap (when bo asks for one; every method refitted on the same
// resamples, paired with OLS), and the OLS comparison. index maps a point
// of s to the caller's data for errors (nil: the same).
func finish(ctx context.Context, s eiv.Sample, fits []*MethodResult, at []float64, what string, bo *BootstrapOptions,
	set Settings, warnings *[]Warning, index func(int) int) ([]*eiv.OLSComparison, error) {
	n := s.Len()
	var olsBias []*eiv.OLSComparison
	olsFit := getFit(fits, "ols")
	var pairs *jackPairs // the paired leave-one-out lines, shared by the methods compared
	xlo, xhi := math.Inf(1), math.Inf(-1)
	if len(at) > 0 && n > 0 { // one pass over 10⁶ x values costs milliseconds: only when asked
		xlo, xhi = slices.Min(s.X), slices.Max(s.X)
	}
	for _, x0 := range at {
		if x0 < xlo || x0 > xhi {
			*warnings = append(*warnings, Warning{Code: WarnExtrapolated, Message: fmt.Sprintf(
				"the %s %g lies outside the range of the data's x values (%g to %g): the line is extrapolated there", what, x0, xlo, xhi)})
		}
	}
	for _, f := range fits {
		for _, w := range f.Fit.Warnings {
			*warnings = append(*warnings, warning(f.Method.Name, w))
		}
		for _, x0 := range at {
			p, ok := f.Predict(x0)
			f.At = append(f.At, Prediction{Prediction: p, Available: ok, Extrapolated: x0 < xlo || x0 > xhi})
		}
	}
	boot := bo != nil && bo.Resamples > 0
	var seed uint64
	if boot {
		seed = rand.Uint64()
		if bo.Seed != nil {
			seed = *bo.Seed
		}
	}
	for _, f := range fits {
		name := f.Method.Name
		ests := []eiv.Estimator{f.est}
		if olsFit != nil && f != olsFit {
			ests = append(ests, eiv.OLSEstimator{})
		}
		var br *eiv.BootstrapResult
		t0 := time.Now()
		if boot && name == "passing_bablok" && n > pbBootstrapMaxN {
			*warnings = append(*warnings, warning(name, &eiv.Warning{Code: eiv.WarnBootstrapSkipped, Message: fmt.Sprintf(
				"passing_bablok: no bootstrap above %d samples (each resample sorts n(n−1)/2 slopes); its rank interval is reported", pbBootstrapMaxN)}))
		} else if boot {
			var err error
			br, err = eiv.Bootstrap(ctx, s, ests, &eiv.BootstrapOptions{
				Resamples: bo.Resamples, Seed: seed, Scheme: eiv.Scheme(bo.Scheme),
				Workers: set.Workers, Confidence: f.Fit.Confidence, JackknifeMaxN: set.jackMax()})
			if err != nil {
				if ctx.Err() != nil {
					return nil, ctx.Err()
				}
				return nil, fitError(err, name, index)
			}
			f.Bootstrap = &Bootstrap{Result: br, Seed: seed}
			for _, w := range br.Warnings {
				*warnings = append(*warnings, warning(name, w))
			}
			for i, x0 := range at {
				y := func(l []eiv.Line) float64 { return l[0].Intercept + l[0].Slope*x0 }
				if sum, err := br.Summarize(y); err == nil && sum.Percentile != nil {
					iv := sum.Percentile
					if sum.BCa != nil {
						iv = sum.BCa
					}
					f.At[i].Boot, f.At[i].BootSE = iv, sum.SE
				}
			}
		}
		if set.Observe != nil {
			r := 0
			if boot {
				r = bo.Resamples
			}
			set.Observe(name, f.elapsed+time.Since(t0), r)
		}
		if olsFit == nil || f == olsFit {
			continue
		}
		var jack [][]eiv.Line
		if br == nil && n <= set.jackMax() && name != "passing_bablok" {
			// The fits' own leave-one-out lines pair up without refitting.
			if jf, jo := f.Fit.Jackknife, olsFit.Fit.Jackknife; jf != nil && jo != nil && len(jf.SlopeLOO) == n && len(jo.SlopeLOO) == n {
				if pairs == nil {
					pairs = takePairs(n)
					defer pairs.put()
				}
				jack = pairs.rows
				flat := pairs.flat
				for i := range n {
					flat[2*i] = eiv.Line{Intercept: jf.InterceptLOO[i], Slope: jf.SlopeLOO[i]}
					flat[2*i+1] = eiv.Line{Intercept: jo.InterceptLOO[i], Slope: jo.SlopeLOO[i]}
					jack[i] = flat[2*i : 2*i+2 : 2*i+2]
				}
			} else {
				jack, _ = eiv.JackknifeLines(s, ests) // nil on a degenerate sample: no interval
			}
		}
		olsBias = append(olsBias, eiv.CompareOLS(olsFit.Fit, f.Fit, s.X, s.SX, at, br, jack))
	}
	return olsBias, nil
}

// jackPairs holds the paired leave-one-out lines (the method's, then
// OLS's) that finish hands to eiv.CompareOLS, which reads them and keeps
// none: rows[i] is flat[2i:2i+2]. They go back to pairsPool once the
// comparisons are made, so a small fit allocates none of them.
type jackPairs struct {
	rows [][]eiv.Line
	flat []eiv.Line
}

var pairsPool sync.Pool

// takePairs returns pairs for n points from the pool (or new ones).
func takePairs(n int) *jackPairs {
	p, _ := pairsPool.Get().(*jackPairs)
	if p == nil {
		p = new(jackPairs)
	}
	if cap(p.rows) < n {
		p.rows, p.flat = make([][]eiv.Line, n), make([]eiv.Line, 2*n)
	}
	p.rows, p.flat = p.rows[:n], p.flat[:2*n]
	return p
}

// put returns p to the pool, unless it is large (a 10⁵-point jackknife's
// would hold 5 MB between requests).
func (p *jackPairs) put() {
	if cap(p.rows) <= 1<<12 {
		pairsPool.Put(p)
	}
}

// PassingBablokJackknifeMaxN bounds the Passing–Bablok jackknife used for its
// predictions: n refits of O(n² log n) each.
const PassingBablokJackknifeMaxN = 200

// pbBootstrapMaxN bounds the samples for which Passing–Bablok joins the bootstrap.
const pbBootstrapMaxN = 300

// passingBablok runs Passing–Bablok with its checks. Its predictions and
// bias intervals come from the jackknife (the method has no analytic
// covariance); above PassingBablokJackknifeMaxN points they are given without interval.
func passingBablok(s eiv.Sample, p fitParams) (*MethodResult, error) {
	ctx := p.ctx
	if ctx == nil {
		ctx = context.Background()
	}
	pb, err := eiv.PassingBablokContext(ctx, s.X, s.Y, &eiv.Options{Confidence: p.conf})
	if err != nil {
		return nil, err
	}
	r := &MethodResult{Fit: pb.Fit, PassingBablok: pb, est: eiv.PassingBablokEstimator{},
		pbLine: eiv.Line{Intercept: pb.Fit.Intercept.Value, Slope: pb.Fit.Slope.Value}}
	if s.Len() <= PassingBablokJackknifeMaxN {
		if jl, err := eiv.JackknifeLines(s, []eiv.Estimator{eiv.PassingBablokEstimator{}}); err == nil {
			for _, l := range jl {
				r.pbLOO = append(r.pbLOO, l[0])
			}
		}
	}
	return r, nil
}

func warning(method string, err error) Warning {
	var w *eiv.Warning
	if errors.As(err, &w) {
		return Warning{Method: method, Code: w.Code, Message: w.Message}
	}
	return Warning{Method: method, Code: "note", Message: err.Error()}
}
