package report

import (
	"fmt"
	"io"
	"strings"
	"text/tabwriter"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// WriteText writes a fit as a table for a terminal.
func WriteText(w io.Writer, r *wire.FitResponse) error {
	var b strings.Builder
	if name := primaryName(r.Fits); name != "" {
		sum, alerts := fitSummary(r, name, wire.DiagnosticsOut{})
		writeSummaryText(&b, sum, alerts)
	}
	fmt.Fprintf(&b, "n = %d, intervals at %g %%\n\n", r.N, 100*r.Confidence)
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "method\tslope\tse\tCI\tintercept\tse\tCI\tnotes")
	row := func(name string, f *wire.MethodFit) {
		if f == nil {
			return
		}
		var notes []string
		if f.Lambda != nil {
			notes = append(notes, fmt.Sprintf("λ = %.4g (%s)", *f.Lambda, f.LambdaSource))
		}
		if f.RSquared != nil {
			notes = append(notes, fmt.Sprintf("R² = %.6g", *f.RSquared))
		}
		if f.MSWD != nil {
			notes = append(notes, fmt.Sprintf("MSWD = %.4g, p = %.3g", *f.MSWD, *f.PValue))
		}
		fmt.Fprintf(tw, "%s\t%.6g\t%s\t%s\t%.6g\t%s\t%s\t%s\n", methodName(name),
			f.Slope.Estimate, textSE(f.Slope.SE), textCI(f.Slope.CI, "%.6g"),
			f.Intercept.Estimate, textSE(f.Intercept.SE), textCI(f.Intercept.CI, "%.6g"),
			strings.Join(notes, "; "))
		if j := f.Jackknife; j != nil {
			fmt.Fprintf(tw, "  jackknife\t\t%.4g\t[%.6g, %.6g]\t\t%.4g\t[%.6g, %.6g]\t\n",
				j.Slope.SE, j.Slope.CI.Lower, j.Slope.CI.Upper, j.Intercept.SE, j.Intercept.CI.Lower, j.Intercept.CI.Upper)
		}
		if bs := f.Bootstrap; bs != nil {
			fmtB := func(p wire.BootParamOut) string {
				if p.BCa != nil {
					return fmt.Sprintf("[%.6g, %.6g]", p.BCa.Lower, p.BCa.Upper)
				}
				if p.Percentile != nil {
					return fmt.Sprintf("[%.6g, %.6g] pct", p.Percentile.Lower, p.Percentile.Upper)
				}
				return "refused"
			}
			fmt.Fprintf(tw, "  bootstrap BCa\t\t%s\t%s\t\t%s\t%s\tB = %d, seed %d, %s\n",
				textSE(bs.Slope.SE), fmtB(bs.Slope), textSE(bs.Intercept.SE), fmtB(bs.Intercept), bs.Resamples, bs.Seed, bs.Scheme)
		}
	}
	r.Fits.Each(row)
	if err := tw.Flush(); err != nil {
		return err
	}
	var ferr error
	r.Fits.Each(func(name string, f *wire.MethodFit) {
		if len(f.At) == 0 || ferr != nil {
			return
		}
		if !r.SameScale() {
			fmt.Fprintf(&b, "\n%s at the requested x values:\n", methodName(name))
			tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
			fmt.Fprintln(tw, "  x\tfitted y\tCI")
			for _, a := range f.At {
				fmt.Fprintf(tw, "  %s\t%.6g\t%s\n", atX(a), a.Y.Estimate, textCI(a.Y.CI, "%.6g"))
			}
			ferr = tw.Flush()
			return
		}
		fmt.Fprintf(&b, "\n%s at decision levels:\n", methodName(name))
		tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "  x\tfitted y\tCI\tbias y − x\tCI")
		for _, a := range f.At {
			fmt.Fprintf(tw, "  %s\t%.6g\t%s\t%.4g\t%s\n", atX(a), a.Y.Estimate, textCI(a.Y.CI, "%.6g"),
				a.Bias.Estimate, textCI(a.Bias.CI, "%.4g"))
		}
		ferr = tw.Flush()
	})
	if ferr != nil {
		return ferr
	}
	if len(r.OLSBias) > 0 {
		b.WriteString("\nHow far OLS is off:\n")
		for _, c := range r.OLSBias {
			fmt.Fprintf(&b, "  %s\n", olsSentence(c, r.Confidence, unitOf(r)))
		}
	}
	writeInputText(&b, r.Input)
	if len(r.Warnings) > 0 {
		b.WriteString("\nWarnings:\n")
		for _, wn := range r.Warnings {
			if wn.Method != "" {
				fmt.Fprintf(&b, "  [%s] %s\n", methodName(wn.Method), wn.Message)
			} else {
				fmt.Fprintf(&b, "  %s\n", wn.Message)
			}
		}
	}
	writeSettingsText(&b, []KV{
		{Key: "methods", Value: methodsText(r.Fits)},
		{Key: "λ", Value: lambdaText(r.Fits)},
		{Key: "confidence", Value: percent(r.Confidence)},
		{Key: "bootstrap", Value: bootstrapText(r.Fits)}})
	_, err := io.WriteString(w, b.String())
	return err
}

