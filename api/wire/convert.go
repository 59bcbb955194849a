package wire

import (
	"fmt"

	"eivfit/eiv"
	"eivfit/eiv/study"
)

// NewFitResponse is the answer to a line fit.
func NewFitResponse(r *study.FitResult) *FitResponse {
	return &FitResponse{N: r.N, Confidence: r.Confidence, Fits: fitsOut(r.Fits),
		OLSBias: olsBiasOut(r.OLSBias), Warnings: warningsOut(r.Warnings)}
}

// WarnUnitsDiffer is the code of the warning that x and y are in
// different units.
const WarnUnitsDiffer = "units_differ"

// WithUnits records the units the caller stated; when they differ, it
// leaves out the bias y − x and says why in a warning.
func (r *FitResponse) WithUnits(xUnit, yUnit string) *FitResponse {
	r.XUnit, r.YUnit = xUnit, yUnit
	if !r.SameScale() {
		r.Fits.Each(func(_ string, m *MethodFit) {
			for i := range m.At {
				m.At[i].Bias = nil
			}
		})
		r.Warnings = append(r.Warnings, Warning{Code: WarnUnitsDiffer, Message: fmt.Sprintf(
			"x (%s) and y (%s) are in different units: the bias y − x, the identity line and the difference plot do not apply and are left out", r.XUnit, r.YUnit)})
	}
	return r
}

// SameScale says whether x and y may be compared with each other: no
// units stated, or the same unit.
func (r *FitResponse) SameScale() bool { return r.XUnit == "" || r.YUnit == "" || r.XUnit == r.YUnit }

// NewCompareResponse is the answer to a method-comparison study.
func NewCompareResponse(req *CompareRequest, c *study.Comparison) *CompareResponse {
	resp := &CompareResponse{XName: req.XName, YName: req.YName, Unit: req.Unit,
		SignConvention: study.SignConvention, Caution: study.Caution, Comparison: *comparisonOut(c), Input: req.input}
	if resp.XName == "" {
		resp.XName = "comparative method"
	}
	if resp.YName == "" {
		resp.YName = "candidate method"
	}
	if c.WithoutExcluded != nil {
		resp.WithoutExcluded = comparisonOut(c.WithoutExcluded)
	}
	return resp
}

func comparisonOut(c *study.Comparison) *Comparison {
	out := &Comparison{N: c.N, Excluded: c.Excluded, Confidence: c.Confidence, Replicates: c.Replicates,
		Fits: fitsOut(c.Fits), OLSBias: olsBiasOut(c.OLSBias), Diagnostics: DiagnosticsOutOf(c.Diagnostics),
		Recommendation: RecommendationO{Method: c.Recommendation.Method, Reasons: c.Recommendation.Reasons, Text: c.Recommendation.Text},
		Warnings:       warningsOut(c.Warnings)}
	em := c.ErrorModel
	out.ErrorModel = ErrorModelOut{Model: em.Model, Source: em.Source, Lambda: em.Lambda, LambdaSource: em.LambdaSource, Reading: em.Reading}
	if em.X != nil {
		out.ErrorModel.X, out.ErrorModel.Y = repeatabilityOut(em.X), repeatabilityOut(em.Y)
	}
	out.Agreement = *AgreementOutOf(c.Agreement)
	for _, l := range c.DecisionLevels {
		lo := LevelOut{Level: l.Level, Extrapolated: l.Extrapolated, Fits: map[string]LevelFit{}}
		if a := l.Allowable; a != nil {
			lo.Allowable = &AllowableOut{Absolute: a.Absolute, Percent: a.Percent, Limit: l.Limit}
		}
		for _, f := range l.Fits {
			lf := LevelFit{Bias: *atOut(f.At).Bias, Verdict: f.Verdict}
			lf.Bias.SE, lf.Bias.CI = seCI(f.Bias) // the interval the verdict judged
			if l.Level != 0 {
				bp := interval(f.BiasPercent)
				lf.BiasPercent = &bp
			}
			lo.Fits[f.Method.Name] = lf
		}
		out.DecisionLevels = append(out.DecisionLevels, lo)
	}
	out.Outcome, out.Robustness = outcomeOut(c.Outcome), robustnessOut(c.Robustness)
	return out
}

func repeatabilityOut(r *eiv.Repeatability) *RepeatabilityOut {
	return &RepeatabilityOut{SD: r.SD, CV: r.CV, DF: r.DF, Model: string(r.Model),
		Trend: TestOut{Statistic: r.Trend.Statistic, PValue: r.Trend.PValue, Detail: "Spearman's ρ of per-sample SD with level"}}
}

