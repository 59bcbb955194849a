package api

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"

	"eivfit/eiv"
)

// Caution is carried by every method-comparison answer and report.
const Caution = "Statistical agreement alone does not qualify a method. These results inform the decision; " +
	"the laboratory's quality system, its accreditation (e.g. ISO 15189, ISO/IEC 17025) and local regulations " +
	"decide whether the candidate method may be used."

// SignConvention states how differences are formed.
const SignConvention = "Differences and biases are y − x: candidate minus comparative method."

// CompareResponse is the answer of POST /v1/method-comparison and of
// `eivfit compare --format json`.
type CompareResponse struct {
	XName          string `json:"x_name"`
	YName          string `json:"y_name"`
	Unit           string `json:"unit,omitempty"`
	SignConvention string `json:"sign_convention"`
	Comparison
	// WithoutExcluded is the same analysis without the samples named in
	// "exclude" (present only when some were excluded).
	WithoutExcluded *Comparison `json:"without_excluded,omitempty"`
	Caution         string      `json:"caution"`
}

// Comparison is one analysis of a study.
type Comparison struct {
	N          int      `json:"n"`
	Excluded   []string `json:"excluded,omitempty"`
	Confidence float64  `json:"confidence"`
	// Replicates says whether any sample has replicates.
	Replicates     bool            `json:"replicates"`
	ErrorModel     ErrorModelOut   `json:"error_model"`
	Fits           Fits            `json:"fits"`
	OLSBias        []OLSBias       `json:"ols_bias,omitempty"`
	Agreement      AgreementOut    `json:"agreement"`
	DecisionLevels []LevelOut      `json:"decision_levels,omitempty"`
	Diagnostics    DiagnosticsOut  `json:"diagnostics"`
	Recommendation RecommendationO `json:"recommendation"`
	Warnings       []Warning       `json:"warnings"`
}

// ErrorModelOut describes the error model used for the Deming fits.
type ErrorModelOut struct {
	Model        string            `json:"model"`  // "constant" or "proportional"
	Source       string            `json:"source"` // "given", "replicates" or "assumed"
	Lambda       float64           `json:"lambda"`
	LambdaSource string            `json:"lambda_source"` // "given", "replicates", "uncertainties" or "assumed"
	X            *RepeatabilityOut `json:"x_repeatability,omitempty"`
	Y            *RepeatabilityOut `json:"y_repeatability,omitempty"`
	Reading      string            `json:"reading"`
}

// RepeatabilityOut is one method's replicate precision.
type RepeatabilityOut struct {
	SD    float64 `json:"sd"`
	CV    float64 `json:"cv"`
	DF    int     `json:"df"`
	Trend TestOut `json:"sd_trend"` // Spearman's ρ of per-sample SD with level
	Model string  `json:"model"`
}

// AgreementOut is the Bland–Altman analysis.
type AgreementOut struct {
	MeanDifference    Interval        `json:"mean_difference"`
	SDDifference      float64         `json:"sd_difference"`
	Multiplier        float64         `json:"multiplier"`
	LimitsOfAgreement LimitsOut       `json:"limits_of_agreement"`
	Percent           *PercentOut     `json:"percent,omitempty"`
	ProportionalBias  ProportionalOut `json:"proportional_bias"`
}

// LimitsOut holds the limits of agreement with their intervals.
type LimitsOut struct {
	Lower Interval `json:"lower"`
	Upper Interval `json:"upper"`
}

// PercentOut is the agreement of the differences in percent of the level.
type PercentOut struct {
	MeanDifference    Interval  `json:"mean_difference"`
	SDDifference      float64   `json:"sd_difference"`
	LimitsOfAgreement LimitsOut `json:"limits_of_agreement"`
}

// ProportionalOut is the regression of differences on means; the line and
// its p-value are absent when the means do not vary (the reading says so).
type ProportionalOut struct {
	Slope     *Param   `json:"slope,omitempty"`
	Intercept *Param   `json:"intercept,omitempty"`
	PValue    *float64 `json:"p_value,omitempty"`
	Reading   string   `json:"reading"`
}

// LevelOut is the bias at one decision level under each fit.
type LevelOut struct {
	Level float64 `json:"level"`
	// Allowable is the limit applied here, when one was given.
	Allowable *AllowableOut       `json:"allowable_bias,omitempty"`
	Fits      map[string]LevelFit `json:"fits"`
}

// pctText prints a bias in percent for a report, "-" at level 0 where
// it has none.
func pctText(iv *Interval) string {
	if iv == nil {
		return "-"
	}
	return g(iv.Estimate)
}

// AllowableOut is the allowable bias at a level.
type AllowableOut struct {
	Absolute *float64 `json:"absolute,omitempty"`
	Percent  *float64 `json:"percent,omitempty"`
	Limit    float64  `json:"limit"` // max(absolute, percent·level/100), units of x
}