// primaryName is the fit a report draws when none is named: the lowest
// report rank of the registry among the fits present.
func primaryName(fs wire.Fits) string {
	best, rank := "", 0
	fs.Each(func(name string, _ *wire.MethodFit) {
		if m := study.MethodNamed(name); m != nil && (best == "" || m.ReportRank < rank) {
			best, rank = name, m.ReportRank
		}
	})
	return best
}

// writeSummaryText writes the outcome first, with the warnings that change
// how it reads.
func writeSummaryText(b *strings.Builder, summary, alerts []string) {
	b.WriteString("Summary:\n")
	for _, s := range summary {
		fmt.Fprintf(b, "  %s\n", s)
	}
	if len(alerts) > 0 {
		b.WriteString("Read with care:\n")
		for _, s := range alerts {
			fmt.Fprintf(b, "  - %s\n", s)
		}
	}
	b.WriteString("\n")
}

// writeSettingsText writes the settings that change a number.
func writeSettingsText(b *strings.Builder, kv []KV) {
	b.WriteString("\nSettings:\n")
	tw := tabwriter.NewWriter(b, 0, 0, 2, ' ', 0)
	for _, e := range kv {
		fmt.Fprintf(tw, "  %s\t%s\n", e.Key, e.Value)
	}
	_ = tw.Flush()
}

// textSE prints an optional standard error, "-" where there is none.
func textSE(se *float64) string {
	if se == nil {
		return "-"
	}
	return fmt.Sprintf("%.4g", *se)
}

// textCI prints an interval as [lower, upper] in the format of one
// number, "-" where there is none.
func textCI(c wire.CI, num string) string {
	if c.IsZero() {
		return "-"
	}
	return fmt.Sprintf("["+num+", "+num+"]", c.Lower, c.Upper)
}

// WriteCompareText writes a method-comparison study for a terminal.
func WriteCompareText(w io.Writer, r *wire.CompareResponse) error {
	var b strings.Builder
	sum, alerts := compareSummary(r)
	writeSummaryText(&b, sum, alerts)
	writeComparisonText(&b, r, &r.Comparison)
	if r.WithoutExcluded != nil {
		fmt.Fprintf(&b, "\n==== Without %s ====\n", strings.Join(r.WithoutExcluded.Excluded, ", "))
		writeComparisonText(&b, r, r.WithoutExcluded)
	}
	c := &r.Comparison
	levels, allow := "none", "none given (no verdicts)"
	var lv, al []string
	for _, l := range c.DecisionLevels {
		lv = append(lv, g(l.Level))
		if a := l.Allowable; a != nil {
			al = append(al, fmt.Sprintf("at %s: %s", g(l.Level), allowText(&wire.Allowable{Absolute: a.Absolute, Percent: a.Percent}, r.Unit)))
		}
	}
	if len(lv) > 0 {
		levels = strings.Join(lv, ", ") + unitAfter(r.Unit)
	}
	if len(al) > 0 {
		allow = strings.Join(al, "; ")
	}
	excl := "none"
	if r.WithoutExcluded != nil {
		excl = strings.Join(r.WithoutExcluded.Excluded, ", ") + " (analysed with and without)"
	}
	writeInputText(&b, r.Input)
	writeSettingsText(&b, []KV{
		{Key: "methods", Value: methodsText(c.Fits)},
		{Key: "error model", Value: c.ErrorModel.Model + " (" + c.ErrorModel.Source + ")"},
		{Key: "λ", Value: fmt.Sprintf("%s (%s)", g(c.ErrorModel.Lambda), lambdaSourceText(c.ErrorModel.LambdaSource))},
		{Key: "confidence", Value: percent(c.Confidence)},
		{Key: "bootstrap", Value: bootstrapText(c.Fits)},
		{Key: "decision levels", Value: levels},
		{Key: "allowable bias", Value: allow},
		{Key: "limits of agreement", Value: limitsText(&c.Agreement)},
		{Key: "exclusions", Value: excl}})
	fmt.Fprintf(&b, "\n%s\n%s\n", r.SignConvention, r.Caution)
	_, err := io.WriteString(w, b.String())
	return err
}