// AgreementOutOf is the wire form of a Bland–Altman analysis.
func AgreementOutOf(a *study.Agreement) *AgreementOut {
	ag := a.Agreement
	out := &AgreementOut{
		MeanDifference:    interval(ag.MeanDifference),
		SDDifference:      ag.SDDifference,
		Multiplier:        ag.Multiplier,
		LimitsOfAgreement: LimitsOut{Lower: interval(ag.Lower), Upper: interval(ag.Upper)},
	}
	out.ProportionalBias.Reading = a.ProportionalReading
	if ag.Proportional != nil {
		sl, ic := param(ag.Proportional.Slope), param(ag.Proportional.Intercept)
		out.ProportionalBias = ProportionalOut{Slope: &sl, Intercept: &ic, PValue: ptr(ag.ProportionalP), Reading: a.ProportionalReading}
	}
	if p := a.Percent; p != nil {
		out.Percent = &PercentOut{MeanDifference: interval(p.MeanDifference), SDDifference: p.SDDifference,
			LimitsOfAgreement: LimitsOut{Lower: interval(p.Lower), Upper: interval(p.Upper)}}
	}
	agreementForms(out, a)
	return out
}

// DiagnosticsOutOf is the wire form of the checks of the assumptions,
// with the residuals and the Q-Q points.
func DiagnosticsOutOf(d *study.Diagnostics) DiagnosticsOut {
	out := DiagnosticChecksOf(d)
	if len(d.QQ) > 0 {
		out.Normality.QQ = make([]QQOut, len(d.QQ))
		for k, q := range d.QQ {
			out.Normality.QQ[k] = QQOut{Theoretical: q.Theoretical, Sample: q.Sample, ID: d.ID(q.Index)}
		}
	}
	if len(d.Residual) > 0 {
		out.Residuals = make([]ResidualOut, len(d.Residual))
		for i, e := range d.Residual {
			out.Residuals[i] = ResidualOut{ID: d.ID(i), Level: d.Level[i], Order: d.Order[i], Residual: e, Standardized: d.Standardized[i]}
		}
	}
	return out
}

// DiagnosticChecksOf is DiagnosticsOutOf without the residuals and the
// Q-Q points: the tests, their readings and the flagged outliers, for a
// report that draws the residuals from d itself.
func DiagnosticChecksOf(d *study.Diagnostics) DiagnosticsOut {
	out := DiagnosticsOut{ResidualsOf: d.ResidualsOf, Scale: d.Scale,
		Normality:    NormalityOut{ShapiroWilk: testOut(d.ShapiroWilk), Reading: d.NormalityReading},
		Independence: IndependenceOut{OrderSource: d.OrderSource, DurbinWatson: testOut(d.DurbinWatson), Runs: testOut(d.Runs), Reading: d.IndependenceReading},
		Variance:     VarianceOut{BreuschPagan: testOut(d.BreuschPagan), Spearman: testOut(d.Spearman), Reading: d.VarianceReading},
		Linearity:    LinearityOut{Cusum: cusumOut(d.Cusum), LackOfFit: testOut(d.LackOfFit), Reading: d.LinearityReading},
		Outliers:     OutliersOut{Method: d.OutlierTest, MaxTested: d.OutlierMaxTested, Flagged: []OutlierOut{}, Reading: d.OutlierReading},
	}
	for _, o := range d.Outliers {
		out.Outliers.Flagged = append(out.Outliers.Flagged, OutlierOut{ID: o.ID, Index: o.Index, Residual: o.Residual, R: o.R, Lambda: o.Lambda})
	}
	return out
}

func fitsOut(ms []*study.MethodResult) Fits {
	var out Fits
	for _, m := range ms {
		for _, e := range out.list() {
			if e.name == m.Method.Name {
				*e.m = methodFit(m)
			}
		}
	}
	return out
}

func methodFit(m *study.MethodResult) *MethodFit {
	f := m.Fit
	out := &MethodFit{
		Slope:     param(f.Slope),
		Intercept: param(f.Intercept),
		SEBasis:   m.Method.SEBasis,
		DOF:       f.DOF,
		Converged: f.Converged,
	}
	if f.Method != eiv.MethodPassingBablok { // a rank method: no covariance
		out.CovSlopeIntercept = ptr(f.CovSlopeIntercept)
	}
	switch f.Method {
	case eiv.MethodOLS:
		out.RSquared, out.ResidualSD = ptr(f.RSquared), ptr(f.ResidualSD)
	case eiv.MethodDeming:
		out.ResidualSD = ptr(f.ResidualSD)
	case eiv.MethodWeightedDeming:
		out.ResidualSD, out.Iterations = ptr(f.ResidualSD), ptr(f.Iterations)
	case eiv.MethodYork:
		out.Slope.SEScaled, out.Intercept.SEScaled = ptr(f.Slope.SEScaled), ptr(f.Intercept.SEScaled)
		out.Chi2, out.MSWD, out.PValue = ptr(f.Chi2), ptr(f.MSWD), ptr(f.PValue)
		out.Iterations = ptr(f.Iterations)
	}
	if m.LambdaSource != "" {
		out.Lambda, out.LambdaSource = ptr(f.Lambda), m.LambdaSource
	}
	if pb := m.PassingBablok; pb != nil {
		out.PairwiseSlopes, out.Shift = ptr(pb.Slopes), ptr(pb.Shift)
		out.Cusum = cusumOut(&pb.Cusum)
		out.KendallTau = testOut(&pb.Kendall)
	}
	if j := f.Jackknife; j != nil {
		out.Jackknife = &JackknifeOut{
			Slope:             SECI{SE: j.Slope.SE, CI: ci(j.Slope.CI)},
			Intercept:         SECI{SE: j.Intercept.SE, CI: ci(j.Intercept.CI)},
			CovSlopeIntercept: j.Cov,
		}
	}
	if b := m.Bootstrap; b != nil {
		out.Bootstrap = bootstrapOut(b.Result, b.Seed)
	}
	for i := range m.At {
		out.At = append(out.At, atOut(&m.At[i]))
	}
	return out
}