// LevelFit is one fit's bias at a level with its verdict.
type LevelFit struct {
	Bias Interval `json:"bias"`
	// BiasPercent is the bias in percent of the level (absent at level 0).
	BiasPercent *Interval `json:"bias_percent,omitempty"`
	// Verdict is "within" (the whole interval inside ±limit), "exceeds"
	// (the whole interval outside), or "inconclusive" (it straddles the
	// limit); empty when no allowable bias applies.
	Verdict string `json:"verdict,omitempty"`
}

// DiagnosticsOut checks the assumptions on the residuals of one fit.
type DiagnosticsOut struct {
	ResidualsOf  string          `json:"residuals_of"`
	Scale        string          `json:"scale"` // "absolute", "relative" or "normalized" (York: in units of the stated SD)
	Normality    NormalityOut    `json:"normality"`
	Independence IndependenceOut `json:"independence"`
	Variance     VarianceOut     `json:"variance"`
	Linearity    LinearityOut    `json:"linearity"`
	Outliers     OutliersOut     `json:"outliers"`
	// Residuals are the residuals in input order, with the level and run order used.
	Residuals []ResidualOut `json:"residuals"`
}

// ResidualOut is one sample's residual.
type ResidualOut struct {
	ID       string  `json:"id,omitempty"`
	Level    float64 `json:"level"`
	Order    float64 `json:"order"`
	Residual float64 `json:"residual"`
	// Standardized is the residual over the residuals' SD.
	Standardized float64 `json:"standardized"`
}

// NormalityOut is the Shapiro–Wilk test with the Q-Q points.
type NormalityOut struct {
	ShapiroWilk *TestOut `json:"shapiro_wilk,omitempty"`
	QQ          []QQOut  `json:"qq"`
	Reading     string   `json:"reading"`
}

// QQOut is one point of the normal Q-Q plot.
type QQOut struct {
	Theoretical float64 `json:"theoretical"`
	Sample      float64 `json:"sample"`
	ID          string  `json:"id,omitempty"`
}

// IndependenceOut holds the run-order checks.
type IndependenceOut struct {
	OrderSource  string   `json:"order_source"` // "order" or "input"
	DurbinWatson *TestOut `json:"durbin_watson,omitempty"`
	Runs         *TestOut `json:"runs,omitempty"`
	Reading      string   `json:"reading"`
}

// VarianceOut holds the checks of constant variance.
type VarianceOut struct {
	BreuschPagan *TestOut `json:"breusch_pagan,omitempty"`
	Spearman     *TestOut `json:"spearman_abs_residual,omitempty"`
	Reading      string   `json:"reading"`
}

// LinearityOut holds the checks of a straight line.
type LinearityOut struct {
	Cusum     *CusumOut `json:"cusum,omitempty"`
	LackOfFit *TestOut  `json:"lack_of_fit,omitempty"`
	Reading   string    `json:"reading"`
}

// OutliersOut lists the flagged samples; none is dropped.
type OutliersOut struct {
	Method    string       `json:"method"`
	MaxTested int          `json:"max_tested"`
	Flagged   []OutlierOut `json:"flagged"`
	Reading   string       `json:"reading"`
}

// OutlierOut is one flagged sample.
type OutlierOut struct {
	ID       string  `json:"id,omitempty"`
	Index    int     `json:"index"`
	Residual float64 `json:"residual"`
	R        float64 `json:"r"`
	Lambda   float64 `json:"lambda"`
}

// RecommendationO says which fit to report and why.
type RecommendationO struct {
	Method  string   `json:"method"`
	Reasons []string `json:"reasons"`
	Text    string   `json:"text"`
}