func writeComparisonText(b *strings.Builder, r *wire.CompareResponse, c *wire.Comparison) {
	fmt.Fprintf(b, "%s (y) against %s (x)", r.YName, r.XName)
	if r.Unit != "" {
		fmt.Fprintf(b, ", %s", r.Unit)
	}
	fmt.Fprintf(b, ": %d samples, intervals at %g %%\n", c.N, 100*c.Confidence)
	fmt.Fprintf(b, "Error model: %s (%s), λ = %.4g (%s). %s\n\n", c.ErrorModel.Model, c.ErrorModel.Source,
		c.ErrorModel.Lambda, c.ErrorModel.LambdaSource, c.ErrorModel.Reading)
	tw := tabwriter.NewWriter(b, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "fit\tslope\tCI\tintercept\tCI")
	c.Fits.Each(func(name string, f *wire.MethodFit) {
		fmt.Fprintf(tw, "%s\t%.5g\t%s\t%.5g\t%s\n", methodName(name), f.Slope.Estimate, textCI(f.Slope.CI, "%.5g"),
			f.Intercept.Estimate, textCI(f.Intercept.CI, "%.5g"))
	})
	_ = tw.Flush()
	a := c.Agreement
	fmt.Fprintf(b, "\nBland–Altman (y − x): mean difference %.4g [%.4g, %.4g], SD %.4g, limits of agreement %.4g to %.4g\n",
		a.MeanDifference.Estimate, a.MeanDifference.CI.Lower, a.MeanDifference.CI.Upper, a.SDDifference,
		a.LimitsOfAgreement.Lower.Estimate, a.LimitsOfAgreement.Upper.Estimate)
	fmt.Fprintf(b, "  %s\n", a.ProportionalBias.Reading)
	writeAgreementText(b, &a)
	if len(c.DecisionLevels) > 0 {
		b.WriteString("\nBias at decision levels:\n")
		tw = tabwriter.NewWriter(b, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "  level\tfit\tbias\tCI\tbias %\tallowable\tverdict")
		for _, l := range c.DecisionLevels {
			allow := "-"
			if l.Allowable != nil {
				allow = fmt.Sprintf("±%.4g", l.Allowable.Limit)
			}
			c.Fits.Each(func(name string, _ *wire.MethodFit) {
				f := l.Fits[name]
				v := f.Verdict
				if v == "" {
					v = "-"
				}
				pct := "-"
				if f.BiasPercent != nil {
					pct = fmt.Sprintf("%.3g", f.BiasPercent.Estimate)
				}
				lv := fmt.Sprintf("%g", l.Level)
				if l.Extrapolated {
					lv += " (extrapolated)"
				}
				fmt.Fprintf(tw, "  %s\t%s\t%.4g\t%s\t%s\t%s\t%s\n", lv, methodName(name), f.Bias.Estimate, textCI(f.Bias.CI, "%.4g"),
					pct, allow, v)
			})
		}
		_ = tw.Flush()
		writeVerdictsText(b, c)
	}
	d := c.Diagnostics
	fmt.Fprintf(b, "\nChecks on the %s residuals (%s):\n", d.ResidualsOf, d.Scale)
	for _, s := range []string{d.Normality.Reading, d.Independence.Reading, d.Variance.Reading, d.Linearity.Reading, d.Outliers.Reading} {
		fmt.Fprintf(b, "  - %s\n", s)
	}
	if len(c.OLSBias) > 0 {
		b.WriteString("\nHow far OLS is off:\n")
		for _, o := range c.OLSBias {
			fmt.Fprintf(b, "  %s\n", olsSentence(o, c.Confidence, r.Unit))
		}
	}
	fmt.Fprintf(b, "\nRecommendation: %s\n", c.Recommendation.Text)
	if len(c.Warnings) > 0 {
		b.WriteString("\nWarnings:\n")
		for _, wn := range c.Warnings {
			fmt.Fprintf(b, "  %s\n", wn.Message)
		}
	}
}

