package api

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"
	"math"
	"net/http"
	"net/url"
	"slices"
	"strconv"
	"strings"
	"time"

	"eivfit/api/report"
	"eivfit/eiv"

	"github.com/gin-gonic/gin"
)

// Plot kinds served by POST /v1/plots/{kind}.
var plotKinds = []string{"data", "residuals", "run-order", "qq", "difference", "bootstrap"}

// primaryOrder is the preference for the fit a report or plot draws when
// none is named.
var primaryOrder = []string{"york", "deming", "weighted_deming", "passing_bablok", "ols"}

func (fs *Fits) get(name string) *MethodFit {
	var out *MethodFit
	fs.each(func(n string, m *MethodFit) {
		if n == name {
			out = m
		}
	})
	return out
}

func (fs *Fits) primary() (string, *MethodFit) {
	for _, n := range primaryOrder {
		if m := fs.get(n); m != nil {
			return n, m
		}
	}
	return "", nil
}

// plotSet is everything the six plots need.
type plotSet struct {
	x, y, sx, sy []float64
	fitName      string
	fit          *MethodFit
	ols          *MethodFit
	diag         DiagnosticsOut
	agreement    *AgreementOut
	axes         report.Axes
}

func (ps *plotSet) line() report.Line {
	l := report.Line{Name: ps.fitName, Intercept: ps.fit.Intercept.Estimate, Slope: ps.fit.Slope.Estimate}
	if ps.fit.band != nil && len(ps.x) > 1 {
		lo, hi := slices.Min(ps.x), slices.Max(ps.x)
		for k := range 41 {
			t := float64(k) / 40
			x0 := lo*(1-t) + hi*t // never overflows, unlike lo + (hi−lo)·t
			if a, b, ok := ps.fit.band(x0); ok && !math.IsInf(a, 0) && !math.IsInf(b, 0) && !math.IsNaN(a) && !math.IsNaN(b) {
				l.BandX, l.BandLo, l.BandHi = append(l.BandX, x0), append(l.BandLo, a), append(l.BandHi, b)
			}
		}
	}
	return l
}

// plot renders one kind; ok is false when the kind does not apply (no
// bootstrap ran).
func (ps *plotSet) plot(ctx context.Context, kind string) ([]byte, bool, error) {
	if err := ctx.Err(); err != nil {
		return nil, false, err
	}
	d := ps.diag
	level := make([]float64, len(d.Residuals))
	resid := make([]float64, len(d.Residuals))
	order := make([]float64, len(d.Residuals))
	for i, r := range d.Residuals {
		level[i], resid[i], order[i] = r.Level, r.Residual, r.Order
	}
	switch kind {
	case "data":
		var ols *report.Line
		if ps.ols != nil && ps.fitName != "ols" {
			ols = &report.Line{Name: "OLS", Intercept: ps.ols.Intercept.Estimate, Slope: ps.ols.Slope.Estimate}
		}
		b, err := report.DataPlot(ctx, ps.x, ps.y, ps.sx, ps.sy, ps.line(), ols, ps.axes)
		return b, true, err
	case "residuals":
		b, err := report.ResidualPlot(ctx, level, resid, ps.axes, d.Scale)
		return b, true, err
	case "run-order":
		b, err := report.RunOrderPlot(ctx, order, resid, ps.axes, d.Scale)
		return b, true, err
	case "qq":
		th, sm := make([]float64, len(d.Normality.QQ)), make([]float64, len(d.Normality.QQ))
		for i, q := range d.Normality.QQ {
			th[i], sm[i] = q.Theoretical, q.Sample
		}
		b, err := report.QQPlot(ctx, th, sm)
		return b, true, err
	case "difference":
		a := ps.agreement
		mean, diff := make([]float64, len(ps.x)), make([]float64, len(ps.x))
		for i := range ps.x {
			mean[i], diff[i] = ps.x[i]/2+ps.y[i]/2, ps.y[i]-ps.x[i]
		}
		b, err := report.DifferencePlot(ctx, mean, diff, a.MeanDifference.Estimate, a.LimitsOfAgreement.Lower.Estimate, a.LimitsOfAgreement.Upper.Estimate, ps.axes)
		return b, true, err
	case "bootstrap":
		bs := ps.fit.Bootstrap
		if bs == nil || len(ps.fit.bootSlopes) < 2 {
			return nil, false, nil
		}
		iv, name := bs.Slope.BCa, "BCa"
		if iv == nil {
			iv, name = bs.Slope.Percentile, "percentile"
		}
		if iv == nil {
			return nil, false, nil
		}
		b, err := report.BootstrapPlot(ctx, ps.fit.bootSlopes, ps.fit.Slope.Estimate, iv.Lower, iv.Upper, name)
		return b, true, err
	}
	return nil, false, fmt.Errorf("unknown plot %q", kind)
}

