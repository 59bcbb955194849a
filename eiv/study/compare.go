package study

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"
	"time"

	"eivfit/eiv"
)

// Caution is carried by every method-comparison answer and report.
const Caution = "Statistical agreement alone does not qualify a method. These results inform the decision; " +
	"the laboratory's quality system, its accreditation (e.g. ISO 15189, ISO/IEC 17025) and local regulations " +
	"decide whether the candidate method may be used."

// SignConvention states how differences are formed.
const SignConvention = "Differences and biases are y − x: candidate minus comparative method."

// Sample is one patient sample of a method comparison: one value or
// replicates per method.
type Sample struct {
	ID    string
	X, Y  []float64 // the comparative method (x) and the candidate (y)
	SX    *float64  // standard uncertainty of the sample's x value (its mean)
	SY    *float64
	Order *float64 // run order; nil means the input order
	// Runs are the run or time of each replicate (nil: none given).
	Runs *Runs
}

// Runs label a sample's replicates with their run or time: one label per
// value of X and of Y, none twice within a method. An x and a y replicate
// with equal labels are one pair, measured at the same run or time, and
// the limits for single measurements then allow the true value to change
// between runs (Bland & Altman 2007, §3). (A pointer keeps Sample small
// for the many studies without runs.)
type Runs struct {
	X, Y []string
}

// Samples are a method-comparison study's data.
type Samples []Sample

// DecisionLevel is an x value at which bias is judged, with an optional
// allowable bias of its own.
type DecisionLevel struct {
	Level     float64
	Allowable *Allowable
}

// Allowable is an allowable bias: absolute (units of x), percent of the
// level, or both, in which case the larger limit applies (common practice,
// "±a or ±p %, whichever is greater").
type Allowable struct {
	Absolute *float64
	Percent  *float64
}

// CompareOptions are a method comparison's options; nil and zero fields
// mean the documented defaults.
type CompareOptions struct {
	// DecisionLevels are the x values at which bias is judged.
	DecisionLevels []DecisionLevel
	// Allowable applies to every level that has none of its own.
	Allowable *Allowable
	// ErrorModel is "constant", "proportional" or "auto" ("": from the
	// replicates, else constant).
	ErrorModel string
	// Lambda is Deming's error-variance ratio; nil means from the
	// replicates, else the stated uncertainties, else 1.
	Lambda *float64
	// Confidence is the level of every interval; nil means 0.95.
	Confidence *float64
	Bootstrap  *BootstrapOptions
	// Exclude lists sample ids to leave out; the answer then holds the
	// analysis with and without them.
	Exclude []string
	// Unit names the unit of the measurand in sentences (may be empty).
	Unit string
	Settings
}

// Comparison is one analysis of a method-comparison study.
type Comparison struct {
	N int
	// Excluded lists the ids left out (WithoutExcluded only).
	Excluded   []string
	Confidence float64
	// Replicates says whether any sample has replicates.
	Replicates bool
	// Data holds the replicate means the fits used, with SX, SY, Order
	// and ID per sample (Order: run order, the input order when none given).
	Data       Data
	ErrorModel ErrorModel
	// Fits holds one result per method, in registry order.
	Fits           []*MethodResult
	OLSBias        []*eiv.OLSComparison
	Agreement      *Agreement
	DecisionLevels []LevelResult
	// Outcome sums up the recommended fit's verdicts over the decision
	// levels (nil when no level has an allowable bias).
	Outcome *Outcome
	// Robustness says whether each level's verdict holds under every fit
	// the data allow and without the flagged outliers (nil when no level
	// has an allowable bias).
	Robustness     *Robustness
	Diagnostics    *Diagnostics
	Recommendation Recommendation
	Warnings       []Warning
	// WithoutExcluded is the same analysis without the samples named in
	// CompareOptions.Exclude (nil when none were excluded).
	WithoutExcluded *Comparison
}

// Get returns the fit of the named method, or nil.
func (c *Comparison) Get(name string) *MethodResult { return getFit(c.Fits, name) }

// Primary returns the fit a report draws: the recommended one.
func (c *Comparison) Primary() *MethodResult {
	if f := c.Get(c.Recommendation.Method); f != nil {
		return f
	}
	return primary(c.Fits)
}

