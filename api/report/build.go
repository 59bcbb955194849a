package report

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"eivfit/api/wire"
	"eivfit/eiv"
	"eivfit/eiv/study"
)

// Plot kinds served by POST /v1/plots/{kind}.
var PlotKinds = []string{"data", "residuals", "run-order", "qq", "difference", "bootstrap"}

// plotSet is everything the six plots need.
type plotSet struct {
	x, y, sx, sy []float64
	fitName      string
	fit          *wire.MethodFit
	res          *study.MethodResult // the band and the bootstrap replicates
	ols          *wire.MethodFit
	diag         wire.DiagnosticsOut                // the checks; the residuals are read from resid
	resid        *study.Diagnostics                 // the residuals and Q-Q points, drawn without a copy
	agreement    func() (*wire.AgreementOut, error) // only the difference plot reads it
	axes         Axes
}

func (ps *plotSet) line() Line {
	l := Line{Name: ps.fitName, Intercept: ps.fit.Intercept.Estimate, Slope: ps.fit.Slope.Estimate}
	if len(ps.x) > 1 {
		lo, hi := slices.Min(ps.x), slices.Max(ps.x)
		for k := range 41 {
			t := float64(k) / 40
			x0 := lo*(1-t) + hi*t // never overflows, unlike lo + (hi−lo)·t
			if a, b, ok := ps.res.Band(x0); ok && !math.IsInf(a, 0) && !math.IsInf(b, 0) && !math.IsNaN(a) && !math.IsNaN(b) {
				l.BandX, l.BandLo, l.BandHi = append(l.BandX, x0), append(l.BandLo, a), append(l.BandHi, b)
			}
		}
	}
	return l
}

// plot renders one kind; ok is false when the kind does not apply (no
// bootstrap ran). Drawing stops when ctx is done.
func (ps *plotSet) plot(ctx context.Context, kind string) ([]byte, bool, error) {
	if err := ctx.Err(); err != nil {
		return nil, false, err
	}
	d := ps.resid
	switch kind {
	case "data":
		var ols *Line
		if ps.ols != nil && ps.fitName != "ols" {
			ols = &Line{Name: "OLS", Intercept: ps.ols.Intercept.Estimate, Slope: ps.ols.Slope.Estimate}
		}
		b, err := DataPlot(ctx, ps.x, ps.y, ps.sx, ps.sy, ps.line(), ols, ps.axes, ps.flagged(kind)...)
		return b, true, err
	case "residuals":
		b, err := ResidualPlot(ctx, d.Level, d.Residual, ps.axes, d.Scale, ps.flagged(kind)...)
		return b, true, err
	case "run-order":
		p := xys(d.Order, d.Residual)
		if d.Order == nil { // the input order
			p = pts{n: len(d.Residual), at: func(i int) (float64, float64) { return float64(i + 1), d.Residual[i] }}
		}
		b, err := runOrderPlot(ctx, p, ps.axes, d.Scale, ps.flagged(kind)...)
		return b, true, err
	case "qq":
		b, err := qqPlot(ctx, pts{n: d.QQLen(), at: d.QQAt})
		return b, true, err
	case "difference":
		if !ps.axes.SameScale() {
			return nil, false, wire.Invalid("y_unit", "x and y are in different units: a difference y − x has no meaning, so there is no difference plot")
		}
		a, err := ps.agreement()
		if err != nil {
			return nil, false, err
		}
		x, y := ps.x, ps.y
		md := pts{n: len(x), at: func(i int) (float64, float64) { return x[i]/2 + y[i]/2, y[i] - x[i] }} // never overflows
		f, ok := differenceForm(a)
		if !ok {
			f = DifferenceForm{Form: "constant"} // the plain plot, as DifferencePlot
		}
		b, err := differencePlot(ctx, md, a.MeanDifference.Estimate, a.LimitsOfAgreement.Lower.Estimate, a.LimitsOfAgreement.Upper.Estimate, f, ps.axes, ps.flagged(kind)...)
		return b, true, err
	case "bootstrap":
		bs := ps.fit.Bootstrap
		if bs == nil || ps.res.Bootstrap == nil {
			return nil, false, nil
		}
		slopes := ps.res.Bootstrap.Slopes()
		if len(slopes) < 2 {
			return nil, false, nil
		}
		iv, name := bs.Slope.BCa, "BCa"
		if iv == nil {
			iv, name = bs.Slope.Percentile, "percentile"
		}
		if iv == nil {
			return nil, false, nil
		}
		b, err := BootstrapPlot(ctx, slopes, ps.fit.Slope.Estimate, iv.Lower, iv.Upper, name)
		return b, true, err
	}
	return nil, false, fmt.Errorf("unknown plot %q", kind)
}