// writeAgreementText adds the agreement beyond the constant limits: what
// the limits describe, the form the data call for, the concordance and
// the repeatabilities.
func writeAgreementText(b *strings.Builder, a *wire.AgreementOut) {
	if a.Reading != "" {
		fmt.Fprintf(b, "  %s\n", a.Reading)
	}
	if s := a.SingleMeasurements; s != nil && s.MeansLimits != nil {
		fmt.Fprintf(b, "  Single measurements: limits %.4g %s to %.4g %s (SD %.4g; means alone: %.4g to %.4g)\n",
			s.LimitsOfAgreement.Lower.Estimate, textCI(s.LimitsOfAgreement.Lower.CI, "%.4g"),
			s.LimitsOfAgreement.Upper.Estimate, textCI(s.LimitsOfAgreement.Upper.CI, "%.4g"), s.SD, s.MeansLimits.Lower, s.MeansLimits.Upper)
	} else if s != nil && s.Pairs != nil {
		fmt.Fprintf(b, "  Single measurements, true value changing between runs (%d pairs): limits %.4g %s to %.4g %s (SD %.4g: within-sample %.4g, between-sample %.4g)\n",
			*s.Pairs, s.LimitsOfAgreement.Lower.Estimate, textCI(s.LimitsOfAgreement.Lower.CI, "%.4g"),
			s.LimitsOfAgreement.Upper.Estimate, textCI(s.LimitsOfAgreement.Upper.CI, "%.4g"), s.SD, *s.WithinSD, *s.BetweenSD)
		fmt.Fprintf(b, "  Design: %s.\n", s.DesignReason)
	}
	if c := a.Concordance; c != nil {
		fmt.Fprintf(b, "  Lin's concordance %.4f %s: precision (ρ) %.4f, accuracy (C_b) %.4f\n", c.CCC.Estimate, textCI(c.CCC.CI, "%.4f"), c.Precision, c.Accuracy)
	}
	if r := a.Repeatability; r != nil {
		for _, m := range []struct {
			name string
			r    *wire.MethodRepeatabilityOut
		}{{"x", r.X}, {"y", r.Y}} {
			if m.r != nil {
				fmt.Fprintf(b, "  Repeatability of %s: within-sample SD %.4g %s, repeatability coefficient %.4g %s (%d df)\n", m.name,
					m.r.WithinSD.Estimate, textCI(m.r.WithinSD.CI, "%.4g"), m.r.Coefficient.Estimate, textCI(m.r.Coefficient.CI, "%.4g"), m.r.DF)
			}
		}
	}
}

// writeVerdictsText adds the outcome and the robustness panel.
func writeVerdictsText(b *strings.Builder, c *wire.Comparison) {
	if c.Outcome != nil {
		fmt.Fprintf(b, "Outcome: %s\n", c.Outcome.Text)
	}
	if r := c.Robustness; r != nil {
		fmt.Fprintf(b, "Robustness: %s\n", r.Reading)
		for _, l := range r.Levels {
			fmt.Fprintf(b, "  - %s\n", l.Reading)
		}
	}
}

// atX is an "at" value as printed: "(extrapolated)" after one outside the
// range of the data.
func atX(a wire.AtOut) string {
	if a.Extrapolated {
		return fmt.Sprintf("%g (extrapolated)", a.X)
	}
	return fmt.Sprintf("%g", a.X)
}