// ErrorModel is the error model used for the Deming fits.
type ErrorModel struct {
	Model  string // "constant" or "proportional"
	Source string // "given", "replicates" or "assumed"
	// Lambda is the λ of the fit that matches the model, with its source
	// ("given", "replicates", "uncertainties" or "assumed").
	Lambda       float64
	LambdaSource string
	// X and Y are the replicate precisions (nil without enough replicates).
	X, Y    *eiv.Repeatability
	Reading string
}

// Agreement is the Bland–Altman analysis with its reading.
type Agreement struct {
	// Agreement holds the limits of agreement of the samples' values (the
	// means of their replicates when there are replicates).
	*eiv.Agreement
	// Describes says what those limits describe: single measurements
	// (every sample measured once by each method) or the means of the
	// replicates, which are narrower than the limits for single measurements.
	Describes eiv.LimitsOf
	// Percent is the agreement in percent of the level (positive data only).
	Percent *eiv.Agreement
	// ProportionalReading reads the regression of differences on means.
	ProportionalReading string
	AgreementForms
}

// LevelResult is the bias at one decision level under each fit.
type LevelResult struct {
	Level float64
	// Extrapolated says the level lies outside the range of the samples' x
	// values: its biases rest on the line's extension beyond the data.
	Extrapolated bool
	// Allowable is the allowable bias applied here, nil when none; Limit
	// is then max(absolute, percent·level/100), in units of x.
	Allowable *Allowable
	Limit     float64
	Fits      []LevelFit
}

// LevelFit is one fit's bias at a level with its verdict.
type LevelFit struct {
	Method *Method
	// At is the fit's prediction at the level (its Bias is y − x).
	At *Prediction
	// Bias is the bias the verdict judges: At's bias, except for
	// Passing–Bablok with a bootstrap, whose interval is then the bootstrap
	// interval (BCa, else percentile) rather than the jackknife's (see the
	// README: the jackknife interval covers too rarely).
	Bias eiv.Estimate
	// BiasPercent is the bias in percent of the level (zero at level 0;
	// without an interval where the bias has none).
	BiasPercent eiv.Estimate
	// Verdict is "within" (the whole interval inside ±limit), "exceeds"
	// (the whole interval outside), or "inconclusive" (it straddles the
	// limit); empty when no allowable bias applies.
	Verdict string
}

// Recommendation says which fit to report and why.
type Recommendation struct {
	Method  string
	Reasons []string
	Text    string
}