var plotCaptions = map[string]string{
	"data":       "The samples with their stated uncertainties (bars, ±1 SD), the errors-in-variables line with its pointwise confidence band, the OLS line and the identity line.",
	"residuals":  "Residuals against level: a funnel shape means the error grows with the level; a curve means the relation is not a straight line.",
	"run-order":  "Residuals in run order: drift, steps or runs point to instability during the study.",
	"qq":         "Normal Q-Q plot: points near the line mean normal residuals; a bend means skew, isolated points at the ends outliers.",
	"difference": "Difference plot: y − x against the mean of x and y, with the bias and the limits of agreement in the form the data call for (constant, ratio or regression-based), and the regression of the differences on the means when it shows a proportional bias.",
	"bootstrap":  "The bootstrap distribution of the slope with the estimate and its interval.",
}

// fitPlots gathers a line fit's plots; method "" means the primary fit.
// checks runs the tests on the residuals (for a report, or the Q-Q plot);
// without it only the residuals and the flagged outliers are computed.
func fitPlots(resp *wire.FitResponse, res *study.FitResult, d *study.Data, method string, checks bool) (*plotSet, error) {
	pm := res.Primary()
	if method != "" {
		if pm = res.Get(method); pm == nil {
			return nil, wire.Invalid("query parameter method", fmt.Sprintf("%q was not fitted; choose one of the fitted methods", wire.Truncate(method)))
		}
	}
	agree := func() (*wire.AgreementOut, error) {
		// A fit's difference plot draws the bias and the limits only.
		ag, err := eiv.BlandAltmanLimits(d.X, d.Y, 0, &eiv.Options{Confidence: res.Confidence})
		if err != nil {
			return nil, err
		}
		return wire.AgreementOutOf(&study.Agreement{Agreement: ag}), nil
	}
	ax := Axes{X: "x", Y: "y", Unit: resp.XUnit, YUnit: resp.YUnit}
	if resp.SameScale() {
		ax = Axes{X: "x", Y: "y"}
	}
	diag := study.DiagnoseFit
	if !checks {
		diag = study.FitResiduals
	}
	dg := diag(d, pm)
	return &plotSet{x: d.X, y: d.Y, sx: d.SX, sy: d.SY, fitName: pm.Method.Name, fit: resp.Fits.Get(pm.Method.Name), res: pm,
		ols: resp.Fits.OLS, diag: wire.DiagnosticChecksOf(dg), resid: dg, agreement: agree,
		axes: ax}, nil
}

// FitPlot draws one plot of a line fit; method "" means the primary fit.
// ok is false when the kind does not apply (no bootstrap ran). Drawing
// stops when ctx is done.
func FitPlot(ctx context.Context, kind string, resp *wire.FitResponse, res *study.FitResult, d *study.Data, method string) ([]byte, bool, error) {
	ps, err := fitPlots(resp, res, d, method, kind == "qq")
	if err != nil {
		return nil, false, err
	}
	return ps.plot(ctx, kind)
}

func comparePlots(resp *wire.CompareResponse, c *study.Comparison) *plotSet {
	pm := c.Primary()
	return &plotSet{x: c.Data.X, y: c.Data.Y, sx: c.Data.SX, sy: c.Data.SY, fitName: pm.Method.Name,
		fit: resp.Fits.Get(pm.Method.Name), res: pm, ols: resp.Fits.OLS,
		diag: resp.Diagnostics, resid: c.Diagnostics,
		agreement: func() (*wire.AgreementOut, error) { return &resp.Agreement, nil },
		axes:      Axes{X: resp.XName + " (x)", Y: resp.YName + " (y)", Unit: resp.Unit}}
}