func atOut(p *study.Prediction) AtOut {
	bias := interval(p.Bias)
	a := AtOut{X: p.X, Extrapolated: p.Extrapolated, Y: interval(p.Y), Bias: &bias}
	if iv := p.Boot; iv != nil {
		a.Y.Bootstrap = bounds(iv)
		a.Bias.Bootstrap = &Bounds{iv.Lower - p.X, iv.Upper - p.X}
	}
	return a
}

func cusumOut(c *eiv.CusumResult) *CusumOut {
	if c == nil {
		return nil
	}
	return &CusumOut{Max: c.Max, Above: c.Above, Below: c.Below, KS: c.KS, PValue: c.PValue, Linear: c.Linear}
}

func testOut(t *eiv.TestResult) *TestOut {
	if t == nil {
		return nil
	}
	return &TestOut{Statistic: t.Statistic, PValue: t.PValue, Detail: t.Detail}
}

func bootstrapOut(br *eiv.BootstrapResult, seed uint64) *BootstrapOut {
	out := &BootstrapOut{Resamples: br.Resamples, Failed: br.Failed, Seed: seed, Scheme: string(br.Scheme)}
	one := func(stat eiv.Statistic) BootParamOut {
		s, err := br.Summarize(stat) // a refused interval stays nil; the warning says why
		out := BootParamOut{Percentile: bounds(s.Percentile), BCa: bounds(s.BCa)}
		if err == nil || s.SE > 0 { // fewer than two fitted resamples leave no SE
			out.SE = ptr(s.SE)
		}
		return out
	}
	out.Slope, out.Intercept = one(eiv.SlopeOf(0)), one(eiv.InterceptOf(0))
	return out
}

func olsBiasOut(cs []*eiv.OLSComparison) []OLSBias {
	var out []OLSBias
	for _, c := range cs {
		o := OLSBias{
			Method:               string(c.Method),
			SlopeDifference:      interval(c.SlopeDiff),
			InterceptDifference:  interval(c.InterceptDiff),
			SlopeRelativePercent: interval(c.SlopeRelative),
			Summary:              c.Summary,
		}
		if c.HasReliability {
			o.Reliability, o.PredictedOLSSlope = ptr(c.Reliability), ptr(c.PredictedOLSSlope)
		}
		for _, a := range c.At {
			o.At = append(o.At, BiasAt{X: a.X, OLS: a.OLS, EIV: a.EIV, Difference: a.Difference})
		}
		out = append(out, o)
	}
	return out
}

func warningsOut(ws []study.Warning) []Warning {
	out := make([]Warning, len(ws))
	for i, w := range ws {
		out[i] = Warning(w)
	}
	return out
}

// param and interval carry an estimate to the answer. An eiv estimate
// without an interval method has no uncertainty (its SE and CI are unset
// zeros): the answer then leaves se and ci out.
func param(e eiv.Estimate) Param {
	p := Param{Estimate: e.Value}
	p.SE, p.CI = seCI(e)
	return p
}

func interval(e eiv.Estimate) Interval {
	iv := Interval{Estimate: e.Value}
	iv.SE, iv.CI = seCI(e)
	return iv
}

func seCI(e eiv.Estimate) (*float64, CI) {
	if e.CI.Method == "" {
		return nil, CI{}
	}
	return ptr(e.SE), ci(e.CI)
}

func ci(i eiv.Interval) CI {
	return CI{Lower: i.Lower, Upper: i.Upper, Level: i.Level, Method: i.Method}
}

func bounds(i *eiv.Interval) *Bounds {
	if i == nil {
		return nil
	}
	return &Bounds{Lower: i.Lower, Upper: i.Upper}
}

func ptr[T any](v T) *T { return &v }