var plotCaptions = map[string]string{
	"data":       "The samples with their stated uncertainties (bars, ±1 SD), the errors-in-variables line with its pointwise confidence band, the OLS line and the identity line.",
	"residuals":  "Residuals against level: a funnel shape means the error grows with the level; a curve means the relation is not a straight line.",
	"run-order":  "Residuals in run order: drift, steps or runs point to instability during the study.",
	"qq":         "Normal Q-Q plot: points near the line mean normal residuals; a bend means skew, isolated points at the ends outliers.",
	"difference": "Difference plot: y − x against the mean of x and y, with the mean difference and the limits of agreement.",
	"bootstrap":  "The bootstrap distribution of the slope with the estimate and its interval.",
}

// fitStudy turns a line-fit dataset into the form the diagnostics take.
func fitStudy(d *Dataset) *study {
	n := d.Len()
	st := &study{x: d.X, y: d.Y, sx: d.SX, sy: d.SY, kx: make([]int, n), ky: make([]int, n),
		ids: make([]string, n), idx: make([]int, n), order: make([]float64, n)}
	for i := range n {
		st.kx[i], st.ky[i], st.idx[i] = 1, 1, i
		st.order[i] = float64(i + 1)
		if d.Order != nil {
			st.order[i], st.hasOrder = d.Order[i], true
		}
		if d.ID != nil {
			st.ids[i] = d.ID[i]
		}
	}
	return st
}

// fitPlots gathers a line fit's plots; method "" means the primary fit.
func fitPlots(resp *FitResponse, d *Dataset, method string) (*plotSet, error) {
	name, m := resp.Fits.primary()
	if method != "" {
		name, m = method, resp.Fits.get(method)
		if m == nil {
			return nil, invalid("query parameter method", fmt.Sprintf("%q was not fitted; choose one of the fitted methods", truncate(method)))
		}
	}
	st := fitStudy(d)
	ef := &eiv.Fit{Intercept: eiv.Estimate{Value: m.Intercept.Estimate}, Slope: eiv.Estimate{Value: m.Slope.Estimate}}
	c := eiv.CusumLinearity(d.X, d.Y, ef.Intercept.Value, ef.Slope.Value)
	cus := &CusumOut{Max: c.Max, Above: c.Above, Below: c.Below, KS: c.KS, PValue: c.PValue, Linear: c.Linear}
	diag := diagnostics(st, ef, name, string(eiv.ErrorConstant), cus, &Comparison{})
	ag, err := agreement(st, resp.Confidence, false)
	if err != nil {
		return nil, err
	}
	return &plotSet{x: d.X, y: d.Y, sx: d.SX, sy: d.SY, fitName: name, fit: m, ols: resp.Fits.OLS,
		diag: diag, agreement: ag, axes: report.Axes{X: "x", Y: "y"}}, nil
}