func g(v float64) string {
	if v == 0 {
		return "0"
	}
	if math.Abs(v) >= 1e5 || math.Abs(v) < 1e-3 {
		return strconv.FormatFloat(v, 'e', 4, 64)
	}
	return strconv.FormatFloat(v, 'g', 5, 64)
}

func ciText(c wire.CI) string {
	if c.IsZero() {
		return "-" // no interval
	}
	return fmt.Sprintf("%s to %s", g(c.Lower), g(c.Upper))
}

// pctText prints a bias in percent for a report, "-" at level 0 where
// it has none.
func pctText(iv *wire.Interval) string {
	if iv == nil {
		return "-"
	}
	return g(iv.Estimate)
}

func p2(v float64) string {
	if v < 0.001 {
		return "< 0.001"
	}
	return strconv.FormatFloat(v, 'f', 3, 64)
}

// fitsTable lists the lines; yUnit is the unit of the intercept (y).
func fitsTable(fs wire.Fits, conf float64, yUnit string) Table {
	ci := fmt.Sprintf("%g %% CI", 100*conf)
	t := Table{Caption: "Fitted lines y = a + b·x", Header: []string{"method", "slope b", ci + " of b", withUnit("intercept a", yUnit), ci + " of a", "SE basis"}, Numeric: []int{1, 2, 3, 4}}
	fs.Each(func(name string, m *wire.MethodFit) {
		t.Rows = append(t.Rows, Row{Cells: []string{methodName(name), g(m.Slope.Estimate), ciText(m.Slope.CI), g(m.Intercept.Estimate), ciText(m.Intercept.CI), m.SEBasis}})
	})
	return t
}

// yorkText is York's goodness of fit with a one-line reading: whether the
// scatter about the line is what the stated uncertainties lead one to
// expect (χ² on ν = n − 2 degrees of freedom; MSWD = χ²/ν).
func yorkText(y *wire.MethodFit) string {
	if y == nil || y.Chi2 == nil || y.MSWD == nil || y.PValue == nil {
		return ""
	}
	reading := "the scatter about the line is what the stated uncertainties lead one to expect"
	switch {
	case *y.PValue < 0.05 && *y.MSWD > 1:
		reading = "the scatter about the line is larger than the stated uncertainties explain: they are understated, or the relation is not a straight line; the unscaled standard errors are then too small"
	case *y.PValue > 0.95 && *y.MSWD < 1:
		reading = "the scatter about the line is smaller than the stated uncertainties lead one to expect: they may be overstated"
	}
	return fmt.Sprintf("York: χ² = %s on ν = %d degrees of freedom, MSWD = %s, p = %s: %s.", g(*y.Chi2), y.DOF, g(*y.MSWD), p2(*y.PValue), reading)
}

// yorkInconsistent says York's χ² rejects the stated uncertainties.
func yorkInconsistent(y *wire.MethodFit) bool {
	return y != nil && y.PValue != nil && y.MSWD != nil && *y.PValue < 0.05 && *y.MSWD > 1
}

func uncertaintyTable(fs wire.Fits) (Table, bool) {
	t := Table{Caption: "Interval of the slope b by how it was computed", Header: []string{"method", "analytic", "jackknife", "bootstrap percentile", "bootstrap BCa"}, Numeric: []int{1, 2, 3, 4}}
	any := false
	fs.Each(func(name string, m *wire.MethodFit) {
		row := []string{methodName(name), ciText(m.Slope.CI), "-", "-", "-"}
		if m.Jackknife != nil {
			row[2] = ciText(m.Jackknife.Slope.CI)
			any = true
		}
		if b := m.Bootstrap; b != nil {
			if b.Slope.Percentile != nil {
				row[3] = fmt.Sprintf("%s to %s", g(b.Slope.Percentile.Lower), g(b.Slope.Percentile.Upper))
			}
			if b.Slope.BCa != nil {
				row[4] = fmt.Sprintf("%s to %s", g(b.Slope.BCa.Lower), g(b.Slope.BCa.Upper))
			}
			any = true
		}
		t.Rows = append(t.Rows, Row{Cells: row})
	})
	return t, any
}