// CheckCompare checks a study's samples and options against their
// documented ranges and the limits.
func CheckCompare(samples Samples, o *CompareOptions) error {
	var c checker
	n := len(samples)
	if n == 0 {
		c.add(FieldData, -1, "samples are required: at least 3, typically 40 to 120 spanning the measuring interval")
	}
	if o.MaxPoints > 0 && n > o.MaxPoints {
		return &Error{Kind: TooLarge, Field: FieldData, Index: -1,
			Err: fmt.Errorf("%d samples exceed this server's limit of %d", n, o.MaxPoints)}
	}
	var nsx, nsy, nord, nruns int
	ids := map[string]bool{}
	for i, s := range samples {
		if s.Runs != nil {
			nruns++
			checkRuns(&c, i, "x_runs", s.Runs.X, len(s.X))
			checkRuns(&c, i, "y_runs", s.Runs.Y, len(s.Y))
		}
		for _, col := range []struct {
			name string
			v    *float64
			cnt  *int
		}{{"sx", s.SX, &nsx}, {"sy", s.SY, &nsy}, {"order", s.Order, &nord}} {
			if col.v != nil {
				*col.cnt++
				if col.name != "order" && !(*col.v >= 0) {
					c.add(col.name, i, "%s must be a standard uncertainty ≥ 0, not %g", col.name, *col.v)
				}
			}
		}
		if s.ID != "" {
			ids[s.ID] = true
		}
	}
	for _, col := range []struct {
		name string
		cnt  int
		has  func(Sample) bool
	}{{"sx", nsx, func(s Sample) bool { return s.SX != nil }}, {"sy", nsy, func(s Sample) bool { return s.SY != nil }},
		{"order", nord, func(s Sample) bool { return s.Order != nil }},
		{"runs", nruns, func(s Sample) bool { return s.Runs != nil }}} {
		if col.cnt > 0 && col.cnt < n {
			i := slices.IndexFunc(samples, func(s Sample) bool { return !col.has(s) })
			c.add(col.name, i, "%s is given for some samples but missing here: give it for every sample or none", col.name)
		}
	}
	if (nsx > 0) != (nsy > 0) {
		c.add("sx", 0, "sx and sy go together: York's fit needs both")
	}
	switch o.ErrorModel {
	case "", "auto", "constant", "proportional":
	default:
		c.add("error_model", -1, "error_model must be constant, proportional or auto, not %q", truncate(o.ErrorModel))
	}
	checkAllowable := func(a *Allowable, field string) {
		if a == nil {
			return
		}
		if a.Absolute == nil && a.Percent == nil {
			c.add(field, -1, "give absolute, percent or both")
		}
		if a.Absolute != nil && !(*a.Absolute >= 0) {
			c.add(field+"/absolute", -1, "the allowable bias must be ≥ 0")
		}
		if a.Percent != nil && !(*a.Percent >= 0) {
			c.add(field+"/percent", -1, "the allowable bias must be ≥ 0")
		}
	}
	checkAllowable(o.Allowable, "allowable_bias")
	if o.MaxAt > 0 && len(o.DecisionLevels) > o.MaxAt {
		c.add("decision_levels", -1, "at most %d decision levels", o.MaxAt)
	}
	for k, l := range o.DecisionLevels {
		checkAllowable(l.Allowable, fmt.Sprintf("decision_levels/%d/allowable_bias", k))
	}
	for k, id := range o.Exclude {
		if !ids[id] {
			c.add("exclude", k, "no sample has the id %q", truncate(id))
		}
	}
	// The lambda, confidence and bootstrap checks come after the samples',
	// as the answer has always listed them.
	checkCommonAfter(&c, o, nsx > 0 && nsy > 0)
	return c.err()
}

// checkRuns checks one method's run labels of sample i: one per value,
// none twice.
func checkRuns(c *checker, i int, field string, runs []string, values int) {
	if len(runs) != values {
		c.add(field, i, "%s needs one run label per replicate value: %d labels for %d values", field, len(runs), values)
		return
	}
	for k, r := range runs {
		if slices.Contains(runs[:k], r) {
			c.add(field, i, "run %q appears twice: each replicate of a method needs its own run", truncate(r))
			return
		}
	}
}

func checkCommonAfter(c *checker, o *CompareOptions, hasSigma bool) {
	checkCommon(c, o.Lambda, o.Confidence, o.Bootstrap, hasSigma, o.Limits)
}

// reduced is a study's data reduced to one value per method and sample.
type reduced struct {
	Data
	idx        []int // index into the caller's samples
	kx, ky     []int
	repX, repY [][]float64
	// pairs holds each sample's x and y replicates paired by equal run
	// labels (nil without runs).
	pairs      []eiv.Subject
	hasOrder   bool
	replicates bool
}

func reduce(samples Samples, skip map[string]bool) *reduced {
	st := &reduced{}
	for i, s := range samples {
		if skip[s.ID] && s.ID != "" {
			continue
		}
		st.idx = append(st.idx, i)
		st.ID = append(st.ID, s.ID)
		st.X = append(st.X, mean(s.X))
		st.Y = append(st.Y, mean(s.Y))
		st.kx = append(st.kx, len(s.X))
		st.ky = append(st.ky, len(s.Y))
		st.repX = append(st.repX, s.X)
		st.repY = append(st.repY, s.Y)
		if s.Runs != nil {
			st.pairs = append(st.pairs, pairByRun(s))
		}
		if len(s.X) > 1 || len(s.Y) > 1 {
			st.replicates = true
		}
		if s.SX != nil && s.SY != nil {
			st.SX = append(st.SX, *s.SX)
			st.SY = append(st.SY, *s.SY)
		}
		o := float64(i + 1)
		if s.Order != nil {
			o, st.hasOrder = *s.Order, true
		}
		st.Order = append(st.Order, o)
	}
	if len(st.SX) != len(st.X) {
		st.SX, st.SY = nil, nil
	}
	return st
}

