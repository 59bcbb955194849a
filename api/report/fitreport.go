package report

import (
	"context"
	"fmt"
	"slices"
	"strconv"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// failedChecks are the readings of the assumption checks that failed
// (a test at p < 0.05, as the diagnostics judge them, or outliers
// flagged): each changes how the line is read.
func failedChecks(d wire.DiagnosticsOut) []string {
	low := func(t *wire.TestOut) bool { return t != nil && t.PValue < 0.05 }
	var out []string
	if low(d.Normality.ShapiroWilk) {
		out = append(out, d.Normality.Reading)
	}
	if low(d.Independence.DurbinWatson) || low(d.Independence.Runs) {
		out = append(out, d.Independence.Reading)
	}
	if low(d.Variance.BreuschPagan) || (low(d.Variance.Spearman) && d.Variance.Spearman.Statistic > 0) {
		out = append(out, d.Variance.Reading)
	}
	if (d.Linearity.Cusum != nil && !d.Linearity.Cusum.Linear) || low(d.Linearity.LackOfFit) {
		out = append(out, d.Linearity.Reading)
	}
	if len(d.Outliers.Flagged) > 0 {
		out = append(out, d.Outliers.Reading)
	}
	return out
}

// flaggedIDs are the ids of the flagged outliers (by input index).
func flaggedIDs(d wire.DiagnosticsOut) map[int]bool {
	m := map[int]bool{}
	for _, o := range d.Outliers.Flagged {
		m[o.Index] = true
	}
	return m
}

// whyFit says why a line fit's report draws the line it draws (the
// registry's report order: York, Deming, weighted Deming, Passing–Bablok,
// OLS, the first fitted).
func whyFit(name string, m *wire.MethodFit) string {
	switch name {
	case "york":
		return "it uses the stated uncertainties of x and y of every point"
	case "deming":
		if m.Lambda == nil {
			return "it allows for error in x and y"
		}
		return fmt.Sprintf("it allows for error in x and y with λ = %s (%s)", g(*m.Lambda), lambdaSourceText(m.LambdaSource))
	case "weighted_deming":
		return "it allows for error in x and y growing with the level"
	case "passing_bablok":
		return "it allows for error in x and y without assuming normal errors"
	}
	return "it is the only line fitted; it assumes x is without error"
}

// fitSummary is a line fit's outcome first: the reported line and why,
// how far OLS is from it; alerts are the warnings that change how it reads.
func fitSummary(resp *wire.FitResponse, fitName string, diag wire.DiagnosticsOut) (summary, alerts []string) {
	m := resp.Fits.Get(fitName)
	yu := resp.YUnit
	if yu == "" && resp.SameScale() {
		yu = resp.XUnit
	}
	summary = append(summary, fmt.Sprintf("Reported line: %s, because %s. Slope %s (%g %% CI %s), intercept %s%s (%s).", methodName(fitName), whyFit(fitName, m),
		g(m.Slope.Estimate), 100*resp.Confidence, ciText(m.Slope.CI), g(m.Intercept.Estimate), unitAfter(yu), ciText(m.Intercept.CI)))
	for _, o := range resp.OLSBias {
		if o.Method == fitName {
			summary = append(summary, olsSentence(o, resp.Confidence, unitOf(resp)))
		}
	}
	var extra []float64
	for _, a := range m.At {
		if a.Extrapolated {
			extra = append(extra, a.X)
		}
	}
	if len(extra) > 0 {
		alerts = append(alerts, fmt.Sprintf("x = %s lies outside the range of the data; the fitted value there is extrapolated.", listText(extra, unitAfter(resp.XUnit))))
	}
	if y := resp.Fits.York; yorkInconsistent(y) {
		alerts = append(alerts, yorkText(y))
	}
	return summary, append(alerts, failedChecks(diag)...)
}

// FitReport builds the HTML report of a line fit; drawing its plots stops
// when ctx is done.
func FitReport(ctx context.Context, req *wire.FitRequest, resp *wire.FitResponse, res *study.FitResult, made Made) (*Page, error) {
	d := &req.Points.Data
	ps, err := fitPlots(resp, res, d, "", true)
	if err != nil {
		return nil, err
	}
	xu, yu := resp.XUnit, resp.YUnit
	if resp.SameScale() && xu == "" {
		xu = yu
	}
	if resp.SameScale() && yu == "" {
		yu = xu
	}
	name := methodName(ps.fitName)
	p := &Page{
		Title:    "Straight-line fit with errors in both variables",
		Subtitle: fmt.Sprintf("%d points · reported line: %s", resp.N, name),
		Meta:     made.header(),
		Caution:  study.Caution,
		Warnings: warningTexts(resp.Warnings),
	}
	m := ps.fit
	p.Summary, p.Alerts = fitSummary(resp, ps.fitName, ps.diag)

	inputs := []string{fmt.Sprintf("%d points; x from %s to %s%s, y from %s to %s%s.", resp.N, g(slices.Min(d.X)), g(slices.Max(d.X)), unitAfter(xu),
		g(slices.Min(d.Y)), g(slices.Max(d.Y)), unitAfter(yu))}
	p.Sections = append(p.Sections, Section{Heading: "Input", Text: inputs})
	if s, ok := inputSection(resp.Input); ok {
		p.Sections = append(p.Sections, s)
	}
	fits := Section{Heading: "Fits", Tables: []Table{fitsTable(resp.Fits, resp.Confidence, yu)}}
	if t, ok := uncertaintyTable(resp.Fits); ok {
		fits.Tables = append(fits.Tables, t)
	}
	if s := yorkText(resp.Fits.York); s != "" {
		fits.Text = append(fits.Text, s)
	}
	p.Sections = append(p.Sections, fits)
	if len(m.At) > 0 && !resp.SameScale() {
		t := Table{Caption: "Fitted y at the requested x values (" + name + ")", Header: []string{withUnit("x", xu), withUnit("fitted y", yu), withUnit("CI", yu)}, Numeric: []int{0, 1, 2}}
		for _, a := range m.At {
			t.Rows = append(t.Rows, Row{Cells: []string{atCell(a), g(a.Y.Estimate), ciText(a.Y.CI)}})
		}
		p.Sections = append(p.Sections, Section{Heading: "Predictions", Tables: []Table{t}})
	} else if len(m.At) > 0 {
		t := Table{Caption: "Fitted y and bias y − x at the requested x values (" + name + ")", Header: []string{withUnit("x", xu), withUnit("fitted y", yu), withUnit("CI", yu),
			withUnit("bias", yu), withUnit("CI", yu), withUnit("bootstrap CI of bias", yu)}, Numeric: []int{0, 1, 2, 3, 4, 5}}
		for _, a := range m.At {
			bb := "-"
			if a.Bias.Bootstrap != nil {
				bb = fmt.Sprintf("%s to %s", g(a.Bias.Bootstrap.Lower), g(a.Bias.Bootstrap.Upper))
			}
			t.Rows = append(t.Rows, Row{Cells: []string{atCell(a), g(a.Y.Estimate), ciText(a.Y.CI), g(a.Bias.Estimate), ciText(a.Bias.CI), bb}})
		}
		p.Sections = append(p.Sections, Section{Heading: "Decision levels", Tables: []Table{t}})
	}
	if s := olsSection(resp.OLSBias, resp.Confidence, unitOf(resp)); s != nil {
		p.Sections = append(p.Sections, *s)
	}
	p.Sections = append(p.Sections, diagSection(ps.diag))
	figs, err := ps.figures(ctx)
	if err != nil {
		return nil, err
	}
	p.Sections = append(p.Sections, Section{Heading: "Plots", Figures: figs})

	kv := made.inputKVs(resp.N, "data rows (points)", resp.Input)
	kv = append(kv,
		KV{Key: "Methods", Value: methodsText(resp.Fits) + requestedText(req.Methods)},
		KV{Key: "λ (Deming fits)", Value: lambdaText(resp.Fits)},
		KV{Key: "Confidence", Value: percent(resp.Confidence) + " for every interval"},
		KV{Key: "Bootstrap", Value: bootstrapText(resp.Fits)},
		KV{Key: "Columns given", Value: columnsText(d)})
	if len(req.At) > 0 {
		kv = append(kv, KV{Key: "Requested x values (at)", Value: listText(req.At, unitAfter(xu))})
	}
	if xu != "" || yu != "" {
		kv = append(kv, KV{Key: "Units", Value: fmt.Sprintf("x: %s; y: %s", orNone(xu), orNone(yu))})
	}
	p.Provenance = kv
	p.Appendix = withSkipped(fitAppendix(d, ps.diag, xu, yu, resp.Input, made), resp.Input)
	return p, nil
}

func unitAfter(u string) string {
	if u == "" {
		return ""
	}
	return " " + u
}

// unitOf is the unit of a fit's y − x, "" when x and y differ or none was
// given.
func unitOf(r *wire.FitResponse) string {
	if !r.SameScale() {
		return ""
	}
	if r.YUnit != "" {
		return r.YUnit
	}
	return r.XUnit
}

func orNone(s string) string {
	if s == "" {
		return "not stated"
	}
	return s
}

func requestedText(asked []string) string {
	if len(asked) == 0 {
		return " (every method the data support; none named in the request)"
	}
	return " (as requested)"
}

func columnsText(d *study.Data) string {
	cols := "x, y"
	for _, c := range []struct {
		n string
		v []float64
	}{{"sx", d.SX}, {"sy", d.SY}, {"r", d.R}, {"order", d.Order}} {
		if c.v != nil {
			cols += ", " + c.n
		}
	}
	if d.ID != nil {
		cols += ", id"
	}
	return cols
}

// fitAppendix lists the points as analysed; flagged outliers are marked.
func fitAppendix(d *study.Data, diag wire.DiagnosticsOut, xu, yu string, how *wire.InputOut, made Made) Section {
	n := d.Len()
	if n > MaxAppendixRows {
		return appendixTooLarge(n, made)
	}
	t := Table{Caption: "Points", Header: []string{"row", "id", withUnit("x", xu), withUnit("y", yu)}, Numeric: []int{0, 2, 3}}
	for _, c := range []struct {
		h string
		v []float64
	}{{"sx", d.SX}, {"sy", d.SY}, {"r", d.R}, {"order", d.Order}} {
		if c.v != nil {
			t.Header = append(t.Header, c.h)
			t.Numeric = append(t.Numeric, len(t.Header)-1)
		}
	}
	t.Header = append(t.Header, "mark")
	flagged := flaggedIDs(diag)
	for i := range n {
		id := ""
		if d.ID != nil {
			id = d.ID[i]
		}
		cells := []string{strconv.Itoa(i + 1), id, exact(d.X[i]), exact(d.Y[i])}
		for _, v := range [][]float64{d.SX, d.SY, d.R, d.Order} {
			if v != nil {
				cells = append(cells, exact(v[i]))
			}
		}
		row := Row{Cells: append(cells, "")}
		if flagged[i] {
			row.Cells[len(row.Cells)-1], row.Class = "flagged outlier", "warn"
		}
		t.Rows = append(t.Rows, row)
	}
	return Section{Heading: "Appendix: the data as analysed", ID: "appendix",
		Text:   []string{appendixText(made, how, "Flagged outliers are marked; they are kept in every fit.")},
		Tables: []Table{t}}
}