func comparePlots(resp *CompareResponse, req *CompareRequest) *plotSet {
	c := &resp.Comparison
	st := req.study(nil)
	name := c.Recommendation.Method
	m := c.Fits.get(name)
	if m == nil {
		name, m = c.Fits.primary()
	}
	return &plotSet{x: st.x, y: st.y, sx: st.sx, sy: st.sy, fitName: name, fit: m, ols: c.Fits.OLS,
		diag: c.Diagnostics, agreement: &c.Agreement,
		axes: report.Axes{X: resp.XName + " (x)", Y: resp.YName + " (y)", Unit: resp.Unit}}
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

func ciText(c CI) string { return fmt.Sprintf("%s to %s", g(c.Lower), g(c.Upper)) }

func p2(v float64) string {
	if v < 0.001 {
		return "< 0.001"
	}
	return strconv.FormatFloat(v, 'f', 3, 64)
}

// meta lists version, input hash, seeds and time.
func meta(version, sha string, fits Fits, extra ...report.KV) []report.KV {
	kv := []report.KV{{Key: "Software", Value: "eivfit " + version}, {Key: "Input SHA-256", Value: sha}}
	seeds := map[uint64]bool{}
	fits.each(func(_ string, m *MethodFit) {
		if m.Bootstrap != nil {
			seeds[m.Bootstrap.Seed] = true
		}
	})
	for s := range seeds {
		kv = append(kv, report.KV{Key: "Bootstrap seed", Value: strconv.FormatUint(s, 10)})
	}
	kv = append(kv, extra...)
	return append(kv, report.KV{Key: "Produced", Value: time.Now().UTC().Format(time.RFC3339)})
}

func fitsTable(fs Fits) report.Table {
	t := report.Table{Caption: "Fitted lines y = a + b·x", Header: []string{"method", "slope b", "CI of b", "intercept a", "CI of a", "SE basis"}, Numeric: []int{1, 2, 3, 4}}
	fs.each(func(name string, m *MethodFit) {
		t.Rows = append(t.Rows, report.Row{Cells: []string{name, g(m.Slope.Estimate), ciText(m.Slope.CI), g(m.Intercept.Estimate), ciText(m.Intercept.CI), m.SEBasis}})
	})
	return t
}

func uncertaintyTable(fs Fits) (report.Table, bool) {
	t := report.Table{Caption: "Slope uncertainty by method of interval", Header: []string{"method", "analytic", "jackknife", "bootstrap percentile", "bootstrap BCa"}, Numeric: []int{1, 2, 3, 4}}
	any := false
	fs.each(func(name string, m *MethodFit) {
		row := []string{name, ciText(m.Slope.CI), "-", "-", "-"}
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
		t.Rows = append(t.Rows, report.Row{Cells: row})
	})
	return t, any
}

func olsSection(ob []OLSBias) *report.Section {
	if len(ob) == 0 {
		return nil
	}
	s := &report.Section{Heading: "How far OLS would have been off"}
	t := report.Table{Header: []string{"compared with", "slope OLS − EIV", "CI", "slope difference %", "CI", "reliability κ", "κ-attenuated slope"}, Numeric: []int{1, 2, 3, 4, 5, 6}}
	for _, o := range ob {
		s.Text = append(s.Text, o.Summary)
		k, ps := "-", "-"
		if o.Reliability != nil {
			k, ps = g(*o.Reliability), g(*o.PredictedOLSSlope)
		}
		ci1, ci2 := "-", "-"
		if o.SlopeDifference.CI.Method != "" {
			ci1, ci2 = ciText(o.SlopeDifference.CI), ciText(o.SlopeRelativePercent.CI)
		}
		t.Rows = append(t.Rows, report.Row{Cells: []string{o.Method, g(o.SlopeDifference.Estimate), ci1, g(o.SlopeRelativePercent.Estimate), ci2, k, ps}})
	}
	s.Tables = append(s.Tables, t)
	return s
}

func diagSection(d DiagnosticsOut) report.Section {
	s := report.Section{Heading: "Checks of the assumptions", Text: []string{fmt.Sprintf("On the %s residuals of the %s fit.", d.Scale, d.ResidualsOf)}}
	t := report.Table{Header: []string{"assumption", "test", "statistic", "p", "reading"}, Numeric: []int{2, 3}}
	row := func(what, test string, r *TestOut, reading string) {
		if r == nil {
			t.Rows = append(t.Rows, report.Row{Cells: []string{what, test, "-", "-", reading}})
			return
		}
		t.Rows = append(t.Rows, report.Row{Cells: []string{what, test, g(r.Statistic), p2(r.PValue), reading}})
	}
	row("normal errors", "Shapiro–Wilk W", d.Normality.ShapiroWilk, d.Normality.Reading)
	row("independence in run order", "Durbin–Watson d", d.Independence.DurbinWatson, d.Independence.Reading)
	row("independence in run order", "runs test z", d.Independence.Runs, "")
	row("constant variance", "Breusch–Pagan LM", d.Variance.BreuschPagan, d.Variance.Reading)
	row("constant variance", "Spearman ρ of |residual| with level", d.Variance.Spearman, "")
	if c := d.Linearity.Cusum; c != nil {
		row("straight line", "cusum (Passing–Bablok), KS", &TestOut{Statistic: c.KS, PValue: c.PValue}, d.Linearity.Reading)
	}
	if d.Linearity.LackOfFit != nil {
		row("straight line", "lack of fit F (replicates)", d.Linearity.LackOfFit, "")
	}
	t.Rows = append(t.Rows, report.Row{Cells: []string{"no outliers", d.Outliers.Method, strconv.Itoa(len(d.Outliers.Flagged)) + " flagged", "-", d.Outliers.Reading}})
	s.Tables = append(s.Tables, t)
	return s
}

// caption is the report's caption of one plot of n points; it says when
// the points are binned.
func caption(kind string, n int) string {
	c := plotCaptions[kind]
	if kind == "bootstrap" || !report.Binned(n) {
		return c
	}
	c += fmt.Sprintf(" The %d points are more than the %d drawn one by one, so they are shown as a density: counts in %d × %d bins, darker for more (log scale).",
		n, report.MaxMarkers, report.DensityCols, report.DensityRows)
	switch kind {
	case "data":
		c += " Error bars are left out."
	case "run-order":
		c += " The line joins the mean residual of each column."
	}
	return c
}

func (ps *plotSet) figures(ctx context.Context) ([]report.Figure, error) {
	var out []report.Figure
	for _, k := range plotKinds {
		b, ok, err := ps.plot(ctx, k)
		if err != nil {
			return nil, err
		}
		if ok {
			out = append(out, report.Figure{Caption: caption(k, len(ps.x)), SVG: report.SVG(b)})
		}
	}
	return out, nil
}

func warningTexts(ws []Warning) []string {
	var out []string
	for _, w := range ws {
		if w.Method != "" {
			out = append(out, "["+w.Method+"] "+w.Message)
		} else {
			out = append(out, w.Message)
		}
	}
	return out
}

// FitReport builds the HTML report of a line fit; drawing its plots stops
// when ctx is done.
func FitReport(ctx context.Context, resp *FitResponse, d *Dataset, sha, version string) (*report.Page, error) {
	ps, err := fitPlots(resp, d, "")
	if err != nil {
		return nil, err
	}
	inputs := []string{fmt.Sprintf("%d points; x from %s to %s, y from %s to %s.", resp.N, g(slices.Min(d.X)), g(slices.Max(d.X)), g(slices.Min(d.Y)), g(slices.Max(d.Y)))}
	cols := "x, y"
	for _, c := range []struct {
		n string
		v []float64
	}{{"sx", d.SX}, {"sy", d.SY}, {"r", d.R}, {"order", d.Order}} {
		if c.v != nil {
			cols += ", " + c.n
		}
	}
	inputs = append(inputs, "Columns given: "+cols+fmt.Sprintf(". Intervals at %g %%.", 100*resp.Confidence))
	p := &report.Page{
		Title:    "Straight-line fit with errors in both variables",
		Subtitle: fmt.Sprintf("%d points · reported line: %s", resp.N, ps.fitName),
		Meta:     meta(version, sha, resp.Fits),
		Caution:  Caution,
		Warnings: warningTexts(resp.Warnings),
	}
	m := ps.fit
	p.Summary = append(p.Summary, fmt.Sprintf("%s: slope %s (%s), intercept %s (%s).", ps.fitName, g(m.Slope.Estimate), ciText(m.Slope.CI), g(m.Intercept.Estimate), ciText(m.Intercept.CI)))
	for _, o := range resp.OLSBias {
		if o.Method == ps.fitName {
			p.Summary = append(p.Summary, o.Summary)
		}
	}
	p.Sections = append(p.Sections, report.Section{Heading: "Input", Text: inputs})
	fits := report.Section{Heading: "Fits", Tables: []report.Table{fitsTable(resp.Fits)}}
	if t, ok := uncertaintyTable(resp.Fits); ok {
		fits.Tables = append(fits.Tables, t)
	}
	p.Sections = append(p.Sections, fits)
	if len(m.At) > 0 {
		t := report.Table{Caption: "Fitted y and bias y − x at the requested x values (" + ps.fitName + ")", Header: []string{"x", "fitted y", "CI", "bias", "CI", "bootstrap CI of bias"}, Numeric: []int{0, 1, 2, 3, 4, 5}}
		for _, a := range m.At {
			bb := "-"
			if a.Bias.Bootstrap != nil {
				bb = fmt.Sprintf("%s to %s", g(a.Bias.Bootstrap.Lower), g(a.Bias.Bootstrap.Upper))
			}
			t.Rows = append(t.Rows, report.Row{Cells: []string{g(a.X), g(a.Y.Estimate), ciText(a.Y.CI), g(a.Bias.Estimate), ciText(a.Bias.CI), bb}})
		}
		p.Sections = append(p.Sections, report.Section{Heading: "Decision levels", Tables: []report.Table{t}})
	}
	if s := olsSection(resp.OLSBias); s != nil {
		p.Sections = append(p.Sections, *s)
	}
	p.Sections = append(p.Sections, diagSection(ps.diag))
	figs, err := ps.figures(ctx)
	if err != nil {
		return nil, err
	}
	p.Sections = append(p.Sections, report.Section{Heading: "Plots", Figures: figs})
	return p, nil
}

// CompareReport builds the HTML report of a method-comparison study;
// drawing its plots stops when ctx is done.
func CompareReport(ctx context.Context, resp *CompareResponse, req *CompareRequest, sha, version string) (*report.Page, error) {
	ps := comparePlots(resp, req)
	c := &resp.Comparison
	unit := ""
	if resp.Unit != "" {
		unit = " " + resp.Unit
	}
	p := &report.Page{
		Title:    "Method comparison: " + resp.YName + " against " + resp.XName,
		Subtitle: fmt.Sprintf("%d samples · %s · %s", c.N, map[bool]string{true: "with replicates", false: "single measurements"}[c.Replicates], resp.SignConvention),
		Meta:     meta(version, sha, c.Fits),
		Caution:  Caution,
		Warnings: warningTexts(c.Warnings),
	}
	p.Summary = append(p.Summary, c.Recommendation.Text)
	a := c.Agreement
	p.Summary = append(p.Summary, fmt.Sprintf("Mean difference (y − x) %s%s (%s); limits of agreement %s to %s%s.",
		g(a.MeanDifference.Estimate), unit, ciText(a.MeanDifference.CI), g(a.LimitsOfAgreement.Lower.Estimate), g(a.LimitsOfAgreement.Upper.Estimate), unit))
	p.Sections = append(p.Sections, report.Section{Heading: "Error model", Text: []string{c.ErrorModel.Reading,
		fmt.Sprintf("Model used: %s (%s); λ = %s (%s).", c.ErrorModel.Model, c.ErrorModel.Source, g(c.ErrorModel.Lambda), c.ErrorModel.LambdaSource)}})
	fits := report.Section{Heading: "Fits", Tables: []report.Table{fitsTable(c.Fits)}}
	if t, ok := uncertaintyTable(c.Fits); ok {
		fits.Tables = append(fits.Tables, t)
	}
	if pb := c.Fits.PassingBablok; pb != nil && pb.KendallTau != nil {
		fits.Text = append(fits.Text, fmt.Sprintf("Passing–Bablok precondition: Kendall's τ = %s (p %s); cusum linearity p = %s.", g(pb.KendallTau.Statistic), p2(pb.KendallTau.PValue), p2(pb.Cusum.PValue)))
	}
	p.Sections = append(p.Sections, fits)
	if len(c.DecisionLevels) > 0 {
		t := report.Table{Caption: "Bias y − x at the decision levels", Header: []string{"level", "fit", "bias", "CI", "bias %", "allowable", "verdict"}, Numeric: []int{0, 2, 3, 4, 5}}
		for _, l := range c.DecisionLevels {
			allow := "-"
			if l.Allowable != nil {
				allow = "±" + g(l.Allowable.Limit)
			}
			c.Fits.each(func(name string, _ *MethodFit) {
				f := l.Fits[name]
				cls := map[string]string{"within": "good", "exceeds": "bad", "inconclusive": "warn"}[f.Verdict]
				v := f.Verdict
				if v == "" {
					v = "-"
				}
				t.Rows = append(t.Rows, report.Row{Class: cls, Cells: []string{g(l.Level), name, g(f.Bias.Estimate), ciText(f.Bias.CI), g(f.BiasPercent.Estimate), allow, v}})
			})
		}
		p.Sections = append(p.Sections, report.Section{Heading: "Decision levels", Tables: []report.Table{t}})
	}
	ag := report.Table{Caption: "Agreement (Bland–Altman)", Header: []string{"quantity", "estimate", "CI"}, Numeric: []int{1, 2}}
	ag.Rows = append(ag.Rows,
		report.Row{Cells: []string{"mean difference y − x", g(a.MeanDifference.Estimate), ciText(a.MeanDifference.CI)}},
		report.Row{Cells: []string{"SD of differences", g(a.SDDifference), "-"}},
		report.Row{Cells: []string{"lower limit of agreement", g(a.LimitsOfAgreement.Lower.Estimate), ciText(a.LimitsOfAgreement.Lower.CI)}},
		report.Row{Cells: []string{"upper limit of agreement", g(a.LimitsOfAgreement.Upper.Estimate), ciText(a.LimitsOfAgreement.Upper.CI)}})
	if pc := a.Percent; pc != nil {
		ag.Rows = append(ag.Rows,
			report.Row{Cells: []string{"mean difference, % of level", g(pc.MeanDifference.Estimate), ciText(pc.MeanDifference.CI)}},
			report.Row{Cells: []string{"limits of agreement, %", g(pc.LimitsOfAgreement.Lower.Estimate) + ", " + g(pc.LimitsOfAgreement.Upper.Estimate), "-"}})
	}
	p.Sections = append(p.Sections, report.Section{Heading: "Agreement", Text: []string{a.ProportionalBias.Reading}, Tables: []report.Table{ag}})
	if s := olsSection(c.OLSBias); s != nil {
		p.Sections = append(p.Sections, *s)
	}
	p.Sections = append(p.Sections, diagSection(c.Diagnostics))
	figs, err := ps.figures(ctx)
	if err != nil {
		return nil, err
	}
	p.Sections = append(p.Sections, report.Section{Heading: "Plots", Figures: figs})
	if w := resp.WithoutExcluded; w != nil {
		t := fitsTable(w.Fits)
		t.Caption = "Fitted lines without " + strings.Join(w.Excluded, ", ")
		p.Sections = append(p.Sections, report.Section{Heading: "Without the excluded samples",
			Text: []string{w.Recommendation.Text}, Tables: []report.Table{t}})
	}
	return p, nil
}

// wantsHTML says whether the client asked for the HTML report.
func wantsHTML(c *gin.Context) bool {
	return c.NegotiateFormat("application/json", "text/html") == "text/html"
}

func (s *Server) writeHTML(c *gin.Context, status int, write func(io.Writer) error) {
	var b bytes.Buffer
	if err := write(&b); err != nil {
		s.problem(c, s.toProblem(c, err))
		return
	}
	c.Header("Content-Security-Policy", report.ContentSecurityPolicy)
	c.Header("Cache-Control", "no-store")
	c.Data(status, "text/html; charset=utf-8", b.Bytes())
}

// hashingBody reads the body through SHA-256 for the report's record.
func hashingBody(r io.Reader) (io.Reader, hash.Hash) {
	h := sha256.New()
	return io.TeeReader(r, h), h
}

func hexSum(h hash.Hash) string { return hex.EncodeToString(h.Sum(nil)) }

// handlePlot serves POST /v1/plots/{kind}: a fit request (JSON, or CSV with
// the options in the query) drawn as one SVG plot; "method" in the query
// picks the fit to draw.
func (s *Server) handlePlot(c *gin.Context) {
	kind := c.Param("kind")
	if !slices.Contains(plotKinds, kind) {
		s.problem(c, newProblem(kindNotFound, fmt.Sprintf("no plot %q; plots: %s", truncate(kind), strings.Join(plotKinds, ", "))))
		return
	}
	mt := s.mediaType(c, true)
	if mt == "" {
		return
	}
	body, release, p := s.body(c)
	if p != nil {
		s.problem(c, p)
		return
	}
	defer release()
	q := c.Request.URL.Query()
	method := q.Get("method")
	q.Del("method")
	var req *FitRequest
	var err error
	if mt == "csv" {
		req, err = fitFromCSV(body, q)
	} else {
		if len(q) > 0 {
			s.problem(c, invalid("query", "with a JSON body only the query parameter method is taken"))
			return
		}
		req, err = DecodeFitJSON(body)
	}
	if err == nil {
		err = req.Validate(s.cfg.Limits)
	}
	if err != nil {
		s.problem(c, s.toProblem(c, err))
		return
	}
	resp, err := s.computeFit(c, req)
	if err != nil {
		s.problem(c, s.toProblem(c, err))
		return
	}
	type drawnPlot struct {
		b  []byte
		ok bool
	}
	out, err := render(s, c, func(ctx context.Context) (drawnPlot, error) {
		ps, err := fitPlots(resp, &req.Points, method)
		if err != nil {
			return drawnPlot{}, err
		}
		b, ok, err := ps.plot(ctx, kind)
		return drawnPlot{b, ok}, err
	})
	b, ok := out.b, out.ok
	switch {
	case err != nil:
		s.problem(c, s.toProblem(c, err))
	case !ok:
		s.problem(c, invalid("/bootstrap/resamples", "the bootstrap plot needs a bootstrap: ask for resamples"))
	default:
		c.Header("Content-Security-Policy", report.ContentSecurityPolicy)
		c.Data(http.StatusOK, "image/svg+xml", b)
	}
}

// inSlot runs compute in a compute slot under the request deadline.
func inSlot[T any](s *Server, c *gin.Context, compute func(context.Context) (T, error)) (T, error) {
	release, p := s.acquire(c.Request.Context())
	if p != nil {
		var zero T
		return zero, p
	}
	defer release()
	ctx, cancel := context.WithTimeout(c.Request.Context(), s.cfg.RequestTimeout)
	defer cancel()
	return compute(ctx)
}

// render runs a drawing step (plots, a report's page) in a compute slot
// under the request deadline, like a fit. Errors of the drawing become a
// 422 problem; a panic that escapes the report package's own guard is
// recovered into the same problem (and logged without its value, which may
// hold the client's data).
func render[T any](s *Server, c *gin.Context, draw func(context.Context) (T, error)) (T, error) {
	return inSlot(s, c, func(ctx context.Context) (out T, err error) {
		defer func() {
			if r := recover(); r != nil {
				s.cfg.Logger.Error("panic while drawing", "route", c.FullPath())
				var zero T
				out, err = zero, newProblem(kindUnfittable, report.ErrDraw.Error())
			}
		}()
		out, err = draw(ctx)
		var p *Problem
		if err != nil && !errors.As(err, &p) && !errors.Is(err, context.Canceled) && !errors.Is(err, context.DeadlineExceeded) {
			err = newProblem(kindUnfittable, "the plot could not be drawn: "+err.Error())
		}
		return out, err
	})
}

// fitReport builds a line fit's report in a compute slot (see render).
func (s *Server) fitReport(c *gin.Context, resp *FitResponse, d *Dataset, sha string) (*report.Page, error) {
	return render(s, c, func(ctx context.Context) (*report.Page, error) {
		return FitReport(ctx, resp, d, sha, s.cfg.Version)
	})
}

// compareReport builds a study's report in a compute slot (see render).
func (s *Server) compareReport(c *gin.Context, resp *CompareResponse, req *CompareRequest, sha string) (*report.Page, error) {
	return render(s, c, func(ctx context.Context) (*report.Page, error) {
		return CompareReport(ctx, resp, req, sha, s.cfg.Version)
	})
}

// computeFit runs Fit in a compute slot under the deadline.
func (s *Server) computeFit(c *gin.Context, req *FitRequest) (*FitResponse, error) {
	resp, err := inSlot(s, c, func(ctx context.Context) (*FitResponse, error) { return Fit(ctx, req, s.settings(0)) })
	if err == nil {
		s.metrics.points.Add(float64(resp.N))
	}
	return resp, err
}

// computeCompare runs Compare in a compute slot under the deadline.
func (s *Server) computeCompare(c *gin.Context, req *CompareRequest) (*CompareResponse, error) {
	resp, err := inSlot(s, c, func(ctx context.Context) (*CompareResponse, error) { return Compare(ctx, req, s.settings(0)) })
	if err == nil {
		s.metrics.points.Add(float64(resp.N))
	}
	return resp, err
}

// handleIndex serves GET /: the page to paste or upload data.
func (s *Server) handleIndex(c *gin.Context) {
	demo, _ := Demo.ReadFile("demo/demo-glucose.csv")
	s.writeHTML(c, http.StatusOK, func(w io.Writer) error {
		return report.WriteForm(w, &report.Form{Version: s.cfg.Version, NeedsKey: len(s.keys.hashes) > 0, DemoFit: string(demo)})
	})
}

// handleFormReport serves POST /report: the page's form (multipart or
// urlencoded, no JavaScript needed), answered with the HTML report; a bad
// input is answered with the form again and the problem in words.
func (s *Server) handleFormReport(c *gin.Context) {
	body, release, p := s.body(c)
	if p != nil {
		s.formError(c, p.Status, p.Title+". "+p.Detail)
		return
	}
	defer release()
	c.Request.Body = io.NopCloser(body)
	if err := c.Request.ParseMultipartForm(32 << 20); err != nil && err != http.ErrNotMultipart {
		s.formError(c, http.StatusBadRequest, "The form could not be read: "+err.Error())
		return
	}
	if len(s.keys.hashes) > 0 && !s.keys.valid(c.Request.FormValue("api_key")) {
		s.formError(c, http.StatusUnauthorized, "A valid API key is required.")
		return
	}
	var data []byte
	if fh, err := c.FormFile("file"); err == nil && fh.Size > 0 {
		f, err := fh.Open()
		if err != nil {
			s.formError(c, http.StatusBadRequest, "The uploaded file could not be read.")
			return
		}
		data, err = io.ReadAll(f)
		f.Close()
		if err != nil {
			s.formError(c, http.StatusBadRequest, "The uploaded file could not be read.")
			return
		}
	} else {
		data = []byte(c.Request.FormValue("csv"))
	}
	if len(bytes.TrimSpace(data)) == 0 {
		s.formError(c, http.StatusBadRequest, "Choose a CSV file or paste CSV data.")
		return
	}
	sum := sha256.Sum256(data)
	sha := hex.EncodeToString(sum[:])
	q := url.Values{}
	field := func(form, param string) {
		if v := strings.TrimSpace(c.Request.FormValue(form)); v != "" {
			q.Set(param, strings.ReplaceAll(v, " ", ""))
		}
	}
	field("confidence", "confidence")
	field("lambda", "lambda")
	field("seed", "seed")
	if v := strings.TrimSpace(c.Request.FormValue("resamples")); v != "" && v != "0" {
		q.Set("resamples", v)
	}
	var page *report.Page
	if c.Request.FormValue("analysis") == "compare" {
		field("at", "decision_levels")
		field("allowable_absolute", "allowable_absolute")
		field("allowable_percent", "allowable_percent")
		for _, k := range []string{"unit", "x_name", "y_name"} {
			if v := strings.TrimSpace(c.Request.FormValue(k)); v != "" {
				q.Set(k, v)
			}
		}
		req, err := DecodeCompareCSV(bytes.NewReader(data))
		if err == nil {
			err = CompareRequestFromQuery(q, req)
		}
		if err == nil {
			err = req.Validate(s.cfg.Limits)
		}
		var resp *CompareResponse
		if err == nil {
			resp, err = s.computeCompare(c, req)
		}
		if err == nil {
			page, err = s.compareReport(c, resp, req, sha)
		}
		if err != nil {
			s.formProblem(c, err)
			return
		}
	} else {
		field("at", "at")
		field("methods", "methods")
		d, err := DecodeCSV(bytes.NewReader(data))
		var req *FitRequest
		if err == nil {
			req, err = FitRequestFromQuery(q, d)
		}
		if err == nil {
			err = req.Validate(s.cfg.Limits)
		}
		var resp *FitResponse
		if err == nil {
			resp, err = s.computeFit(c, req)
		}
		if err == nil {
			page, err = s.fitReport(c, resp, d, sha)
		}
		if err != nil {
			s.formProblem(c, err)
			return
		}
	}
	s.writeHTML(c, http.StatusOK, page.Write)
}

func (s *Server) formProblem(c *gin.Context, err error) {
	p := s.toProblem(c, err)
	s.metrics.problems.WithLabelValues(strings.TrimPrefix(p.Type, ProblemTypeBase)).Inc()
	msg := p.Title + "."
	for _, e := range p.Errors {
		msg += " " + e.Pointer + ": " + e.Detail + "."
	}
	if len(p.Errors) == 0 && p.Detail != "" {
		msg += " " + p.Detail
	}
	s.formError(c, p.Status, msg)
}

func (s *Server) formError(c *gin.Context, status int, msg string) {
	s.writeHTML(c, status, func(w io.Writer) error {
		return report.WriteForm(w, &report.Form{Version: s.cfg.Version, NeedsKey: len(s.keys.hashes) > 0, Error: msg,
			DemoFit: c.Request.FormValue("csv")})
	})
}
