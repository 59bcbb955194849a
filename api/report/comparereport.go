package report

import (
	"context"
	"fmt"
	"strconv"
	"strings"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// agreementLine is the agreement in one line: the mean difference, the
// limits in the form the data call for and what they describe.
func agreementLine(a *wire.AgreementOut, unit string) string {
	u := unitAfter(unit)
	s := fmt.Sprintf("Agreement: mean difference y − x %s%s (%s)", g(a.MeanDifference.Estimate), u, ciText(a.MeanDifference.CI))
	switch {
	case a.LimitsForm != nil && a.LimitsForm.Form == "ratio" && a.RatioLimits != nil:
		r := a.RatioLimits
		s += fmt.Sprintf("; the differences grow with the level, so the limits are ratios y/x: %s to %s (mean ratio %s)", g(r.Lower.Estimate), g(r.Upper.Estimate), g(r.Ratio.Estimate))
	case a.LimitsForm != nil && a.LimitsForm.Form == "regression" && a.RegressionLimits != nil:
		r := a.RegressionLimits
		s += fmt.Sprintf("; the limits change with the level (regression-based): bias %s + %s·A ± %s·(%s + %s·A), A the mean of x and y",
			g(r.Bias.Intercept.Estimate), g(r.Bias.Slope.Estimate), g(r.Multiplier), g(r.Spread.Intercept.Estimate), g(r.Spread.Slope.Estimate))
	case a.SingleMeasurements != nil:
		l := a.SingleMeasurements.LimitsOfAgreement
		s += fmt.Sprintf("; limits of agreement for single measurements %s to %s%s (for means of the replicates %s to %s%s)", g(l.Lower.Estimate), g(l.Upper.Estimate), u,
			g(a.LimitsOfAgreement.Lower.Estimate), g(a.LimitsOfAgreement.Upper.Estimate), u)
	default:
		s += fmt.Sprintf("; limits of agreement %s to %s%s", g(a.LimitsOfAgreement.Lower.Estimate), g(a.LimitsOfAgreement.Upper.Estimate), u)
	}
	if c := a.Concordance; c != nil {
		s += fmt.Sprintf("; Lin's concordance %.4f", c.CCC.Estimate)
	}
	return s + "."
}

var verdictClass = map[string]string{"within": "good", "exceeds": "bad", "inconclusive": "warn"}

func verdictText(v string) string {
	if v == "" {
		return "-"
	}
	return v
}

// levelTable is the bias at the decision levels under every fit; without,
// when not nil, adds the verdict without the excluded samples beside each
// row.
func levelTable(c *wire.Comparison, unit string, without *wire.Comparison) Table {
	t := Table{Caption: "Bias y − x at the decision levels", Header: []string{withUnit("level", unit), "fit", withUnit("bias", unit), withUnit(fmt.Sprintf("%g %% CI", 100*c.Confidence), unit), "bias (%)", withUnit("allowable", unit), "verdict"},
		Numeric: []int{0, 2, 3, 4, 5}}
	if without != nil {
		t.Header = append(t.Header, "verdict without "+strings.Join(without.Excluded, ", "))
		t.Caption += "; the last column is the verdict without the excluded samples"
	}
	for i, l := range c.DecisionLevels {
		allow := "-"
		if l.Allowable != nil {
			allow = "±" + g(l.Allowable.Limit)
		}
		lv := g(l.Level)
		if l.Extrapolated {
			lv += " (extrapolated)"
		}
		c.Fits.Each(func(name string, _ *wire.MethodFit) {
			f := l.Fits[name]
			cells := []string{lv, methodName(name), g(f.Bias.Estimate), ciText(f.Bias.CI), pctText(f.BiasPercent), allow, verdictText(f.Verdict)}
			row := Row{Class: verdictClass[f.Verdict], Cells: cells}
			if without != nil {
				v := "-"
				if i < len(without.DecisionLevels) {
					if wf, ok := without.DecisionLevels[i].Fits[name]; ok {
						v = verdictText(wf.Verdict)
					}
				}
				row.Cells = append(row.Cells, v)
				row.Class = "" // two verdicts: neither colours the row's last cell alone
				if v != verdictText(f.Verdict) {
					row.Class = "warn"
				}
			}
			t.Rows = append(t.Rows, row)
		})
	}
	return t
}

// robustnessTable is the robustness panel: the verdict at each level
// under every fit, with and without the flagged outliers.
func robustnessTable(r *wire.RobustnessOut, unit string) Table {
	t := Table{Caption: "Does each verdict hold under every fit the data allow, and without the flagged outliers?", Header: []string{withUnit("level", unit), "verdicts", "holds"}, Numeric: []int{0}}
	for _, l := range r.Levels {
		var vs []string
		for _, v := range l.Verdicts {
			s := methodName(v.Method)
			if v.WithoutOutliers {
				s += " without outliers"
			}
			vs = append(vs, s+": "+verdictText(v.Verdict))
		}
		row := Row{Cells: []string{g(l.Level), strings.Join(vs, "; "), yesNo(l.Holds)}, Class: "good"}
		if !l.Holds {
			row.Class = "warn"
		}
		t.Rows = append(t.Rows, row)
	}
	return t
}

// agreementSection is the Bland–Altman analysis with what the limits
// describe, the form the data call for, Lin's concordance and the
// repeatability of each method.
func agreementSection(a *wire.AgreementOut, conf float64, unit string) Section {
	ci := fmt.Sprintf("%g %% CI", 100*conf)
	sec := Section{Heading: "Agreement"}
	if a.Reading != "" {
		sec.Text = append(sec.Text, a.Reading)
	}
	sec.Text = append(sec.Text, a.ProportionalBias.Reading)
	if f := a.LimitsForm; f != nil && a.Reading == "" {
		sec.Text = append(sec.Text, fmt.Sprintf("Limits chosen: %s. Why: %s.", formName(f.Form), strings.TrimSuffix(f.Reason, ".")))
	}
	describes := "single measurements"
	if a.Describes == "means_of_replicates" {
		describes = "means of the replicates"
	}
	ag := Table{Caption: "Agreement (Bland–Altman): constant limits, describing " + describes, Header: []string{"quantity", withUnit("estimate", unit), withUnit(ci, unit)}, Numeric: []int{1, 2}}
	ag.Rows = append(ag.Rows,
		Row{Cells: []string{"mean difference y − x", g(a.MeanDifference.Estimate), ciText(a.MeanDifference.CI)}},
		Row{Cells: []string{"SD of differences", g(a.SDDifference), "-"}},
		Row{Cells: []string{"lower limit of agreement", g(a.LimitsOfAgreement.Lower.Estimate), ciText(a.LimitsOfAgreement.Lower.CI)}},
		Row{Cells: []string{"upper limit of agreement", g(a.LimitsOfAgreement.Upper.Estimate), ciText(a.LimitsOfAgreement.Upper.CI)}})
	if s := a.SingleMeasurements; s != nil {
		sdRow := "SD of single differences (within-sample variances added back)"
		if s.Pairs != nil {
			sdRow = fmt.Sprintf("SD of single differences (true value changing between runs, %d pairs by run)", *s.Pairs)
			sec.Text = append(sec.Text, "Design of the limits for single measurements: "+s.DesignReason+".")
		}
		ag.Rows = append(ag.Rows,
			Row{Cells: []string{sdRow, g(s.SD), "-"}},
			Row{Cells: []string{"lower limit, single measurements", g(s.LimitsOfAgreement.Lower.Estimate), ciText(s.LimitsOfAgreement.Lower.CI)}},
			Row{Cells: []string{"upper limit, single measurements", g(s.LimitsOfAgreement.Upper.Estimate), ciText(s.LimitsOfAgreement.Upper.CI)}})
	}
	sec.Tables = append(sec.Tables, ag)
	if pc := a.Percent; pc != nil {
		pt := Table{Caption: "Differences in percent of the level", Header: []string{"quantity", "estimate (%)", ci + " (%)"}, Numeric: []int{1, 2}}
		pt.Rows = append(pt.Rows,
			Row{Cells: []string{"mean difference", g(pc.MeanDifference.Estimate), ciText(pc.MeanDifference.CI)}},
			Row{Cells: []string{"limits of agreement", g(pc.LimitsOfAgreement.Lower.Estimate) + " to " + g(pc.LimitsOfAgreement.Upper.Estimate), "-"}})
		sec.Tables = append(sec.Tables, pt)
	}
	if r := a.RegressionLimits; r != nil {
		rt := Table{Caption: fmt.Sprintf("Regression-based limits (Bland & Altman 1999, §3.2), for levels %s to %s%s", g(r.MinLevel), g(r.MaxLevel), unitAfter(unit)),
			Header: []string{"line", "intercept", "slope", "p of slope"}, Numeric: []int{1, 2, 3}}
		rt.Rows = append(rt.Rows,
			Row{Cells: []string{"bias: differences on the mean A", g(r.Bias.Intercept.Estimate), g(r.Bias.Slope.Estimate), p2(r.Bias.PValue)}},
			Row{Cells: []string{fmt.Sprintf("spread: |residuals| on A (limits bias ± %s × spread)", g(r.Multiplier)), g(r.Spread.Intercept.Estimate), g(r.Spread.Slope.Estimate), p2(r.Spread.PValue)}})
		sec.Tables = append(sec.Tables, rt)
	}
	if r := a.RatioLimits; r != nil {
		rt := Table{Caption: "Ratio limits (log scale, back-transformed)", Header: []string{"quantity", "ratio y/x", ci}, Numeric: []int{1, 2}}
		rt.Rows = append(rt.Rows,
			Row{Cells: []string{"mean ratio", g(r.Ratio.Estimate), ciText(r.Ratio.CI)}},
			Row{Cells: []string{"lower limit", g(r.Lower.Estimate), ciText(r.Lower.CI)}},
			Row{Cells: []string{"upper limit", g(r.Upper.Estimate), ciText(r.Upper.CI)}})
		sec.Tables = append(sec.Tables, rt)
	}
	if c := a.Concordance; c != nil {
		sec.Text = append(sec.Text, fmt.Sprintf("Lin's concordance correlation %.4f (%s %s) = precision ρ %.4f × accuracy C_b %.4f: ρ measures the scatter about the best line, C_b how far that line is from y = x.",
			c.CCC.Estimate, ci, ciTextF(c.CCC.CI, "%.4f"), c.Precision, c.Accuracy))
	}
	if r := a.Repeatability; r != nil {
		rt := Table{Caption: "Repeatability of each method (from the replicates)", Header: []string{"method", "samples", "df", withUnit("within-sample SD", unit), withUnit(ci, unit), withUnit("repeatability coefficient", unit), withUnit(ci, unit)}, Numeric: []int{1, 2, 3, 4, 5, 6}}
		for _, m := range []struct {
			name string
			r    *wire.MethodRepeatabilityOut
		}{{"x (comparative)", r.X}, {"y (candidate)", r.Y}} {
			if m.r != nil {
				rt.Rows = append(rt.Rows, Row{Cells: []string{m.name, strconv.Itoa(m.r.Subjects), strconv.Itoa(m.r.DF), g(m.r.WithinSD.Estimate), ciText(m.r.WithinSD.CI), g(m.r.Coefficient.Estimate), ciText(m.r.Coefficient.CI)}})
			}
		}
		sec.Text = append(sec.Text, "The repeatability coefficient is the difference two repeated measurements of one sample by one method stay within for about 95 % of samples (Bland & Altman 1999).")
		sec.Tables = append(sec.Tables, rt)
	}
	return sec
}

func formName(f string) string {
	switch f {
	case "ratio":
		return "ratio limits (the differences are proportional to the level)"
	case "regression":
		return "regression-based limits (the bias or the spread changes with the level)"
	}
	return "constant limits"
}

func ciTextF(c wire.CI, f string) string {
	if c.IsZero() {
		return "-"
	}
	return fmt.Sprintf(f+" to "+f, c.Lower, c.Upper)
}

// allowableText states the allowable bias as the request gave it.
func allowableText(req *wire.CompareRequest, unit string) string {
	var parts []string
	if a := req.AllowableBias; a != nil {
		parts = append(parts, "every level: "+allowText(a, unit))
	}
	for _, l := range req.DecisionLevels {
		if l.AllowableBias != nil {
			parts = append(parts, fmt.Sprintf("at %s%s: %s", g(l.Level), unitAfter(unit), allowText(l.AllowableBias, unit)))
		}
	}
	if len(parts) == 0 {
		return "none given (no verdicts)"
	}
	return strings.Join(parts, "; ")
}

func allowText(a *wire.Allowable, unit string) string {
	var s []string
	if a.Absolute != nil {
		s = append(s, "±"+g(*a.Absolute)+unitAfter(unit))
	}
	if a.Percent != nil {
		s = append(s, "±"+g(*a.Percent)+" % of the level")
	}
	if len(s) == 2 {
		return s[0] + " or " + s[1] + ", whichever is greater"
	}
	return strings.Join(s, "")
}

// compareSummary is the outcome first, for a reviewer's ten seconds: the
// recommended fit and why, the outcome at the decision levels (with and
// without the excluded samples), the agreement in one line; alerts are the
// warnings that change how it reads.
func compareSummary(resp *wire.CompareResponse) (summary, alerts []string) {
	c, w, unit := &resp.Comparison, resp.WithoutExcluded, resp.Unit
	summary = append(summary, c.Recommendation.Text)
	if c.Outcome != nil {
		summary = append(summary, "Outcome at the decision levels: "+c.Outcome.Text)
	}
	if w != nil && w.Outcome != nil {
		summary = append(summary, fmt.Sprintf("Without %s: %s", strings.Join(w.Excluded, ", "), w.Outcome.Text))
	}
	summary = append(summary, agreementLine(&c.Agreement, unit))
	var extra []float64
	for _, l := range c.DecisionLevels {
		if l.Extrapolated {
			extra = append(extra, l.Level)
		}
	}
	if len(extra) > 0 {
		alerts = append(alerts, fmt.Sprintf("Decision level %s lies outside the range of the data; its bias is extrapolated.", listText(extra, unitAfter(unit))))
	}
	if r := c.Robustness; r != nil {
		for _, l := range r.Levels {
			if !l.Holds {
				alerts = append(alerts, l.Reading)
			}
		}
	}
	if y := c.Fits.York; yorkInconsistent(y) {
		alerts = append(alerts, yorkText(y))
	}
	return summary, append(alerts, failedChecks(c.Diagnostics)...)
}

// CompareReport builds the HTML report of a method-comparison study;
// drawing its plots stops when ctx is done.
func CompareReport(ctx context.Context, req *wire.CompareRequest, resp *wire.CompareResponse, sc *study.Comparison, made Made) (*Page, error) {
	ps := comparePlots(resp, sc)
	c := &resp.Comparison
	unit := resp.Unit
	p := &Page{
		Title:    "Method comparison: " + resp.YName + " against " + resp.XName,
		Subtitle: fmt.Sprintf("%d samples · %s · %s", c.N, map[bool]string{true: "with replicates", false: "single measurements"}[c.Replicates], resp.SignConvention),
		Meta:     made.header(),
		Caution:  study.Caution,
		Warnings: warningTexts(c.Warnings),
	}
	w := resp.WithoutExcluded

	// Outcome first.
	p.Summary, p.Alerts = compareSummary(resp)

	if s, ok := inputSection(resp.Input); ok {
		p.Sections = append(p.Sections, s)
	}
	p.Sections = append(p.Sections, Section{Heading: "Error model", Text: []string{c.ErrorModel.Reading,
		fmt.Sprintf("Model used: %s (%s); λ = %s (%s).", c.ErrorModel.Model, c.ErrorModel.Source, g(c.ErrorModel.Lambda), lambdaSourceText(c.ErrorModel.LambdaSource))}})
	if len(c.DecisionLevels) > 0 {
		sec := Section{Heading: "Decision levels", Tables: []Table{levelTable(c, unit, w)}}
		if c.Outcome != nil {
			sec.Text = append(sec.Text, "Outcome: "+c.Outcome.Text)
		}
		if r := c.Robustness; r != nil {
			sec.Text = append(sec.Text, "Robustness: "+r.Reading)
			sec.Tables = append(sec.Tables, robustnessTable(r, unit))
		}
		p.Sections = append(p.Sections, sec)
	}
	fits := Section{Heading: "Fits", Tables: []Table{fitsTable(c.Fits, c.Confidence, unit)}}
	if t, ok := uncertaintyTable(c.Fits); ok {
		fits.Tables = append(fits.Tables, t)
	}
	if pb := c.Fits.PassingBablok; pb != nil && pb.KendallTau != nil {
		fits.Text = append(fits.Text, fmt.Sprintf("Passing–Bablok precondition: Kendall's τ = %s (p %s); cusum linearity p = %s.", g(pb.KendallTau.Statistic), p2(pb.KendallTau.PValue), p2(pb.Cusum.PValue)))
	}
	if s := yorkText(c.Fits.York); s != "" {
		fits.Text = append(fits.Text, s)
	}
	p.Sections = append(p.Sections, fits)
	p.Sections = append(p.Sections, agreementSection(&c.Agreement, c.Confidence, unit))
	if s := olsSection(c.OLSBias, c.Confidence, unit); s != nil {
		p.Sections = append(p.Sections, *s)
	}
	p.Sections = append(p.Sections, diagSection(c.Diagnostics))
	figs, err := ps.figures(ctx)
	if err != nil {
		return nil, err
	}
	p.Sections = append(p.Sections, Section{Heading: "Plots", Figures: figs})
	if w != nil {
		t := fitsTable(w.Fits, w.Confidence, unit)
		t.Caption = "Fitted lines without " + strings.Join(w.Excluded, ", ")
		sec := Section{Heading: "Without the excluded samples", Text: []string{w.Recommendation.Text, agreementLine(&w.Agreement, unit)}, Tables: []Table{t}}
		if len(w.DecisionLevels) > 0 {
			lt := levelTable(w, unit, nil)
			lt.Caption += " without " + strings.Join(w.Excluded, ", ")
			sec.Tables = append(sec.Tables, lt)
		}
		p.Sections = append(p.Sections, sec)
	}

	kv := made.inputKVs(len(req.Samples), "samples", resp.Input)
	kv = append(kv,
		KV{Key: "Methods", Value: methodsText(c.Fits)},
		KV{Key: "Error model", Value: fmt.Sprintf("%s (%s): %s", c.ErrorModel.Model, c.ErrorModel.Source, c.ErrorModel.Reading)},
		KV{Key: "λ", Value: fmt.Sprintf("%s (%s)", g(c.ErrorModel.Lambda), lambdaSourceText(c.ErrorModel.LambdaSource))},
		KV{Key: "Confidence", Value: percent(c.Confidence) + " for every interval"},
		KV{Key: "Bootstrap", Value: bootstrapText(c.Fits)},
		KV{Key: "Decision levels", Value: levelsText(req, unit)},
		KV{Key: "Allowable bias", Value: allowableText(req, unit)},
		KV{Key: "Limits of agreement", Value: limitsText(&c.Agreement)},
		KV{Key: "Outlier test", Value: c.Diagnostics.Outliers.Method + "; flagged samples are kept"},
		KV{Key: "Sign convention", Value: resp.SignConvention},
		KV{Key: "Exclusions", Value: exclusionsText(req.Exclude)})
	if unit != "" {
		kv = append(kv, KV{Key: "Unit", Value: unit})
	}
	p.Provenance = kv
	p.Appendix = withSkipped(compareAppendix(req, c.Diagnostics, unit, resp.Input, made), resp.Input)
	return p, nil
}

func levelsText(req *wire.CompareRequest, unit string) string {
	if len(req.DecisionLevels) == 0 {
		return "none"
	}
	v := make([]float64, len(req.DecisionLevels))
	for i, l := range req.DecisionLevels {
		v[i] = l.Level
	}
	return listText(v, unitAfter(unit))
}

func limitsText(a *wire.AgreementOut) string {
	s := fmt.Sprintf("mean ± %s SD", g(a.Multiplier))
	if a.LimitsForm != nil {
		s += fmt.Sprintf("; form: %s (test level α = %g)", a.LimitsForm.Form, a.LimitsForm.Alpha)
	}
	return s
}

func exclusionsText(ids []string) string {
	if len(ids) == 0 {
		return "none"
	}
	return strings.Join(ids, ", ") + ": named in the request's exclude (no reason is recorded with an unsaved request); the report shows the analysis with and without them"
}

// compareAppendix lists the samples as given: the replicates of each
// method, their uncertainties and run order; excluded samples and flagged
// outliers are marked.
func compareAppendix(req *wire.CompareRequest, diag wire.DiagnosticsOut, unit string, how *wire.InputOut, made Made) Section {
	n := len(req.Samples)
	if n > MaxAppendixRows {
		return appendixTooLarge(n, made)
	}
	var hasSX, hasSY, hasOrder bool
	for _, s := range req.Samples {
		hasSX, hasSY, hasOrder = hasSX || s.SX != nil, hasSY || s.SY != nil, hasOrder || s.Order != nil
	}
	t := Table{Caption: "Samples", Header: []string{"row", "id", withUnit("x readings", unit), withUnit("y readings", unit)}}
	for _, c := range []struct {
		h  string
		on bool
	}{{"sx", hasSX}, {"sy", hasSY}, {"order", hasOrder}} {
		if c.on {
			t.Header = append(t.Header, c.h)
			t.Numeric = append(t.Numeric, len(t.Header)-1)
		}
	}
	t.Header = append(t.Header, "mark")
	t.Numeric = append(t.Numeric, 0)
	excluded := map[string]bool{}
	for _, id := range req.Exclude {
		excluded[id] = true
	}
	flagged := flaggedIDs(diag)
	for i, s := range req.Samples {
		cells := []string{strconv.Itoa(i + 1), s.ID, valuesText(s.X), valuesText(s.Y)}
		for _, c := range []struct {
			v  *float64
			on bool
		}{{s.SX, hasSX}, {s.SY, hasSY}, {s.Order, hasOrder}} {
			if c.on {
				cells = append(cells, optExact(c.v))
			}
		}
		var marks []string
		row := Row{}
		if excluded[s.ID] && s.ID != "" {
			marks, row.Class = append(marks, "excluded (analysed with and without)"), "bad"
		}
		if flagged[i] {
			marks = append(marks, "flagged outlier")
			if row.Class == "" {
				row.Class = "warn"
			}
		}
		row.Cells = append(cells, strings.Join(marks, "; "))
		t.Rows = append(t.Rows, row)
	}
	return Section{Heading: "Appendix: the data as analysed", ID: "appendix",
		Text:   []string{appendixText(made, how, "Excluded samples and flagged outliers are marked; the main analysis keeps every sample, the section without the excluded samples leaves the excluded ones out.")},
		Tables: []Table{t}}
}