// olsSentence says how far OLS is from one errors-in-variables fit. A
// direction ("OLS would understate the slope") only when the interval of
// the relative difference excludes zero; otherwise how much the two differ
// and that the interval includes no difference.
func olsSentence(o wire.OLSBias, conf float64, unit string) string {
	r, name := o.SlopeRelativePercent, methodName(o.Method)
	var s string
	switch {
	case r.CI.IsZero():
		s = fmt.Sprintf("OLS and %s differ in slope by %s %% (no interval: the difference is not shown to be real)", name, signed(r.Estimate))
	case r.CI.Lower > 0 || r.CI.Upper < 0:
		verb, mag, lo, hi := "overstate", r.Estimate, r.CI.Lower, r.CI.Upper
		if r.Estimate < 0 {
			verb, mag, lo, hi = "understate", -r.Estimate, -r.CI.Upper, -r.CI.Lower
		}
		s = fmt.Sprintf("Compared with %s, OLS would %s the slope by %s %% (%g %% CI %s to %s %%)", name, verb, g3(mag), 100*conf, g3(lo), g3(hi))
	default:
		s = fmt.Sprintf("OLS and %s differ in slope by %s %% (%g %% CI %s to %s %%: the interval includes no difference)", name, signed(r.Estimate), 100*conf, g3(r.CI.Lower), g3(r.CI.Upper))
	}
	if len(o.At) > 0 {
		u := ""
		if unit != "" {
			u = " " + unit
		}
		s += fmt.Sprintf("; at x = %s%s the bias y − x by OLS is off by %s%s", g(o.At[0].X), u, signed(o.At[0].Difference), u)
	}
	if o.Reliability != nil && o.PredictedOLSSlope != nil {
		s += fmt.Sprintf("; the reliability ratio κ = %.4g predicts an OLS slope of %.4g", *o.Reliability, *o.PredictedOLSSlope)
	}
	return s + "."
}

// g3 prints a number to three significant digits with a true minus sign.
func g3(v float64) string { return minus(strconv.FormatFloat(v, 'g', 3, 64)) }

// signed prints a difference with its sign (+0.125, −1.53).
func signed(v float64) string {
	if v > 0 {
		return "+" + g3(v)
	}
	return g3(v)
}

func minus(s string) string { return strings.Replace(s, "-", "−", 1) }

func olsSection(ob []wire.OLSBias, conf float64, unit string) *Section {
	if len(ob) == 0 {
		return nil
	}
	s := &Section{Heading: "How far OLS would have been off"}
	t := Table{Header: []string{"compared with", "slope OLS − EIV", "CI", "slope difference (%)", "CI (%)", "reliability κ", "κ-attenuated slope"}, Numeric: []int{1, 2, 3, 4, 5, 6}}
	for _, o := range ob {
		s.Text = append(s.Text, olsSentence(o, conf, unit))
		k, ps := "-", "-"
		if o.Reliability != nil {
			k, ps = g(*o.Reliability), g(*o.PredictedOLSSlope)
		}
		ci1, ci2 := "-", "-"
		if o.SlopeDifference.CI.Method != "" {
			ci1, ci2 = ciText(o.SlopeDifference.CI), ciText(o.SlopeRelativePercent.CI)
		}
		t.Rows = append(t.Rows, Row{Cells: []string{methodName(o.Method), g(o.SlopeDifference.Estimate), ci1, g(o.SlopeRelativePercent.Estimate), ci2, k, ps}})
	}
	s.Tables = append(s.Tables, t)
	return s
}

