package report

import (
	"context"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"eivfit/api/wire"
	"eivfit/eiv/study"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// A calibration relates two different quantities (an assigned value and
// an instrument's response): nothing here compares y with x, so there is
// no identity line, no bias y − x and no difference plot.

var inkUnknown = inkOLS // bluish green: the unknowns

// CalibrationPlot draws the standards with their x and y error bars (±1
// standard uncertainty), the calibration line with its band, and the
// unknowns at (x₀, ȳ₀) with their expanded uncertainty U(x₀) as bars. Like
// every plot it maps its data onto the unit square itself (see axis) and
// clips what it draws; above MaxMarkers standards they are a density
// without error bars.
func CalibrationPlot(ctx context.Context, x, y, ux, uy []float64, line Line, x0, y0, U []float64, ax Axes) ([]byte, error) {
	if len(x) == 0 {
		return nil, ErrNoData
	}
	if err := finite(x, y, ux, uy, x0, y0, U, line.BandX, line.BandLo, line.BandHi); err != nil {
		return nil, err
	}
	return drawn(func() (*figure, error) {
		xv := [][]float64{x, x0}
		for i := range x0 {
			xv = append(xv, []float64{x0[i] - U[i], x0[i] + U[i]})
		}
		yv := [][]float64{y, y0, line.BandLo, line.BandHi}
		if !Binned(len(x)) { // the error bars are drawn whole
			xv = append(xv, spread(x, ux, -1), spread(x, ux, 1))
			yv = append(yv, spread(y, uy, -1), spread(y, uy, 1))
		}
		xa := newAxis(xv...)
		lo, hi := math.Min(slices.Min(x), minOr(x0, math.Inf(1))), math.Max(slices.Max(x), maxOr(x0, math.Inf(-1)))
		f := newFigure("Calibration line", ax.label(ax.X), ax.labelY(ax.Y), xa,
			newAxis(append(yv, lineEnds(line, lo, hi))...))
		f.band(line)
		f.line(line, lo, hi, inkFit, nil, fmt.Sprintf("%s line: y = %.5g + %.5g x", strings.ToUpper(line.Name), line.Intercept, line.Slope))
		if !Binned(len(x)) {
			f.errorBars(x, y, ux, uy)
		}
		if _, err := f.points(ctx, x, y, "standards (bars ±1 u)"); err != nil {
			return nil, err
		}
		if len(x0) > 0 {
			bars := &segments{style: draw.LineStyle{Color: inkUnknown, Width: vg.Points(1.2)}, cap: vg.Points(5)}
			for i := range x0 {
				bars.add(f.x.u(x0[i]-U[i]), f.y.u(y0[i]), f.x.u(x0[i]+U[i]), f.y.u(y0[i]), true)
			}
			if len(bars.a) > 0 {
				f.add(lines, bars)
			}
			u, v := make([]float64, len(x0)), make([]float64, len(x0))
			for i := range x0 {
				u[i], v[i] = f.x.u(x0[i]), f.y.u(y0[i])
			}
			s, err := plotter.NewScatter(unitXYs(u, v))
			if err != nil {
				return nil, err
			}
			s.GlyphStyle = draw.GlyphStyle{Color: inkUnknown, Radius: vg.Points(3.5), Shape: draw.TriangleGlyph{}}
			f.add(markers, s)
			f.legendAdd("unknowns x₀ (bars ±U)", s)
		}
		return f, nil
	})
}

func minOr(v []float64, empty float64) float64 {
	if len(v) == 0 {
		return empty
	}
	return slices.Min(v)
}

func maxOr(v []float64, empty float64) float64 {
	if len(v) == 0 {
		return empty
	}
	return slices.Max(v)
}

// StandardizedResidualPlot draws the standards' standardized residuals
// against x with the zero line and ±2; the y view is symmetric, at least
// ±3, so that ±2 is always inside.
func StandardizedResidualPlot(ctx context.Context, x, z []float64, ax Axes) ([]byte, error) {
	if len(x) == 0 {
		return nil, ErrNoData
	}
	if err := finite(x, z); err != nil {
		return nil, err
	}
	return drawn(func() (*figure, error) {
		top := 3.0
		for _, v := range z {
			if t := math.Ceil(math.Abs(v) * 1.1); t > top && !math.IsInf(t, 0) {
				top = t
			}
		}
		f := newFigure("Standardized residuals of the standards", ax.label(ax.X), "standardized residual",
			newAxis(x), newAxis(z, []float64{-top, top}))
		lo, hi := slices.Min(x), slices.Max(x)
		f.hline(0, lo, hi, inkIdentity, dashRef, "")
		f.hline(2, lo, hi, inkLimit, dashLimit, "±2")
		f.hline(-2, lo, hi, inkLimit, dashLimit, "")
		_, err := f.points(ctx, x, z, "")
		return f, err
	})
}

func calAxes(r *wire.CalibrationResponse) Axes {
	ax := Axes{X: r.XName, Y: r.YName, Unit: r.XUnit, YUnit: r.YUnit}
	if ax.X == "" {
		ax.X = "assigned value x"
	}
	if ax.Y == "" {
		ax.Y = "response y"
	}
	return ax
}

func unitSuffix(u string) string {
	if u == "" {
		return ""
	}
	return " (" + u + ")"
}

func dofText(v *float64) string {
	if v == nil {
		return "∞"
	}
	return strconv.FormatFloat(*v, 'f', 1, 64)
}

// calPlots draws the calibration plot and the residual plot.
func calPlots(ctx context.Context, r *wire.CalibrationResponse, res *study.CalibrationResult) ([]Figure, error) {
	ax := calAxes(r)
	n := len(r.Standards)
	x, y, ux, uy, z := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	for i, s := range r.Standards {
		x[i], y[i], ux[i], uy[i], z[i] = s.X, s.Y.Estimate, s.UX, s.Y.U, s.Standardized
	}
	var x0, y0, U []float64
	for _, u := range r.Unknowns {
		x0, y0, U = append(x0, u.X.Estimate), append(y0, u.Y.Estimate), append(U, u.X.Expanded)
	}
	line := Line{Name: r.Line.Model, Intercept: r.Line.Intercept.Estimate, Slope: r.Line.Slope.Estimate}
	if n > 0 {
		lo, hi := math.Min(slices.Min(x), minOr(x0, math.Inf(1))), math.Max(slices.Max(x), maxOr(x0, math.Inf(-1)))
		line.BandX, line.BandLo, line.BandHi = calBand(res, lo, hi)
	}
	cp, err := CalibrationPlot(ctx, x, y, ux, uy, line, x0, y0, U, ax)
	if err != nil {
		return nil, err
	}
	rp, err := StandardizedResidualPlot(ctx, x, z, ax)
	if err != nil {
		return nil, err
	}
	return []Figure{
		{Caption: fmt.Sprintf("The standards with bars of ±1 standard uncertainty in x and y, the %s line with its band of ±%.3g·u(ŷ) (the line's own uncertainty), and each unknown at (x₀, ȳ₀) with its expanded uncertainty U(x₀).", r.Line.Model, res.BandK), SVG: SVG(cp)},
		{Caption: "Standardized residuals of the standards against x: under the model each has unit variance, so points beyond ±2 are unusual; a curve means the relation is not a straight line.", SVG: SVG(rp)},
	}, nil
}

// calBand is the line's band of ±k·u(ŷ) at 41 points from lo to hi; none
// when a point of it is not finite (the band is left out, the line is
// still drawn). The points are interpolated as lo·(1 − t) + hi·t, which
// never overflows.
func calBand(res *study.CalibrationResult, lo, hi float64) (bx, blo, bhi []float64) {
	k := res.BandK
	for j := range 41 {
		t := float64(j) / 40
		xv := lo*(1-t) + hi*t
		f, err := res.Line.Forward(xv, 0)
		if err != nil {
			return nil, nil, nil
		}
		l, h := f.Y.Value-k*f.ULine, f.Y.Value+k*f.ULine
		if finite([]float64{xv, l, h}) != nil {
			return nil, nil, nil
		}
		bx, blo, bhi = append(bx, xv), append(blo, l), append(bhi, h)
	}
	return bx, blo, bhi
}

// CalibrationReport builds the calibration record.
func CalibrationReport(ctx context.Context, req *wire.CalibrationRequest, r *wire.CalibrationResponse, res *study.CalibrationResult, made Made) (*Page, error) {
	xu, yu := unitSuffix(r.XUnit), unitSuffix(r.YUnit)
	ax := calAxes(r)
	l := r.Line
	p := &Page{
		Title:    "Calibration record",
		Subtitle: fmt.Sprintf("%s against %s · %d standards · %d unknowns · model %s", ax.Y, ax.X, l.Standards, len(r.Unknowns), l.Model),
		Caution:  r.Caution,
		Meta:     made.header(),
	}
	for _, w := range r.Warnings {
		p.Warnings = append(p.Warnings, calWarningText(w))
	}
	p.Summary = append(p.Summary, fmt.Sprintf("Calibration line y = a + b·x by %s: a = %s ± %s%s, b = %s ± %s (standard uncertainties).",
		modelName(l.Model), g(l.Intercept.Estimate), g(l.Intercept.U), unitAfter(r.YUnit), g(l.Slope.Estimate), g(l.Slope.U)))
	p.Summary = append(p.Summary, validationText(r.Validation))
	for _, w := range r.Warnings {
		p.Alerts = append(p.Alerts, calWarningText(w))
	}
	for _, u := range r.Unknowns {
		p.Summary = append(p.Summary, fmt.Sprintf("%s: x₀ = %s%s, U = %s%s (k = %.3g), interval %s to %s%s.",
			u.ID, g(u.X.Estimate), unitAfter(r.XUnit), g(u.X.Expanded), unitAfter(r.XUnit), u.X.K, g(u.X.Interval.Lower), g(u.X.Interval.Upper), unitAfter(r.XUnit)))
	}

	st := Table{Caption: "Reference standards", Header: []string{"id", "x" + xu, "u(x)" + xu, "readings", "ȳ" + yu, "u(ȳ)" + yu, "basis of u(ȳ)", "standardized residual"}, Numeric: []int{1, 2, 3, 4, 5, 7}}
	for _, s := range r.Standards {
		row := Row{Cells: []string{s.ID, g(s.X), g(s.UX), strconv.Itoa(s.Readings), g(s.Y.Estimate), g(s.Y.U), s.Basis, fmt.Sprintf("%.3g", s.Standardized)}}
		if s.Flagged {
			row.Class = "warn"
		}
		st.Rows = append(st.Rows, row)
	}
	std := Section{Heading: "Standards", Tables: []Table{st}}
	if r.Pooled != nil {
		std.Text = append(std.Text, fmt.Sprintf("Pooled replicate SD of one reading: %s%s on %d degrees of freedom.", g(r.Pooled.SD), yu, r.Pooled.DOF))
	}
	p.Sections = append(p.Sections, std)

	lt := Table{Caption: "Line y = a + b·x", Header: []string{"quantity", "value", "standard uncertainty"}, Numeric: []int{1, 2}}
	lt.Rows = []Row{
		{Cells: []string{"intercept a" + yu, g(l.Intercept.Estimate), g(l.Intercept.U)}},
		{Cells: []string{"slope b", g(l.Slope.Estimate), g(l.Slope.U)}},
		{Cells: []string{"cov(a, b)", g(l.CovSlopeIntercept), "-"}},
		{Cells: []string{"correlation of a and b", fmt.Sprintf("%.4f", l.Correlation), "-"}},
		{Cells: []string{"centre: ŷ at x = " + g(l.Centre.X), g(l.Centre.Y.Estimate), g(l.Centre.Y.U)}},
		{Cells: []string{"degrees of freedom of the line", dofText(l.DOF), "-"}},
	}
	p.Sections = append(p.Sections, Section{Heading: "The line", Text: []string{
		"Model: " + modelName(l.Model) + ". Why: " + l.Reason + ".",
		"At the centre the line's value and its slope are uncorrelated: u²(ŷ(x)) = u²(ŷ_c) + (x − x_c)²·u²(b).",
	}, Tables: []Table{lt}})

	figs, err := calPlots(ctx, r, res)
	if err != nil {
		return nil, err
	}
	v := r.Validation
	vt := Table{Header: []string{"χ²", "ν", fmt.Sprintf("χ²_%g(ν)", v.Level), "p", "consistent", "on inconsistency", "scale applied"}, Numeric: []int{0, 1, 2, 3, 6}}
	cls := "good"
	if !v.Consistent {
		cls = "bad"
	}
	vt.Rows = []Row{{Class: cls, Cells: []string{g(v.Chi2), strconv.Itoa(v.DOF), g(v.Quantile), p2(v.P), yesNo(v.Consistent), v.Policy, fmt.Sprintf("%.4g", v.Scale)}}}
	p.Sections = append(p.Sections, Section{Heading: "Validation", Text: []string{validationText(v)}, Tables: []Table{vt}, Figures: figs[1:]})
	p.Sections = append(p.Sections, Section{Heading: "Calibration plot", Figures: figs[:1]})

	if len(r.Unknowns) > 0 {
		ut := Table{Caption: "x₀ = (ȳ₀ − a)/b with its uncertainty (JCGM 100)", Header: []string{"id", "readings", "ȳ₀" + yu, "u(ȳ₀)" + yu, "x₀" + xu, "u(x₀)" + xu, "ν_eff", "k", "U" + xu, "interval" + xu}, Numeric: []int{1, 2, 3, 4, 5, 6, 7, 8}}
		bt := Table{Caption: "Uncertainty budget of x₀: |sensitivity| × u of each input", Header: []string{"id", "line at centre" + xu, "slope" + xu, "reading" + xu, "u(x₀)" + xu}, Numeric: []int{1, 2, 3, 4}}
		mt := Table{Caption: "Monte Carlo check (JCGM 101)", Header: []string{"id", "trials", "mean" + xu, "SD" + xu, "shortest interval" + xu, "linear interval" + xu, "tolerance δ" + xu, "validated"}, Numeric: []int{1, 2, 3, 6}}
		for _, u := range r.Unknowns {
			ut.Rows = append(ut.Rows, Row{Cells: []string{u.ID, strconv.Itoa(u.Readings), g(u.Y.Estimate), g(u.Y.U), g(u.X.Estimate), g(u.X.U),
				dofText(u.X.DOF), fmt.Sprintf("%.3g", u.X.K), g(u.X.Expanded), fmt.Sprintf("%s to %s", g(u.X.Interval.Lower), g(u.X.Interval.Upper))}})
			row := []string{u.ID, "-", "-", "-", g(u.X.U)}
			for j, b := range u.Budget {
				if j < 3 {
					row[1+j] = g(b.Contribution)
				}
			}
			bt.Rows = append(bt.Rows, Row{Cells: row})
			if m := u.MonteCarlo; m != nil {
				c := "good"
				if !m.Validated {
					c = "bad"
				}
				mt.Rows = append(mt.Rows, Row{Class: c, Cells: []string{u.ID, strconv.Itoa(m.Trials), g(m.Mean), g(m.SD),
					fmt.Sprintf("%.7g to %.7g", m.Interval.Lower, m.Interval.Upper),
					fmt.Sprintf("%.7g to %.7g", m.LinearInterval.Lower, m.LinearInterval.Upper), g(m.Tolerance), yesNo(m.Validated)}})
			}
		}
		sec := Section{Heading: "Unknowns", Tables: []Table{ut, bt}}
		if len(mt.Rows) > 0 {
			sec.Tables = append(sec.Tables, mt)
		}
		p.Sections = append(p.Sections, sec)
	}
	if len(r.Forward) > 0 {
		ft := Table{Caption: "ŷ = a + b·x with u(ŷ)", Header: []string{"x" + xu, "u(x)" + xu, "ŷ" + yu, "u(ŷ)" + yu, "of which the line" + yu}, Numeric: []int{0, 1, 2, 3, 4}}
		for _, f := range r.Forward {
			ft.Rows = append(ft.Rows, Row{Cells: []string{g(f.X), g(f.UX), g(f.Y.Estimate), g(f.Y.U), g(f.ULine)}})
		}
		p.Sections = append(p.Sections, Section{Heading: "Forward evaluations", Tables: []Table{ft}})
	}
	p.Provenance = calProvenance(req, r, made)
	p.Appendix = calAppendix(req, r, made)
	return p, nil
}

// calProvenance is every setting of a calibration that changes a number.
func calProvenance(req *wire.CalibrationRequest, r *wire.CalibrationResponse, made Made) []KV {
	d := &req.Data
	kv := made.inputKVs(len(d.Standards)+len(d.Unknowns), fmt.Sprintf("rows: %d standards, %d unknowns", len(d.Standards), len(d.Unknowns)), nil)
	model := modelName(r.Line.Model) + ", chosen from the data"
	if req.Model != "" {
		model = modelName(r.Line.Model) + ", as requested"
	}
	kv = append(kv, KV{Key: "Model", Value: model + ". Why: " + r.Line.Reason})
	corr := "none: each standard's x uncertainty is independent"
	switch {
	case d.XCovariance != nil:
		corr = fmt.Sprintf("a full covariance of the %d standards' x values was given", len(d.XCovariance))
	case len(d.Shared) > 0:
		var s []string
		for _, c := range d.Shared {
			s = append(s, fmt.Sprintf("%s (relative u %s, %d standards)", c.Name, g(c.RelativeU), len(c.Standards)))
		}
		corr = "shared components: " + strings.Join(s, "; ")
	}
	kv = append(kv, KV{Key: "Correlated x errors", Value: corr})
	policy := r.Validation.Policy
	kv = append(kv, KV{Key: "Validation", Value: fmt.Sprintf("χ² test at %s; on inconsistency: %s", percent(r.Validation.Level), policy)})
	cov := "k = 2 (default)"
	switch {
	case req.CoverageFactor != nil:
		cov = "k = " + g(*req.CoverageFactor) + " (given)"
	case req.CoverageProbability != nil:
		cov = "coverage probability " + percent(*req.CoverageProbability) + ", k from Student's t on the effective degrees of freedom"
	}
	kv = append(kv, KV{Key: "Coverage", Value: cov})
	mc := "not run"
	if m := req.MonteCarlo; m != nil {
		trials := "10⁶ per unknown (default)"
		if m.Trials > 0 {
			trials = strconv.Itoa(m.Trials) + " per unknown"
		}
		seed := "drawn at random"
		if r.MonteCarloSeed != nil {
			seed = strconv.FormatUint(*r.MonteCarloSeed, 10)
			if m.Seed == nil {
				seed += " (drawn at random, recorded)"
			}
		}
		mc = trials + ", seed " + seed
	}
	kv = append(kv, KV{Key: "Monte Carlo (JCGM 101)", Value: mc})
	if len(req.Forward) > 0 {
		kv = append(kv, KV{Key: "Forward evaluations", Value: strconv.Itoa(len(req.Forward))})
	}
	if r.XUnit != "" || r.YUnit != "" {
		kv = append(kv, KV{Key: "Units", Value: fmt.Sprintf("x: %s; y: %s", orNone(r.XUnit), orNone(r.YUnit))})
	}
	return kv
}

// calAppendix lists the standards and unknowns as given; flagged
// standards are marked.
func calAppendix(req *wire.CalibrationRequest, r *wire.CalibrationResponse, made Made) Section {
	d := &req.Data
	if n := len(d.Standards) + len(d.Unknowns); n > MaxAppendixRows {
		return appendixTooLarge(n, made)
	}
	xu, yu := r.XUnit, r.YUnit
	st := Table{Caption: "Standards", Header: []string{"row", "id", withUnit("x", xu), withUnit("u(x)", xu), withUnit("readings y", yu), withUnit("u(y) of one reading", yu), "r", "mark"}, Numeric: []int{0, 2, 3, 5, 6}}
	flagged := map[string]bool{}
	for _, s := range r.Standards {
		if s.Flagged {
			flagged[s.ID] = true
		}
	}
	for i, s := range d.Standards {
		row := Row{Cells: []string{strconv.Itoa(i + 1), s.ID, exact(s.X), exact(s.UX), valuesText(s.Y), optExact(s.UY), exact(s.R), ""}}
		if flagged[s.ID] && s.ID != "" {
			row.Cells[7], row.Class = "flagged: standardized residual beyond ±2", "warn"
		}
		st.Rows = append(st.Rows, row)
	}
	sec := Section{Heading: "Appendix: the data as analysed", ID: "appendix",
		Text:   []string{appendixText(made, nil, "Flagged standards are marked; they are kept in the line. A u(y) left empty was not stated (the pooled replicate SD is used).")},
		Tables: []Table{st}}
	if len(d.Unknowns) > 0 {
		ut := Table{Caption: "Unknowns", Header: []string{"row", "id", withUnit("readings y", yu), withUnit("u(y) of one reading", yu)}, Numeric: []int{0, 3}}
		for i, u := range d.Unknowns {
			ut.Rows = append(ut.Rows, Row{Cells: []string{strconv.Itoa(i + 1), u.ID, valuesText(u.Y), optExact(u.UY)}})
		}
		sec.Tables = append(sec.Tables, ut)
	}
	return sec
}

func modelName(m string) string {
	switch m {
	case "wls":
		return "weighted least squares (wls)"
	case "gdr":
		return "generalized distance regression (gdr)"
	case "gmr":
		return "Gauss–Markov regression (gmr)"
	}
	return m
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

func validationText(v wire.CalValidation) string {
	verdict := "the scatter about the line is consistent with the stated uncertainties"
	if !v.Consistent {
		verdict = "the scatter about the line is larger than the stated uncertainties allow"
		if v.Policy == "inflate" {
			verdict += fmt.Sprintf("; the line's uncertainties were multiplied by √(χ²/ν) = %.4g", v.Scale)
		} else {
			verdict += "; the uncertainties are reported as stated"
		}
	}
	return fmt.Sprintf("Validation: χ² = %s on ν = %d degrees of freedom against χ²_%g(ν) = %s (p = %s): %s.",
		g(v.Chi2), v.DOF, v.Level, g(v.Quantile), p2(v.P), verdict)
}

func calWarningText(w wire.CalWarningOut) string {
	if w.Unknown != "" {
		return "[" + w.Unknown + "] " + w.Message
	}
	return w.Message
}

// WriteCalibrationText writes a calibration for a terminal.
func WriteCalibrationText(w io.Writer, r *wire.CalibrationResponse) error {
	var b strings.Builder
	xu, yu := unitSuffix(r.XUnit), unitSuffix(r.YUnit)
	l := r.Line
	fmt.Fprintf(&b, "Calibration line y = a + b·x by %s, %d standards, x from %.6g to %.6g%s\n", modelName(l.Model), l.Standards, l.XMin, l.XMax, xu)
	fmt.Fprintf(&b, "  why: %s\n", l.Reason)
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "  intercept a\t%.6g\tu %.4g\n", l.Intercept.Estimate, l.Intercept.U)
	fmt.Fprintf(tw, "  slope b\t%.6g\tu %.4g\n", l.Slope.Estimate, l.Slope.U)
	fmt.Fprintf(tw, "  cov(a, b)\t%.4g\tcorrelation %.4f\n", l.CovSlopeIntercept, l.Correlation)
	fmt.Fprintf(tw, "  centre\tŷ(%.6g) = %.6g\tu %.4g\n", l.Centre.X, l.Centre.Y.Estimate, l.Centre.Y.U)
	fmt.Fprintf(tw, "  line ν\t%s\t\n", dofText(l.DOF))
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(&b, "\n%s\n", validationText(r.Validation))
	b.WriteString("\nStandards:\n")
	tw = tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "  id\tx%s\tu(x)\tȳ%s\tu(ȳ)\tk\tstd. residual\t\n", xu, yu)
	for _, s := range r.Standards {
		flag := ""
		if s.Flagged {
			flag = " *"
		}
		fmt.Fprintf(tw, "  %s\t%.6g\t%.4g\t%.6g\t%.4g\t%d\t%.3f%s\t\n", s.ID, s.X, s.UX, s.Y.Estimate, s.Y.U, s.Readings, s.Standardized, flag)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if len(r.Unknowns) > 0 {
		b.WriteString("\nUnknowns (x₀ = (ȳ₀ − a)/b):\n")
		tw = tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
		fmt.Fprintf(tw, "  id\tȳ₀%s\tu(ȳ₀)\tx₀%s\tu(x₀)\tν_eff\tk\tU\tinterval\t\n", yu, xu)
		for _, u := range r.Unknowns {
			fmt.Fprintf(tw, "  %s\t%.6g\t%.4g\t%.6g\t%.4g\t%s\t%.3g\t%.4g\t[%.6g, %.6g]\t\n", u.ID, u.Y.Estimate, u.Y.U,
				u.X.Estimate, u.X.U, dofText(u.X.DOF), u.X.K, u.X.Expanded, u.X.Interval.Lower, u.X.Interval.Upper)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
		for _, u := range r.Unknowns {
			if m := u.MonteCarlo; m != nil {
				v := "validates"
				if !m.Validated {
					v = "does NOT validate"
				}
				fmt.Fprintf(&b, "  %s Monte Carlo (%d trials, seed %d): mean %.6g, SD %.4g, %g %% interval [%.6g, %.6g]; %s the linear result (δ = %.2g)\n",
					u.ID, m.Trials, m.Seed, m.Mean, m.SD, 100*m.CoverageProbability, m.Interval.Lower, m.Interval.Upper, v, m.Tolerance)
			}
		}
	}
	if len(r.Forward) > 0 {
		b.WriteString("\nForward (ŷ = a + b·x):\n")
		for _, f := range r.Forward {
			fmt.Fprintf(&b, "  x = %.6g (u %.4g): ŷ = %.6g%s, u(ŷ) = %.4g\n", f.X, f.UX, f.Y.Estimate, yu, f.Y.U)
		}
	}
	if len(r.Warnings) > 0 {
		b.WriteString("\nWarnings:\n")
		for _, wn := range r.Warnings {
			fmt.Fprintf(&b, "  %s: %s\n", wn.Code, calWarningText(wn))
		}
	}
	fmt.Fprintf(&b, "\n%s\n", r.Caution)
	_, err := io.WriteString(w, b.String())
	return err
}