// Validate checks the request against its documented ranges and the limits.
func (req *CompareRequest) Validate(lim Limits) error {
	var errs []FieldError
	add := func(ptr, format string, a ...any) {
		if len(errs) < 20 {
			errs = append(errs, FieldError{Pointer: ptr, Detail: fmt.Sprintf(format, a...)})
		}
	}
	param := func(name string) string {
		if req.csv {
			return "query parameter " + name
		}
		return "/" + name
	}
	n := len(req.Samples)
	if n == 0 {
		add(req.locate(-1, ""), "samples are required: at least 3, typically 40 to 120 spanning the measuring interval")
	}
	if lim.MaxPoints > 0 && n > lim.MaxPoints {
		return newProblem(kindTooLarge, fmt.Sprintf("%d samples exceed this server's limit of %d", n, lim.MaxPoints),
			FieldError{Pointer: req.locate(-1, ""), Detail: fmt.Sprintf("at most %d samples", lim.MaxPoints)})
	}
	var nsx, nsy, nord int
	ids := map[string]bool{}
	for i, s := range req.Samples {
		for _, c := range []struct {
			name string
			v    *float64
			cnt  *int
		}{{"sx", s.SX, &nsx}, {"sy", s.SY, &nsy}, {"order", s.Order, &nord}} {
			if c.v != nil {
				*c.cnt++
				if c.name != "order" && !(*c.v >= 0) {
					add(req.locate(i, c.name), "%s must be a standard uncertainty ≥ 0, not %g", c.name, *c.v)
				}
			}
		}
		if s.ID != "" {
			ids[s.ID] = true
		}
	}
	for _, c := range []struct {
		name string
		cnt  int
		has  func(Sample) bool
	}{{"sx", nsx, func(s Sample) bool { return s.SX != nil }}, {"sy", nsy, func(s Sample) bool { return s.SY != nil }},
		{"order", nord, func(s Sample) bool { return s.Order != nil }}} {
		if c.cnt > 0 && c.cnt < n {
			i := slices.IndexFunc(req.Samples, func(s Sample) bool { return !c.has(s) })
			add(req.locate(i, c.name), "%s is given for some samples but missing here: give it for every sample or none", c.name)
		}
	}
	if (nsx > 0) != (nsy > 0) {
		add(req.locate(0, "sx"), "sx and sy go together: York's fit needs both")
	}
	switch req.ErrorModel {
	case "", "auto", "constant", "proportional":
	default:
		add(param("error_model"), "error_model must be constant, proportional or auto, not %q", truncate(req.ErrorModel))
	}
	if req.Lambda != nil && !(*req.Lambda > 0 && !math.IsInf(*req.Lambda, 0)) {
		add(param("lambda"), "lambda (the error-variance ratio) must be a finite number greater than 0")
	}
	if req.Confidence != nil {
		if err := CheckConfidence(*req.Confidence); err != nil {
			add(param("confidence"), "%s", err)
		}
	}
	checkAllowable := func(a *Allowable, ptr string) {
		if a == nil {
			return
		}
		if a.Absolute == nil && a.Percent == nil {
			add(ptr, "give absolute, percent or both")
		}
		if a.Absolute != nil && !(*a.Absolute >= 0) {
			add(ptr+"/absolute", "the allowable bias must be ≥ 0")
		}
		if a.Percent != nil && !(*a.Percent >= 0) {
			add(ptr+"/percent", "the allowable bias must be ≥ 0")
		}
	}
	if req.csv {
		checkAllowable(req.AllowableBias, "query parameter allowable_absolute")
	} else {
		checkAllowable(req.AllowableBias, "/allowable_bias")
	}
	if lim.MaxAt > 0 && len(req.DecisionLevels) > lim.MaxAt {
		add(param("decision_levels"), "at most %d decision levels", lim.MaxAt)
	}
	for k, l := range req.DecisionLevels {
		checkAllowable(l.AllowableBias, fmt.Sprintf("/decision_levels/%d/allowable_bias", k))
	}
	for k, id := range req.Exclude {
		if !ids[id] {
			ptr := fmt.Sprintf("/exclude/%d", k)
			if req.csv {
				ptr = param("exclude")
			}
			add(ptr, "no sample has the id %q", truncate(id))
		}
	}
	if b := req.Bootstrap; b != nil {
		for _, e := range validateBootstrap(b, nsx > 0 && nsy > 0, req.csv, lim) {
			add(e.Pointer, "%s", e.Detail)
		}
	}
	if len(errs) > 0 {
		detail := errs[0].Detail
		if len(errs) > 1 {
			detail = fmt.Sprintf("%d fields are invalid; the first: %s", len(errs), detail)
		}
		return newProblem(kindInvalid, detail, errs...)
	}
	return nil
}

func (req *CompareRequest) locate(i int, field string) string {
	return locateRow(req.csv, req.rows, "/samples", i, field)
}

// study is a comparison's data reduced to one value per method and sample.
type study struct {
	idx          []int // index into the request's samples
	ids          []string
	x, y         []float64 // replicate means
	kx, ky       []int
	repX, repY   [][]float64
	sx, sy       []float64
	order        []float64
	hasOrder     bool
	hasReplicate bool
}

func (req *CompareRequest) study(skip map[string]bool) *study {
	st := &study{}
	for i, s := range req.Samples {
		if skip[s.ID] && s.ID != "" {
			continue
		}
		st.idx = append(st.idx, i)
		st.ids = append(st.ids, s.ID)
		st.x = append(st.x, mean(s.X))
		st.y = append(st.y, mean(s.Y))
		st.kx = append(st.kx, len(s.X))
		st.ky = append(st.ky, len(s.Y))
		st.repX = append(st.repX, s.X)
		st.repY = append(st.repY, s.Y)
		if len(s.X) > 1 || len(s.Y) > 1 {
			st.hasReplicate = true
		}
		if s.SX != nil && s.SY != nil {
			st.sx = append(st.sx, *s.SX)
			st.sy = append(st.sy, *s.SY)
		}
		o := float64(i + 1)
		if s.Order != nil {
			o, st.hasOrder = *s.Order, true
		}
		st.order = append(st.order, o)
	}
	if len(st.sx) != len(st.x) {
		st.sx, st.sy = nil, nil
	}
	return st
}