// pairByRun pairs a sample's x and y replicates with equal run labels, in
// the order of the x replicates; a replicate without its partner is left out.
func pairByRun(s Sample) eiv.Subject {
	var p eiv.Subject
	for i, r := range s.Runs.X {
		if j := slices.Index(s.Runs.Y, r); j >= 0 {
			p.X = append(p.X, s.X[i])
			p.Y = append(p.Y, s.Y[j])
		}
	}
	return p
}

func mean(v []float64) float64 {
	var s float64
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

// Compare checks the samples and options, then runs the whole
// method-comparison study: the error model and λ, every fit with its
// predictions at the decision levels, the agreement, the verdicts, the
// checks of the assumptions and the recommendation; once more without the
// excluded samples when some are named. Errors are *Error or ErrorList (or
// ctx's error); a data point's Index is its index in samples.
func Compare(ctx context.Context, samples Samples, o *CompareOptions) (*Comparison, error) {
	if o == nil {
		o = &CompareOptions{}
	}
	if err := CheckCompare(samples, o); err != nil {
		return nil, err
	}
	all, err := analyse(ctx, reduce(samples, nil), o)
	if err != nil {
		return nil, err
	}
	if len(o.Exclude) > 0 {
		skip := map[string]bool{}
		for _, id := range o.Exclude {
			skip[id] = true
		}
		without, err := analyse(ctx, reduce(samples, skip), o)
		if err != nil {
			return nil, err
		}
		without.Excluded = slices.Clone(o.Exclude)
		all.WithoutExcluded = without
	}
	return all, nil
}

func analyse(ctx context.Context, st *reduced, o *CompareOptions) (*Comparison, error) {
	n := st.Len()
	conf := confidence(o.Confidence)
	c := &Comparison{N: n, Confidence: conf, Replicates: st.replicates, Data: st.Data, Warnings: []Warning{}}
	index := func(i int) int {
		if i >= 0 && i < len(st.idx) {
			return st.idx[i]
		}
		return -1
	}
	fail := func(m string, err error) error {
		e := fitError(err, m, index)
		if e.Field == FieldMethod || e.Index < 0 && e.Field != FieldData && e.Kind == Unfittable {
			e.Field = FieldData // a comparison names no methods: the samples are at fault
		}
		return e
	}
	if n < 3 {
		return nil, fail("study", eiv.ErrTooFewPoints)
	}
	if n < 40 {
		c.Warnings = append(c.Warnings, Warning{Code: eiv.WarnFewPoints, Message: fmt.Sprintf(
			"%d samples: method comparisons usually need at least 40 spanning the measuring interval (common practice)", n)})
	}
	em, err := errorModel(st, o, c)
	if err != nil {
		return nil, fail("error model", err)
	}
	c.ErrorModel = em.ErrorModel
	positive := allPositive(st.X) && allPositive(st.Y)

	s := eiv.Sample{X: st.X, Y: st.Y, SX: st.SX, SY: st.SY}
	for _, m := range Methods {
		p := fitParams{ctx: ctx, conf: conf, jackMax: o.jackMax()}
		lsrc := ""
		switch m.Name {
		case "deming":
			p.lambda, lsrc = em.lambdaConst, em.lsrcConst
		case "weighted_deming":
			if !positive {
				continue
			}
			p.lambda, lsrc = em.lambdaRel, em.lsrcRel
		case "york":
			if st.SX == nil {
				continue
			}
		}
		t0 := time.Now()
		r, err := m.fit(s, p)
		if err != nil {
			if ctx.Err() != nil {
				return nil, ctx.Err()
			}
			return nil, fail(m.Name, err)
		}
		r.Method, r.LambdaSource, r.elapsed = m, lsrc, time.Since(t0)
		if lsrc != "" {
			// λ as the error model chose it, not the default 1 Deming assumes.
			r.Fit.Warnings = slices.DeleteFunc(r.Fit.Warnings, func(w error) bool {
				ww, ok := w.(*eiv.Warning)
				return ok && ww.Code == eiv.WarnLambdaAssumed
			})
		}
		c.Fits = append(c.Fits, r)
	}
	levels := make([]float64, len(o.DecisionLevels))
	for i, l := range o.DecisionLevels {
		levels[i] = l.Level
	}
	c.OLSBias, err = finish(ctx, s, c.Fits, levels, "decision level", o.Bootstrap, o.Settings, &c.Warnings, index)
	if err != nil {
		return nil, err
	}
	if c.Agreement, err = agreement(st.X, st.Y, conf, positive); err != nil {
		return nil, fail("agreement", err)
	}
	c.Agreement.forms(st, conf, positive, o.Unit, &c.Warnings)
	c.DecisionLevels = judge(o, c.Fits, st.X)
	// Diagnostics on the residuals of the fit that matches the error model.
	diag := c.Get("deming")
	if wd := c.Get("weighted_deming"); em.Model == string(eiv.ErrorProportional) && wd != nil {
		diag = wd
	}
	cusum := c.Get("passing_bablok").PassingBablok.Cusum
	c.Diagnostics = diagnose(st, diag.Fit, diag.Method.Name, em.Model, &cusum, em.X, em.Y)
	c.Recommendation = recommend(c, positive)
	c.Outcome = outcome(c, o.Unit)
	if c.Robustness, err = robustness(ctx, st, em, o, c, positive); err != nil {
		return nil, err
	}
	pbJackknifeWarning(c)
	return c, nil
}

// modelChoice is the resolved error model with the λ for each Deming fit.
type modelChoice struct {
	ErrorModel
	lambdaConst, lambdaRel float64
	lsrcConst, lsrcRel     string
}

func errorModel(st *reduced, o *CompareOptions, c *Comparison) (*modelChoice, error) {
	mc := &modelChoice{}
	var rx, ry *eiv.Repeatability
	if st.replicates {
		var err1, err2 error
		rx, err1 = eiv.ReplicatePrecision(st.repX)
		ry, err2 = eiv.ReplicatePrecision(st.repY)
		if err1 != nil || err2 != nil {
			rx, ry = nil, nil
			c.Warnings = append(c.Warnings, Warning{Code: "replicates_insufficient", Message: "too few samples have replicates of both methods (at least 3 each) to estimate their precision"})
		}
	}
	model := o.ErrorModel
	mc.Source = "given"
	if model == "" || model == "auto" {
		switch {
		case rx != nil:
			mc.Source = "replicates"
			model = string(eiv.ErrorConstant)
			if rx.Model == eiv.ErrorProportional || ry.Model == eiv.ErrorProportional {
				model = string(eiv.ErrorProportional)
			}
		default:
			mc.Source, model = "assumed", string(eiv.ErrorConstant)
		}
	}
	mc.Model = model
	// Mean variance of a sample mean: s²·mean(1/k).
	invK := func(k []int) float64 {
		var s float64
		for _, v := range k {
			s += 1 / float64(v)
		}
		return s / float64(len(k))
	}
	switch {
	case o.Lambda != nil:
		mc.lambdaConst, mc.lambdaRel = *o.Lambda, *o.Lambda
		mc.lsrcConst, mc.lsrcRel = "given", "given"
	case rx != nil:
		mc.lambdaConst = ry.SD * ry.SD * invK(st.ky) / (rx.SD * rx.SD * invK(st.kx))
		mc.lambdaRel = ry.CV * ry.CV * invK(st.ky) / (rx.CV * rx.CV * invK(st.kx))
		mc.lsrcConst, mc.lsrcRel = "replicates", "replicates"
		if !(mc.lambdaConst > 0) || math.IsInf(mc.lambdaConst, 0) || !(mc.lambdaRel > 0) || math.IsInf(mc.lambdaRel, 0) {
			return nil, fmt.Errorf("%w: the replicates show no scatter in one method, so λ cannot be estimated; give lambda", eiv.ErrDegenerate)
		}
	case st.SX != nil:
		var err error
		if mc.lambdaConst, err = eiv.LambdaFromUncertainties(st.SX, st.SY); err != nil {
			return nil, &eiv.OptionError{Option: "sx, sy", Reason: "the stated uncertainties give no error-variance ratio (all zero for one method); give lambda"}
		}
		mc.lambdaRel = mc.lambdaConst
		if allPositive(st.X) && allPositive(st.Y) {
			if l, err := eiv.RelativeLambdaFromUncertainties(st.X, st.Y, st.SX, st.SY); err == nil {
				mc.lambdaRel = l
			}
		}
		mc.lsrcConst, mc.lsrcRel = "uncertainties", "uncertainties"
	default:
		mc.lambdaConst, mc.lambdaRel = 1, 1
		mc.lsrcConst, mc.lsrcRel = "assumed", "assumed"
		c.Warnings = append(c.Warnings, Warning{Code: eiv.WarnLambdaAssumed, Message: "no replicates, uncertainties or lambda were given, so equal error variances (λ = 1) were assumed for Deming; measure in duplicate, or give lambda, to base λ on data"})
	}
	mc.Lambda, mc.LambdaSource = mc.lambdaConst, mc.lsrcConst
	if model == string(eiv.ErrorProportional) {
		mc.Lambda, mc.LambdaSource = mc.lambdaRel, mc.lsrcRel
	}
	if rx != nil {
		mc.X, mc.Y = rx, ry
	}
	switch mc.Source {
	case "replicates":
		mc.Reading = fmt.Sprintf("From the replicates: repeatability SD %.3g (CV %.2g %%) for x and %.3g (CV %.2g %%) for y; the error is %s over the range.",
			rx.SD, 100*rx.CV, ry.SD, 100*ry.CV, map[string]string{"constant": "roughly constant", "proportional": "growing with the level (proportional)"}[model])
	case "given":
		mc.Reading = "The error model was given as " + model + "."
	default:
		mc.Reading = "Without replicates the error model is assumed constant; duplicate measurements would show whether it grows with the level."
	}
	return mc, nil
}

// AgreementOf is the Bland–Altman analysis of y against x; with positive
// it adds the agreement in percent of the level.
func AgreementOf(x, y []float64, conf float64, positive bool) (*Agreement, error) {
	return agreement(x, y, conf, positive)
}

func agreement(x, y []float64, conf float64, positive bool) (*Agreement, error) {
	opt := &eiv.Options{Confidence: conf}
	ag, err := eiv.BlandAltman(x, y, 0, opt)
	if err != nil {
		return nil, err
	}
	out := &Agreement{Agreement: ag, ProportionalReading: "The differences could not be regressed on the level (the means do not vary)."}
	if ag.Proportional != nil {
		if ag.ProportionalP < 0.05 {
			out.ProportionalReading = fmt.Sprintf("The differences change with the level (slope %.3g, p = %.2g): a proportional bias.", ag.Proportional.Slope.Value, ag.ProportionalP)
		} else {
			out.ProportionalReading = fmt.Sprintf("No evidence that the differences change with the level (p = %.2g).", ag.ProportionalP)
		}
	}
	if positive {
		if p, err := eiv.BlandAltmanPercent(x, y, 0, opt); err == nil {
			out.Percent = p
		}
	}
	return out, nil
}

// judge judges the bias at each decision level against its allowable bias.
func judge(o *CompareOptions, fits []*MethodResult, x []float64) []LevelResult {
	var out []LevelResult
	xlo, xhi := math.Inf(1), math.Inf(-1)
	for _, v := range x {
		xlo, xhi = math.Min(xlo, v), math.Max(xhi, v)
	}
	for i, l := range o.DecisionLevels {
		lo := LevelResult{Level: l.Level, Allowable: l.Allowable, Extrapolated: l.Level < xlo || l.Level > xhi}
		if lo.Allowable == nil {
			lo.Allowable = o.Allowable
		}
		if a := lo.Allowable; a != nil {
			if a.Absolute != nil {
				lo.Limit = *a.Absolute
			}
			if a.Percent != nil {
				lo.Limit = math.Max(lo.Limit, *a.Percent*math.Abs(l.Level)/100)
			}
		}
		for _, f := range fits {
			at := &f.At[i]
			b := at.Bias
			if f.Method.Name == "passing_bablok" && at.Boot != nil {
				// The interval is the bootstrap's: so is the SE beside it.
				b.SE = at.BootSE
				b.CI = eiv.Interval{Lower: at.Boot.Lower - l.Level, Upper: at.Boot.Upper - l.Level, Level: at.Boot.Level,
					Method: "bootstrap " + at.Boot.Method}
			}
			lf := LevelFit{Method: f.Method, At: at, Bias: b}
			if l.Level != 0 {
				k := 100 / l.Level
				lf.BiasPercent = eiv.Estimate{Value: b.Value * k, SE: b.SE * math.Abs(k)}
				if b.CI.Method != "" {
					lf.BiasPercent.CI = eiv.Interval{Lower: math.Min(b.CI.Lower*k, b.CI.Upper*k), Upper: math.Max(b.CI.Lower*k, b.CI.Upper*k), Level: b.CI.Level, Method: b.CI.Method}
				}
			}
			if lo.Allowable != nil {
				lf.Verdict = verdict(b.CI, lo.Limit)
			}
			lo.Fits = append(lo.Fits, lf)
		}
		out = append(out, lo)
	}
	return out
}

// recommend picks the fit to report from the diagnostics (Linnet 1993's
// and Passing & Bablok's guidance, common practice): outliers or
// non-normal residuals favour Passing–Bablok; otherwise the error model
// decides between Deming and weighted Deming; stated per-sample
// uncertainties that the scatter bears out favour York.
func recommend(c *Comparison, positive bool) Recommendation {
	d := c.Diagnostics
	var reasons []string
	nonNormal := d.ShapiroWilk != nil && d.ShapiroWilk.PValue < 0.05
	outliers := len(d.Outliers) > 0
	var tau *eiv.TestResult
	if pb := c.Get("passing_bablok"); pb != nil {
		tau = &pb.PassingBablok.Kendall
	}
	pbOK := tau != nil && tau.Statistic > 0 && tau.PValue < 0.05
	york := c.Get("york")
	method := "deming"
	switch {
	case (nonNormal || outliers) && pbOK:
		method = "passing_bablok"
		if outliers {
			reasons = append(reasons, fmt.Sprintf("%d sample(s) were flagged as outliers, which pull least-squares fits but hardly move Passing–Bablok's median slope", len(d.Outliers)))
		}
		if nonNormal {
			reasons = append(reasons, "the residuals are not normal, and Passing–Bablok does not assume a distribution")
		}
		reasons = append(reasons, fmt.Sprintf("Kendall's τ = %.2f confirms the positive correlation Passing–Bablok needs", tau.Statistic))
	case york != nil && york.Fit.PValue >= 0.05:
		method = "york"
		reasons = append(reasons, fmt.Sprintf("per-sample uncertainties were stated and the scatter agrees with them (MSWD = %.2f, p = %.2g)", york.Fit.MSWD, york.Fit.PValue))
	case c.ErrorModel.Model == string(eiv.ErrorProportional) && positive:
		method = "weighted_deming"
		reasons = append(reasons, "the error grows with the level, so weighted Deming gives the low values their due weight")
	default:
		reasons = append(reasons, "the error is roughly constant over the range, the case Deming regression models")
	}
	if c.ErrorModel.LambdaSource == "assumed" && method != "passing_bablok" {
		reasons = append(reasons, "λ was assumed to be 1; replicate measurements would put it on data")
	}
	if d.Cusum != nil && !d.Cusum.Linear {
		reasons = append(reasons, "but the relation is not linear over the whole range: no straight line describes it well")
	} else if d.LackOfFit != nil && d.LackOfFit.PValue < 0.05 {
		reasons = append(reasons, "note that the samples scatter about the line more than the replicates explain, so sample-specific differences add to the bias at any one sample")
	}
	if d.DurbinWatson != nil && d.DurbinWatson.PValue < 0.05 {
		reasons = append(reasons, "the residuals drift in run order, so the intervals may be too narrow")
	}
	return Recommendation{Method: method, Reasons: reasons,
		Text: fmt.Sprintf("Report the %s fit: %s.", MethodNamed(method).Display, strings.Join(reasons, "; "))}
}

// verdict judges a bias interval against ±lim: "within" (the whole
// interval inside), "exceeds" (the whole interval outside), else
// "inconclusive"; "" without an interval (no interval, no verdict).
func verdict(ci eiv.Interval, lim float64) string {
	switch {
	case ci.Method == "":
		return ""
	case ci.Lower >= -lim && ci.Upper <= lim:
		return eiv.VerdictWithin
	case ci.Lower > lim || ci.Upper < -lim:
		return eiv.VerdictExceeds
	}
	return eiv.VerdictInconclusive
}