func diagSection(d wire.DiagnosticsOut) Section {
	s := Section{Heading: "Checks of the assumptions", Text: []string{fmt.Sprintf("On the %s residuals of the %s fit.", d.Scale, methodName(d.ResidualsOf))}}
	t := Table{Header: []string{"assumption", "test", "statistic", "p", "reading"}, Numeric: []int{2, 3}}
	row := func(what, test string, r *wire.TestOut, reading string) {
		if r == nil {
			t.Rows = append(t.Rows, Row{Cells: []string{what, test, "-", "-", reading}})
			return
		}
		t.Rows = append(t.Rows, Row{Cells: []string{what, test, g(r.Statistic), p2(r.PValue), reading}})
	}
	row("normal errors", "Shapiro–Wilk W", d.Normality.ShapiroWilk, d.Normality.Reading)
	row("independence in run order", "Durbin–Watson d", d.Independence.DurbinWatson, d.Independence.Reading)
	row("independence in run order", "runs test z", d.Independence.Runs, "")
	row("constant variance", "Breusch–Pagan LM", d.Variance.BreuschPagan, d.Variance.Reading)
	row("constant variance", "Spearman ρ of |residual| with level", d.Variance.Spearman, "")
	if c := d.Linearity.Cusum; c != nil {
		row("straight line", "cusum (Passing–Bablok), KS", &wire.TestOut{Statistic: c.KS, PValue: c.PValue}, d.Linearity.Reading)
	}
	if d.Linearity.LackOfFit != nil {
		row("straight line", "lack of fit F (replicates)", d.Linearity.LackOfFit, "")
	}
	t.Rows = append(t.Rows, Row{Cells: []string{"no outliers", d.Outliers.Method, strconv.Itoa(len(d.Outliers.Flagged)) + " flagged", "-", d.Outliers.Reading}})
	s.Tables = append(s.Tables, t)
	return s
}

// caption is the report's caption of one plot of n points; it says when
// the points are binned.
func caption(kind string, n int) string {
	c := plotCaptions[kind]
	if kind == "bootstrap" || !Binned(n) {
		return c
	}
	c += fmt.Sprintf(" The %d points are more than the %d drawn one by one, so they are shown as a density: counts in %d × %d bins, darker for more (log scale).",
		n, MaxMarkers, DensityCols, DensityRows)
	switch kind {
	case "data":
		c += " Error bars are left out."
	case "run-order":
		c += " The line joins the mean residual of each column."
	}
	return c
}

func (ps *plotSet) figures(ctx context.Context) ([]Figure, error) {
	var out []Figure
	for _, k := range PlotKinds {
		if k == "difference" && !ps.axes.SameScale() {
			continue
		}
		b, ok, err := ps.plot(ctx, k)
		if err != nil {
			return nil, err
		}
		if ok {
			c := caption(k, len(ps.x))
			if k == "data" && !ps.axes.SameScale() {
				c = strings.Replace(c, ", the OLS line and the identity line.", " and the OLS line (x and y are in different units: no identity line).", 1)
			}
			out = append(out, Figure{Caption: ps.captionFor(k, c), SVG: SVG(b)})
		}
	}
	return out, nil
}

func warningTexts(ws []wire.Warning) []string {
	var out []string
	for _, w := range ws {
		if w.Method != "" {
			out = append(out, methodName(w.Method)+": "+w.Message)
		} else {
			out = append(out, w.Message)
		}
	}
	return out
}

// differenceForm is the form of limits a comparison's difference plot
// draws; ok is false for constant limits without a proportional bias (the
// plain plot).
func differenceForm(a *wire.AgreementOut) (DifferenceForm, bool) {
	if a.LimitsForm == nil {
		return DifferenceForm{}, false
	}
	f := DifferenceForm{Form: a.LimitsForm.Form}
	pb := a.ProportionalBias
	if pb.Slope != nil && pb.PValue != nil {
		f.B0, f.B1, f.Proportional = pb.Intercept.Estimate, pb.Slope.Estimate, *pb.PValue < 0.05
	}
	switch {
	case f.Form == "regression" && a.RegressionLimits != nil:
		r := a.RegressionLimits
		f.B0, f.B1, f.K, f.C0, f.C1 = r.Bias.Intercept.Estimate, r.Bias.Slope.Estimate, r.Multiplier, r.Spread.Intercept.Estimate, r.Spread.Slope.Estimate
	case f.Form == "ratio" && a.RatioLimits != nil:
		f.Ratio, f.RatioLower, f.RatioUpper = a.RatioLimits.Ratio.Estimate, a.RatioLimits.Lower.Estimate, a.RatioLimits.Upper.Estimate
	default:
		f.Form = "constant"
	}
	return f, f.Form != "constant" || f.Proportional
}

// atCell is an "at" value in a table: "(extrapolated)" after one outside
// the range of the data.
func atCell(a wire.AtOut) string {
	if a.Extrapolated {
		return g(a.X) + " (extrapolated)"
	}
	return g(a.X)
}