func mean(v []float64) float64 {
	var s float64
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

// Compare validates req and runs the whole method-comparison study: the one
// path shared by `eivfit compare` and POST /v1/method-comparison.
func Compare(ctx context.Context, req *CompareRequest, set Settings) (*CompareResponse, error) {
	if err := req.Validate(set.Limits); err != nil {
		return nil, err
	}
	resp := &CompareResponse{XName: req.XName, YName: req.YName, Unit: req.Unit, SignConvention: SignConvention, Caution: Caution}
	if resp.XName == "" {
		resp.XName = "comparative method"
	}
	if resp.YName == "" {
		resp.YName = "candidate method"
	}
	all, err := req.analyse(ctx, req.study(nil), set)
	if err != nil {
		return nil, err
	}
	resp.Comparison = *all
	if len(req.Exclude) > 0 {
		skip := map[string]bool{}
		for _, id := range req.Exclude {
			skip[id] = true
		}
		without, err := req.analyse(ctx, req.study(skip), set)
		if err != nil {
			return nil, err
		}
		without.Excluded = slices.Clone(req.Exclude)
		resp.WithoutExcluded = without
	}
	if err := checkFiniteCompare(resp); err != nil {
		return nil, err
	}
	return resp, nil
}

func (req *CompareRequest) analyse(ctx context.Context, st *study, set Settings) (*Comparison, error) {
	n := len(st.x)
	conf := eiv.DefaultConfidence
	if req.Confidence != nil {
		conf = *req.Confidence
	}
	c := &Comparison{N: n, Confidence: conf, Replicates: st.hasReplicate, Warnings: []Warning{}}
	loc := func(i int, field string) string {
		if i >= 0 && i < len(st.idx) {
			return req.locate(st.idx[i], field)
		}
		return req.locate(-1, "")
	}
	fail := func(m string, err error) error {
		return fitProblem(err, eiv.Method(m), loc, req.locate(-1, ""))
	}
	if n < 3 {
		return nil, fail("study", eiv.ErrTooFewPoints)
	}
	if n < 40 {
		c.Warnings = append(c.Warnings, Warning{Code: eiv.WarnFewPoints, Message: fmt.Sprintf(
			"%d samples: method comparisons usually need at least 40 spanning the measuring interval (common practice)", n)})
	}
	em, err := req.errorModel(st, c)
	if err != nil {
		return nil, fail("error model", err)
	}
	c.ErrorModel = em.ErrorModelOut
	positive := allPositive(st.x) && allPositive(st.y)

	s := eiv.Sample{X: st.x, Y: st.y, SX: st.sx, SY: st.sy}
	opt := eiv.Options{Confidence: conf}
	var fits []*fitted
	add := func(name string, f *eiv.Fit, est eiv.Estimator, lsrc string) {
		out := methodFit(f)
		if lsrc != "" {
			out.Lambda, out.LambdaSource = ptr(f.Lambda), lsrc
		}
		fits = append(fits, &fitted{name: name, fit: f, est: est, out: out})
	}
	olsF, err := eiv.OLS(st.x, st.y, &opt)
	if err != nil {
		return nil, fail("ols", err)
	}
	add("ols", olsF, eiv.OLSEstimator{}, "")
	dem, err := eiv.Deming(st.x, st.y, &eiv.DemingOptions{Options: opt, Lambda: em.lambdaConst, Jackknife: true})
	if err != nil {
		return nil, fail("deming", err)
	}
	add("deming", dem, eiv.DemingEstimator{Lambda: dem.Lambda}, em.lsrcConst)
	var wd *eiv.Fit
	if positive {
		wd, err = eiv.WeightedDeming(st.x, st.y, &eiv.DemingOptions{Options: opt, Lambda: em.lambdaRel})
		if err != nil {
			return nil, fail("weighted_deming", err)
		}
		add("weighted_deming", wd, eiv.WeightedDemingEstimator{Lambda: wd.Lambda}, em.lsrcRel)
	}
	pbf, err := pbFitted(ctx, s, conf, set)
	if err != nil {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		return nil, fail("passing_bablok", err)
	}
	fits = append(fits, pbf)
	if st.sx != nil {
		yk, err := eiv.York(st.x, st.y, st.sx, st.sy, nil, &eiv.YorkOptions{Options: opt, Jackknife: true, JackknifeMaxN: set.jackMax()})
		if err != nil {
			return nil, fail("york", err)
		}
		add("york", yk, eiv.YorkEstimator{}, "")
	}
	// Lambda as the error model chose it, not the default 1 Deming assumes.
	for _, f := range fits {
		if f.name == "deming" || f.name == "weighted_deming" {
			f.fit.Warnings = slices.DeleteFunc(f.fit.Warnings, func(w error) bool {
				ww, ok := w.(*eiv.Warning)
				return ok && ww.Code == eiv.WarnLambdaAssumed
			})
		}
	}
	levels := make([]float64, len(req.DecisionLevels))
	for i, l := range req.DecisionLevels {
		levels[i] = l.Level
	}
	c.Fits, c.OLSBias, err = finishFits(ctx, s, fits, levels, req.Bootstrap, set, &c.Warnings, fail)
	if err != nil {
		return nil, err
	}
	if ag, err := agreement(st, conf, positive); err == nil {
		c.Agreement = *ag
	} else {
		return nil, fail("agreement", err)
	}
	c.DecisionLevels = req.levels(c.Fits)
	// Diagnostics on the residuals of the fit that matches the error model.
	diagFit, diagName := dem, "deming"
	if em.Model == string(eiv.ErrorProportional) && wd != nil {
		diagFit, diagName = wd, "weighted_deming"
	}
	c.Diagnostics = diagnostics(st, diagFit, diagName, em.Model, pbf.out.Cusum, c)
	c.Recommendation = recommend(c, st, positive)
	return c, nil
}

// modelChoice is the resolved error model with the λ for each Deming fit.
type modelChoice struct {
	ErrorModelOut
	lambdaConst, lambdaRel float64
	lsrcConst, lsrcRel     string
}

func (req *CompareRequest) errorModel(st *study, c *Comparison) (*modelChoice, error) {
	mc := &modelChoice{}
	var rx, ry *eiv.Repeatability
	if st.hasReplicate {
		var err1, err2 error
		rx, err1 = eiv.ReplicatePrecision(st.repX)
		ry, err2 = eiv.ReplicatePrecision(st.repY)
		if err1 != nil || err2 != nil {
			rx, ry = nil, nil
			c.Warnings = append(c.Warnings, Warning{Code: "replicates_insufficient", Message: "too few samples have replicates of both methods (at least 3 each) to estimate their precision"})
		}
	}
	rep := func(r *eiv.Repeatability) *RepeatabilityOut {
		return &RepeatabilityOut{SD: r.SD, CV: r.CV, DF: r.DF, Model: string(r.Model),
			Trend: TestOut{Statistic: r.Trend.Statistic, PValue: r.Trend.PValue, Detail: "Spearman's ρ of per-sample SD with level"}}
	}
	model := req.ErrorModel
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
	case req.Lambda != nil:
		mc.lambdaConst, mc.lambdaRel = *req.Lambda, *req.Lambda
		mc.lsrcConst, mc.lsrcRel = "given", "given"
	case rx != nil:
		mc.lambdaConst = ry.SD * ry.SD * invK(st.ky) / (rx.SD * rx.SD * invK(st.kx))
		mc.lambdaRel = ry.CV * ry.CV * invK(st.ky) / (rx.CV * rx.CV * invK(st.kx))
		mc.lsrcConst, mc.lsrcRel = "replicates", "replicates"
		if !(mc.lambdaConst > 0) || math.IsInf(mc.lambdaConst, 0) || !(mc.lambdaRel > 0) || math.IsInf(mc.lambdaRel, 0) {
			return nil, fmt.Errorf("%w: the replicates show no scatter in one method, so λ cannot be estimated; give lambda", eiv.ErrDegenerate)
		}
	case st.sx != nil:
		var err error
		if mc.lambdaConst, err = eiv.LambdaFromUncertainties(st.sx, st.sy); err != nil {
			return nil, &eiv.OptionError{Option: "sx, sy", Reason: "the stated uncertainties give no error-variance ratio (all zero for one method); give lambda"}
		}
		mc.lambdaRel = mc.lambdaConst
		if allPositive(st.x) && allPositive(st.y) {
			if l, err := eiv.RelativeLambdaFromUncertainties(st.x, st.y, st.sx, st.sy); err == nil {
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
		mc.X, mc.Y = rep(rx), rep(ry)
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

func agreement(st *study, conf float64, positive bool) (*AgreementOut, error) {
	opt := &eiv.Options{Confidence: conf}
	ag, err := eiv.BlandAltman(st.x, st.y, 0, opt)
	if err != nil {
		return nil, err
	}
	out := &AgreementOut{
		MeanDifference:    interval(ag.MeanDifference),
		SDDifference:      ag.SDDifference,
		Multiplier:        ag.Multiplier,
		LimitsOfAgreement: LimitsOut{Lower: interval(ag.Lower), Upper: interval(ag.Upper)},
	}
	out.ProportionalBias.Reading = "The differences could not be regressed on the level (the means do not vary)."
	if ag.Proportional != nil {
		sl, ic := param(ag.Proportional.Slope), param(ag.Proportional.Intercept)
		out.ProportionalBias = ProportionalOut{Slope: &sl, Intercept: &ic, PValue: ptr(ag.ProportionalP)}
		if ag.ProportionalP < 0.05 {
			out.ProportionalBias.Reading = fmt.Sprintf("The differences change with the level (slope %.3g, p = %.2g): a proportional bias.", ag.Proportional.Slope.Value, ag.ProportionalP)
		} else {
			out.ProportionalBias.Reading = fmt.Sprintf("No evidence that the differences change with the level (p = %.2g).", ag.ProportionalP)
		}
	}
	if positive {
		if p, err := eiv.BlandAltmanPercent(st.x, st.y, 0, opt); err == nil {
			out.Percent = &PercentOut{MeanDifference: interval(p.MeanDifference), SDDifference: p.SDDifference,
				LimitsOfAgreement: LimitsOut{Lower: interval(p.Lower), Upper: interval(p.Upper)}}
		}
	}
	return out, nil
}

// levels judges the bias at each decision level against its allowable bias.
func (req *CompareRequest) levels(fs Fits) []LevelOut {
	var out []LevelOut
	for i, l := range req.DecisionLevels {
		lo := LevelOut{Level: l.Level, Fits: map[string]LevelFit{}}
		a := l.AllowableBias
		if a == nil {
			a = req.AllowableBias
		}
		if a != nil {
			limit := 0.0
			if a.Absolute != nil {
				limit = *a.Absolute
			}
			if a.Percent != nil {
				limit = math.Max(limit, *a.Percent*math.Abs(l.Level)/100)
			}
			lo.Allowable = &AllowableOut{Absolute: a.Absolute, Percent: a.Percent, Limit: limit}
		}
		fs.each(func(name string, f *MethodFit) {
			b := f.At[i].Bias
			lf := LevelFit{Bias: b}
			if l.Level != 0 {
				k := 100 / l.Level
				bp := Interval{Estimate: b.Estimate * k}
				if b.SE != nil {
					bp.SE = ptr(*b.SE * math.Abs(k))
				}
				if !b.CI.IsZero() {
					bp.CI = CI{Lower: math.Min(b.CI.Lower*k, b.CI.Upper*k), Upper: math.Max(b.CI.Lower*k, b.CI.Upper*k), Level: b.CI.Level, Method: b.CI.Method}
				}
				lf.BiasPercent = &bp
			}
			if lo.Allowable != nil && !b.CI.IsZero() { // no interval, no verdict
				lim := lo.Allowable.Limit
				switch {
				case b.CI.Lower >= -lim && b.CI.Upper <= lim:
					lf.Verdict = "within"
				case b.CI.Lower > lim || b.CI.Upper < -lim:
					lf.Verdict = "exceeds"
				default:
					lf.Verdict = "inconclusive"
				}
			}
			lo.Fits[name] = lf
		})
		out = append(out, lo)
	}
	return out
}

func diagnostics(st *study, f *eiv.Fit, name, model string, cusum *CusumOut, c *Comparison) DiagnosticsOut {
	n := len(st.x)
	a, b := f.Intercept.Value, f.Slope.Value
	d := DiagnosticsOut{ResidualsOf: name, Scale: "absolute"}
	e := make([]float64, n)
	level := make([]float64, n)
	for i := range n {
		level[i] = (st.x[i] + st.y[i]) / 2
		e[i] = st.y[i] - a - b*st.x[i]
		if model == string(eiv.ErrorProportional) && level[i] > 0 {
			e[i] /= level[i]
		}
	}
	if model == string(eiv.ErrorProportional) {
		d.Scale = "relative"
	}
	if name == "york" && st.sx != nil {
		// York's residuals in units of their stated SD about the line.
		for i := range n {
			e[i] = (st.y[i] - a - b*st.x[i]) / math.Sqrt(st.sy[i]*st.sy[i]+b*b*st.sx[i]*st.sx[i])
		}
		d.Scale = "normalized"
	}
	var ss float64
	for _, v := range e {
		ss += v * v
	}
	sd := math.Sqrt(ss / float64(max(n-2, 1)))
	for i := range n {
		z := 0.0
		if sd > 0 {
			z = e[i] / sd
		}
		d.Residuals = append(d.Residuals, ResidualOut{ID: st.ids[i], Level: level[i], Order: st.order[i], Residual: e[i], Standardized: z})
	}
	to := func(r eiv.TestResult) *TestOut {
		return &TestOut{Statistic: r.Statistic, PValue: r.PValue, Detail: r.Detail}
	}
	// Normality.
	if sw, err := eiv.ShapiroWilk(e); err == nil {
		d.Normality.ShapiroWilk = to(sw)
		if sw.PValue < 0.05 {
			d.Normality.Reading = fmt.Sprintf("The residuals depart from a normal distribution (Shapiro–Wilk W = %.3f, p = %.2g): prefer the distribution-free Passing–Bablok line, and look at the Q-Q plot for outliers or skew.", sw.Statistic, sw.PValue)
		} else {
			d.Normality.Reading = fmt.Sprintf("No evidence against normal residuals (Shapiro–Wilk W = %.3f, p = %.2g).", sw.Statistic, sw.PValue)
		}
	} else {
		d.Normality.Reading = "Normality could not be tested (the residuals are all equal)."
	}
	for _, q := range eiv.NormalQQ(e) {
		d.Normality.QQ = append(d.Normality.QQ, QQOut{Theoretical: q.Theoretical, Sample: q.Sample, ID: st.ids[q.Index]})
	}
	// Independence in run order.
	ord := make([]int, n)
	for i := range ord {
		ord[i] = i
	}
	slices.SortStableFunc(ord, func(p, q int) int {
		switch {
		case st.order[p] < st.order[q]:
			return -1
		case st.order[p] > st.order[q]:
			return 1
		}
		return 0
	})
	eo, lo := make([]float64, n), make([]float64, n)
	for k, i := range ord {
		eo[k], lo[k] = e[i], level[i]
	}
	d.Independence.OrderSource = "input"
	if st.hasOrder {
		d.Independence.OrderSource = "order"
	}
	var reads []string
	if dw, err := eiv.DurbinWatson(eo, lo); err == nil {
		d.Independence.DurbinWatson = to(dw)
		if dw.PValue < 0.05 {
			reads = append(reads, fmt.Sprintf("successive residuals in run order are correlated (Durbin–Watson d = %.2f, p = %.2g): look for drift or carry-over", dw.Statistic, dw.PValue))
		}
	}
	if rt, err := eiv.RunsTest(eo); err == nil {
		d.Independence.Runs = to(rt)
		if rt.PValue < 0.05 {
			reads = append(reads, fmt.Sprintf("the signs of the residuals in run order form %s runs than chance gives (p = %.2g)", map[bool]string{true: "fewer", false: "more"}[rt.Statistic < 0], rt.PValue))
		}
	}
	if len(reads) == 0 {
		d.Independence.Reading = "No evidence of dependence in run order."
	} else {
		d.Independence.Reading = upperFirst(strings.Join(reads, "; ")) + "."
	}
	// Constant variance.
	absE := make([]float64, n)
	for i, v := range e {
		absE[i] = math.Abs(v)
	}
	reads = nil
	if bp, err := eiv.BreuschPagan(e, level); err == nil {
		d.Variance.BreuschPagan = to(bp)
		if bp.PValue < 0.05 {
			reads = append(reads, fmt.Sprintf("the residual variance changes with the level (Breusch–Pagan p = %.2g)", bp.PValue))
		}
	}
	if sp, err := eiv.Spearman(level, absE); err == nil {
		d.Variance.Spearman = to(sp)
		if sp.PValue < 0.05 && sp.Statistic > 0 {
			reads = append(reads, fmt.Sprintf("|residual| grows with the level (Spearman ρ = %.2f, p = %.2g)", sp.Statistic, sp.PValue))
		}
	}
	if len(reads) == 0 {
		d.Variance.Reading = fmt.Sprintf("No evidence that the %s residual spread changes with the level.", d.Scale)
	} else {
		d.Variance.Reading = upperFirst(strings.Join(reads, "; ")) + fmt.Sprintf(": the %s error model may not hold.", model)
	}
	// Linearity.
	d.Linearity.Cusum = cusum
	reads = nil
	if cusum != nil && !cusum.Linear {
		reads = append(reads, fmt.Sprintf("the cusum test finds a departure from a straight line (p = %.2g)", cusum.PValue))
	}
	if c.ErrorModel.X != nil && c.ErrorModel.Y != nil {
		rx := &eiv.Repeatability{SD: c.ErrorModel.X.SD, DF: c.ErrorModel.X.DF}
		ry := &eiv.Repeatability{SD: c.ErrorModel.Y.SD, DF: c.ErrorModel.Y.DF}
		if lof, err := eiv.LackOfFit(st.x, st.y, st.kx, st.ky, a, b, rx, ry); err == nil && model == string(eiv.ErrorConstant) {
			d.Linearity.LackOfFit = to(lof)
			if lof.PValue < 0.05 {
				reads = append(reads, fmt.Sprintf("the scatter about the line exceeds what the replicate error explains (lack of fit F = %.2f, p = %.2g): sample-specific differences (interferences, matrix effects) or curvature", lof.Statistic, lof.PValue))
			}
		}
	}
	switch {
	case len(reads) == 0:
		d.Linearity.Reading = "No evidence against a straight line."
	case cusum != nil && !cusum.Linear:
		d.Linearity.Reading = upperFirst(strings.Join(reads, "; ")) + "; restrict the range or model the curvature before reporting a line."
	default:
		d.Linearity.Reading = upperFirst(strings.Join(reads, "; ")) + "; look at the samples with the largest residuals."
	}
	// Outliers: generalized ESD on the residuals; flagged, never dropped.
	r := max(1, min(10, n/10))
	d.Outliers = OutliersOut{Method: "generalized ESD (Rosner 1983), α = 0.05", MaxTested: r, Flagged: []OutlierOut{}}
	if n-r >= 3 {
		if esd, err := eiv.GeneralizedESD(e, r, 0.05); err == nil {
			for k, i := range esd.Outliers {
				d.Outliers.Flagged = append(d.Outliers.Flagged, OutlierOut{ID: st.ids[i], Index: st.idx[i], Residual: e[i], R: esd.R[k], Lambda: esd.Lambda[k]})
			}
		}
	}
	if len(d.Outliers.Flagged) == 0 {
		d.Outliers.Reading = "No outliers flagged."
	} else {
		var names []string
		for _, o := range d.Outliers.Flagged {
			name := o.ID
			if name == "" {
				name = fmt.Sprintf("#%d", o.Index+1)
			}
			names = append(names, name)
		}
		d.Outliers.Reading = fmt.Sprintf("Flagged as outliers: %s. They are kept in every fit; check them against the records, and exclude them only by listing their ids in \"exclude\", which shows the analysis both ways.", strings.Join(names, ", "))
	}
	return d
}

func upperFirst(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

// recommend picks the fit to report from the diagnostics (Linnet 1993's
// and Passing & Bablok's guidance, common practice): outliers or
// non-normal residuals favour Passing–Bablok; otherwise the error model
// decides between Deming and weighted Deming; stated per-sample
// uncertainties that the scatter bears out favour York.
func recommend(c *Comparison, st *study, positive bool) RecommendationO {
	d := c.Diagnostics
	var reasons []string
	nonNormal := d.Normality.ShapiroWilk != nil && d.Normality.ShapiroWilk.PValue < 0.05
	outliers := len(d.Outliers.Flagged) > 0
	pb := c.Fits.PassingBablok
	pbOK := pb != nil && pb.KendallTau != nil && pb.KendallTau.Statistic > 0 && pb.KendallTau.PValue < 0.05
	method := "deming"
	switch {
	case (nonNormal || outliers) && pbOK:
		method = "passing_bablok"
		if outliers {
			reasons = append(reasons, fmt.Sprintf("%d sample(s) were flagged as outliers, which pull least-squares fits but hardly move Passing–Bablok's median slope", len(d.Outliers.Flagged)))
		}
		if nonNormal {
			reasons = append(reasons, "the residuals are not normal, and Passing–Bablok does not assume a distribution")
		}
		reasons = append(reasons, fmt.Sprintf("Kendall's τ = %.2f confirms the positive correlation Passing–Bablok needs", pb.KendallTau.Statistic))
	case c.Fits.York != nil && c.Fits.York.PValue != nil && *c.Fits.York.PValue >= 0.05:
		method = "york"
		reasons = append(reasons, fmt.Sprintf("per-sample uncertainties were stated and the scatter agrees with them (MSWD = %.2f, p = %.2g)", *c.Fits.York.MSWD, *c.Fits.York.PValue))
	case c.ErrorModel.Model == string(eiv.ErrorProportional) && positive:
		method = "weighted_deming"
		reasons = append(reasons, "the error grows with the level, so weighted Deming gives the low values their due weight")
	default:
		reasons = append(reasons, "the error is roughly constant over the range, the case Deming regression models")
	}
	if c.ErrorModel.LambdaSource == "assumed" && method != "passing_bablok" {
		reasons = append(reasons, "λ was assumed to be 1; replicate measurements would put it on data")
	}
	if d.Linearity.Cusum != nil && !d.Linearity.Cusum.Linear {
		reasons = append(reasons, "but the relation is not linear over the whole range: no straight line describes it well")
	} else if d.Linearity.LackOfFit != nil && d.Linearity.LackOfFit.PValue < 0.05 {
		reasons = append(reasons, "note that the samples scatter about the line more than the replicates explain, so sample-specific differences add to the bias at any one sample")
	}
	if d.Independence.DurbinWatson != nil && d.Independence.DurbinWatson.PValue < 0.05 {
		reasons = append(reasons, "the residuals drift in run order, so the intervals may be too narrow")
	}
	name := map[string]string{"deming": "Deming", "weighted_deming": "weighted Deming", "passing_bablok": "Passing–Bablok", "york": "York"}[method]
	return RecommendationO{Method: method, Reasons: reasons,
		Text: fmt.Sprintf("Report the %s fit: %s.", name, strings.Join(reasons, "; "))}
}

func checkFiniteCompare(r *CompareResponse) error {
	for _, c := range []*Comparison{&r.Comparison, r.WithoutExcluded} {
		if c == nil {
			continue
		}
		fr := &FitResponse{Fits: c.Fits, OLSBias: c.OLSBias}
		if err := checkFinite(fr); err != nil {
			return err
		}
		bad := false
		chk := func(v ...float64) {
			for _, f := range v {
				if math.IsNaN(f) || math.IsInf(f, 0) {
					bad = true
				}
			}
		}
		a := c.Agreement
		chk(a.MeanDifference.Estimate, a.MeanDifference.CI.Lower, a.MeanDifference.CI.Upper, a.SDDifference,
			a.LimitsOfAgreement.Lower.CI.Lower, a.LimitsOfAgreement.Upper.CI.Upper, c.ErrorModel.Lambda)
		if pb := a.ProportionalBias; pb.PValue != nil {
			chk(*pb.PValue)
		}
		for _, l := range c.DecisionLevels {
			for _, f := range l.Fits {
				f.Bias.eachNumber(func(_ string, v float64) { chk(v) })
				if f.BiasPercent != nil {
					f.BiasPercent.eachNumber(func(_ string, v float64) { chk(v) })
				}
			}
		}
		for _, t := range []*TestOut{c.Diagnostics.Normality.ShapiroWilk, c.Diagnostics.Independence.DurbinWatson, c.Diagnostics.Independence.Runs,
			c.Diagnostics.Variance.BreuschPagan, c.Diagnostics.Variance.Spearman, c.Diagnostics.Linearity.LackOfFit} {
			if t != nil {
				chk(t.Statistic, t.PValue)
			}
		}
		for _, q := range c.Diagnostics.Normality.QQ {
			chk(q.Theoretical, q.Sample)
		}
		for _, rr := range c.Diagnostics.Residuals {
			chk(rr.Residual, rr.Standardized, rr.Level)
		}
		if bad {
			return newProblem(kindUnfittable, "a result is not a finite number: the data are too extreme for double precision",
				FieldError{Pointer: "/samples", Detail: "values too extreme to analyse"})
		}
	}
	return nil
}
