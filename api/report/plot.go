// Package report renders eivfit's plots (SVG, with gonum.org/v1/plot) and
// its self-contained HTML report. It knows nothing of HTTP or of the API's
// types: callers pass plain series and a Page.
package report

import (
	"bytes"
	"errors"
	"fmt"
	"image/color"
	"math"
	"regexp"
	"slices"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"
)

// The palette is Okabe & Ito's (2008) colour-blind-safe set; eivfit uses
// its own assignment of roles to colours.
var (
	inkPoint    = color.RGBA{0x00, 0x72, 0xB2, 0xff}  // blue: data
	inkFit      = color.RGBA{0xD5, 0x5E, 0x00, 0xff}  // vermillion: errors-in-variables line
	inkBand     = color.NRGBA{0xD5, 0x5E, 0x00, 0x40} // the same, translucent: its confidence band
	inkOLS      = color.RGBA{0x00, 0x9E, 0x73, 0xff}  // bluish green: OLS
	inkIdentity = color.RGBA{0x66, 0x66, 0x66, 0xff}  // grey: identity and references
	inkLimit    = color.RGBA{0xCC, 0x79, 0xA7, 0xff}  // reddish purple: limits
	inkBar      = color.RGBA{0x56, 0xB4, 0xE9, 0xff}  // sky blue: histogram
	inkError    = color.NRGBA{0x00, 0x72, 0xB2, 0x80} // error bars
)

func init() {
	// A sans-serif face reads better on screen and in print at plot sizes.
	plot.DefaultFont = font.Font{Typeface: "Liberation", Variant: "Sans"}
	plotter.DefaultFont = plot.DefaultFont
}

// Size of every plot.
const (
	plotW = 5.6 * vg.Inch
	plotH = 4.0 * vg.Inch
)

// Axes names the quantities on the axes, with their unit. YUnit, when set
// and not Unit, is y's own unit: x and y are then on different scales,
// and nothing compares them with each other (no identity line).
type Axes struct {
	X, Y, Unit string
	YUnit      string
}

func (a Axes) label(s string) string {
	if a.Unit == "" {
		return s
	}
	return s + " (" + a.Unit + ")"
}

// labelY labels the y axis with y's unit.
func (a Axes) labelY(s string) string {
	if a.YUnit == "" {
		return a.label(s)
	}
	return s + " (" + a.YUnit + ")"
}

// SameScale says whether x and y are in one unit, so that y = x means
// agreement.
func (a Axes) SameScale() bool { return a.YUnit == "" || a.YUnit == a.Unit }

// Line is a fitted straight line, with its pointwise confidence band when
// BandX is set.
type Line struct {
	Name                  string
	Intercept, Slope      float64
	BandX, BandLo, BandHi []float64
}

// ErrNoData is returned for a plot with nothing to draw.
var ErrNoData = errors.New("report: nothing to plot")

// ticks places ticks as gonum's defaults do, but labels them with the
// decimals that the tick spacing needs, so that neighbours never print alike.
type ticks struct{}

func (ticks) Ticks(lo, hi float64) []plot.Tick {
	ts := plot.DefaultTicks{}.Ticks(lo, hi)
	var major []float64
	for _, t := range ts {
		if t.Label != "" {
			major = append(major, t.Value)
		}
	}
	dec := 0
	if len(major) > 1 {
		step := math.Abs(major[1] - major[0])
		if step > 0 && step < 1 {
			dec = int(math.Ceil(-math.Log10(step) - 1e-9))
		}
	}
	big := len(major) > 0 && (math.Abs(major[len(major)-1]) >= 1e6 || math.Abs(major[0]) >= 1e6)
	for i, t := range ts {
		if t.Label == "" {
			continue
		}
		switch {
		case big:
			ts[i].Label = strconv.FormatFloat(t.Value, 'g', 4, 64)
		default:
			v := t.Value
			if math.Abs(v) < 1e-12*math.Max(1, math.Abs(hi-lo)) {
				v = 0
			}
			ts[i].Label = strconv.FormatFloat(v, 'f', dec, 64)
		}
	}
	return ts
}

func newPlot(title, xl, yl string) *plot.Plot {
	p := plot.New()
	p.X.Tick.Marker = ticks{}
	p.Y.Tick.Marker = ticks{}
	p.Title.Text = title
	p.Title.TextStyle.Font.Size = vg.Points(13)
	p.X.Label.Text = xl
	p.Y.Label.Text = yl
	p.X.Label.TextStyle.Font.Size = vg.Points(11)
	p.Y.Label.TextStyle.Font.Size = vg.Points(11)
	p.Add(plotter.NewGrid())
	p.Legend.Top = true
	p.Legend.Left = true
	p.Legend.TextStyle.Font.Size = vg.Points(9)
	return p
}

func xys(x, y []float64) plotter.XYs {
	out := make(plotter.XYs, len(x))
	for i := range x {
		out[i].X, out[i].Y = x[i], y[i]
	}
	return out
}

func points(x, y []float64) (*plotter.Scatter, error) {
	s, err := plotter.NewScatter(xys(x, y))
	if err != nil {
		return nil, err
	}
	s.GlyphStyle = draw.GlyphStyle{Color: inkPoint, Radius: vg.Points(2.6), Shape: draw.CircleGlyph{}}
	return s, nil
}

func straight(l Line, x0, x1 float64, c color.Color, dash []vg.Length) *plotter.Line {
	ln, _ := plotter.NewLine(plotter.XYs{{X: x0, Y: l.Intercept + l.Slope*x0}, {X: x1, Y: l.Intercept + l.Slope*x1}})
	ln.LineStyle = draw.LineStyle{Color: c, Width: vg.Points(1.6), Dashes: dash}
	return ln
}

func hline(y, x0, x1 float64, c color.Color, dash []vg.Length) *plotter.Line {
	return straight(Line{Intercept: y}, x0, x1, c, dash)
}

func span(v []float64) (lo, hi float64) {
	lo, hi = slices.Min(v), slices.Max(v)
	if lo == hi {
		lo, hi = lo-1, hi+1
	}
	pad := 0.03 * (hi - lo)
	return lo - pad, hi + pad
}

var xmlHeader = regexp.MustCompile(`(?s)^<\?xml[^>]*\?>\s*(<!--.*?-->\s*)?`)

// render draws p as SVG for inline use: the XML declaration is dropped and
// the size given in CSS pixels' proportions so the page can scale it.
func render(p *plot.Plot) ([]byte, error) {
	c := vgsvg.New(plotW, plotH)
	p.Draw(draw.New(c))
	var b bytes.Buffer
	if _, err := c.WriteTo(&b); err != nil {
		return nil, err
	}
	return xmlHeader.ReplaceAll(b.Bytes(), nil), nil
}

func finite(v ...[]float64) error {
	for _, s := range v {
		for _, f := range s {
			if math.IsNaN(f) || math.IsInf(f, 0) {
				return fmt.Errorf("report: a value to plot is not finite")
			}
		}
	}
	return nil
}

// DataPlot draws the points with their σx and σy error bars (when given),
// the errors-in-variables line with its confidence band, the OLS line and
// the identity line y = x.
func DataPlot(x, y, sx, sy []float64, fit Line, ols *Line, ax Axes) ([]byte, error) {
	if len(x) == 0 {
		return nil, ErrNoData
	}
	if err := finite(x, y, sx, sy, fit.BandLo, fit.BandHi); err != nil {
		return nil, err
	}
	p := newPlot("Data and fitted lines", ax.label(ax.X), ax.labelY(ax.Y))
	x0, x1 := span(x)
	addBand(p, fit)
	if ax.SameScale() {
		id := straight(Line{Slope: 1}, x0, x1, inkIdentity, []vg.Length{vg.Points(2), vg.Points(3)})
		p.Add(id)
		p.Legend.Add("identity y = x", id)
	}
	if ols != nil {
		l := straight(*ols, x0, x1, inkOLS, []vg.Length{vg.Points(6), vg.Points(3)})
		p.Add(l)
		p.Legend.Add(fmt.Sprintf("OLS: y = %.4g + %.4g x", ols.Intercept, ols.Slope), l)
	}
	fl := straight(fit, x0, x1, inkFit, nil)
	p.Add(fl)
	p.Legend.Add(fmt.Sprintf("%s: y = %.4g + %.4g x", fit.Name, fit.Intercept, fit.Slope), fl)
	addErrorBars(p, x, y, sx, sy)
	s, err := points(x, y)
	if err != nil {
		return nil, err
	}
	p.Add(s)
	p.Legend.Add("samples", s)
	return render(p)
}

// ResidualPlot draws residuals against level with the zero line.
func ResidualPlot(level, resid []float64, ax Axes, scale string) ([]byte, error) {
	if len(level) == 0 {
		return nil, ErrNoData
	}
	if err := finite(level, resid); err != nil {
		return nil, err
	}
	yl := residualLabel(ax, scale)
	p := newPlot("Residuals against level", ax.label("level, mean of x and y"), yl)
	x0, x1 := span(level)
	p.Add(hline(0, x0, x1, inkIdentity, []vg.Length{vg.Points(2), vg.Points(3)}))
	s, err := points(level, resid)
	if err != nil {
		return nil, err
	}
	p.Add(s)
	return render(p)
}

func residualLabel(ax Axes, scale string) string {
	switch scale {
	case "relative":
		return "relative residual"
	case "normalized":
		return "residual / stated SD"
	}
	return ax.label("residual")
}

// RunOrderPlot draws residuals in run order, joined, with the zero line.
func RunOrderPlot(order, resid []float64, ax Axes, scale string) ([]byte, error) {
	if len(order) == 0 {
		return nil, ErrNoData
	}
	if err := finite(order, resid); err != nil {
		return nil, err
	}
	idx := make([]int, len(order))
	for i := range idx {
		idx[i] = i
	}
	slices.SortStableFunc(idx, func(a, b int) int {
		switch {
		case order[a] < order[b]:
			return -1
		case order[a] > order[b]:
			return 1
		}
		return 0
	})
	o, r := make([]float64, len(idx)), make([]float64, len(idx))
	for k, i := range idx {
		o[k], r[k] = order[i], resid[i]
	}
	yl := residualLabel(ax, scale)
	p := newPlot("Residuals in run order", "run order", yl)
	x0, x1 := span(o)
	p.Add(hline(0, x0, x1, inkIdentity, []vg.Length{vg.Points(2), vg.Points(3)}))
	if ln, err := plotter.NewLine(xys(o, r)); err == nil {
		ln.LineStyle = draw.LineStyle{Color: inkError, Width: vg.Points(0.7)}
		p.Add(ln)
	}
	s, err := points(o, r)
	if err != nil {
		return nil, err
	}
	p.Add(s)
	return render(p)
}

// QQPlot draws ordered standardized residuals against normal quantiles
// with the reference line of slope 1 through the origin.
func QQPlot(theoretical, sample []float64) ([]byte, error) {
	if len(theoretical) == 0 {
		return nil, ErrNoData
	}
	if err := finite(theoretical, sample); err != nil {
		return nil, err
	}
	p := newPlot("Normal Q-Q plot of standardized residuals", "standard normal quantile", "standardized residual")
	lo, hi := span(append(slices.Clone(theoretical), sample...))
	ref := straight(Line{Slope: 1}, lo, hi, inkIdentity, []vg.Length{vg.Points(2), vg.Points(3)})
	p.Add(ref)
	p.Legend.Add("normal reference", ref)
	s, err := points(theoretical, sample)
	if err != nil {
		return nil, err
	}
	p.Add(s)
	return render(p)
}

// DifferencePlot is the Bland–Altman plot: y − x against the mean of the
// two, with the mean difference and the limits of agreement.
func DifferencePlot(mean, diff []float64, meanDiff, lower, upper float64, ax Axes) ([]byte, error) {
	if len(mean) == 0 {
		return nil, ErrNoData
	}
	if err := finite(mean, diff, []float64{meanDiff, lower, upper}); err != nil {
		return nil, err
	}
	p := newPlot("Difference plot (Bland–Altman)", ax.label("mean of x and y"), ax.label("difference y − x"))
	x0, x1 := span(mean)
	p.Add(hline(0, x0, x1, inkIdentity, []vg.Length{vg.Points(2), vg.Points(3)}))
	md := hline(meanDiff, x0, x1, inkFit, nil)
	p.Add(md)
	p.Legend.Add(fmt.Sprintf("mean difference %.4g", meanDiff), md)
	lo := hline(lower, x0, x1, inkLimit, []vg.Length{vg.Points(6), vg.Points(3)})
	hi := hline(upper, x0, x1, inkLimit, []vg.Length{vg.Points(6), vg.Points(3)})
	p.Add(lo, hi)
	p.Legend.Add(fmt.Sprintf("limits of agreement %.4g, %.4g", lower, upper), lo)
	s, err := points(mean, diff)
	if err != nil {
		return nil, err
	}
	p.Add(s)
	return render(p)
}

// BootstrapPlot is the histogram of the bootstrap slopes with the
// estimate and the interval marked.
func BootstrapPlot(slopes []float64, estimate, lower, upper float64, method string) ([]byte, error) {
	if len(slopes) < 2 {
		return nil, ErrNoData
	}
	if err := finite(slopes, []float64{estimate, lower, upper}); err != nil {
		return nil, err
	}
	p := newPlot("Bootstrap distribution of the slope", "slope", "resamples")
	bins := max(10, min(60, int(math.Sqrt(float64(len(slopes))))))
	h, err := plotter.NewHist(plotter.Values(slopes), bins)
	if err != nil {
		return nil, err
	}
	h.FillColor = inkBar
	h.LineStyle = draw.LineStyle{Color: color.White, Width: vg.Points(0.5)}
	p.Add(h)
	top := 0.0
	for _, b := range h.Bins {
		top = math.Max(top, b.Weight)
	}
	vline := func(x float64, c color.Color, dash []vg.Length) *plotter.Line {
		ln, _ := plotter.NewLine(plotter.XYs{{X: x, Y: 0}, {X: x, Y: top * 1.05}})
		ln.LineStyle = draw.LineStyle{Color: c, Width: vg.Points(1.6), Dashes: dash}
		return ln
	}
	e := vline(estimate, inkFit, nil)
	l, u := vline(lower, inkLimit, []vg.Length{vg.Points(6), vg.Points(3)}), vline(upper, inkLimit, []vg.Length{vg.Points(6), vg.Points(3)})
	p.Add(e, l, u)
	p.Legend.Add(fmt.Sprintf("estimate %.4g", estimate), e)
	p.Legend.Add(fmt.Sprintf("%s interval %.4g to %.4g", method, lower, upper), l)
	return render(p)
}

// addBand draws the line's pointwise band, when it has one.
func addBand(p *plot.Plot, fit Line) {
	if len(fit.BandX) < 2 {
		return
	}
	poly := make(plotter.XYs, 0, 2*len(fit.BandX))
	for i := range fit.BandX {
		poly = append(poly, plotter.XY{X: fit.BandX[i], Y: fit.BandHi[i]})
	}
	for i := len(fit.BandX) - 1; i >= 0; i-- {
		poly = append(poly, plotter.XY{X: fit.BandX[i], Y: fit.BandLo[i]})
	}
	if band, err := plotter.NewPolygon(poly); err == nil {
		band.Color = inkBand
		band.LineStyle.Width = 0
		p.Add(band)
	}
}

// addErrorBars draws ±sy and ±sx bars at the points (either may be nil).
func addErrorBars(p *plot.Plot, x, y, sx, sy []float64) {
	if sy != nil {
		yb := make(plotter.YErrors, len(x))
		for i := range yb {
			yb[i].Low, yb[i].High = -sy[i], sy[i]
		}
		if eb, err := plotter.NewYErrorBars(struct {
			plotter.XYs
			plotter.YErrors
		}{xys(x, y), yb}); err == nil {
			eb.LineStyle = draw.LineStyle{Color: inkError, Width: vg.Points(0.8)}
			eb.CapWidth = vg.Points(3)
			p.Add(eb)
		}
	}
	if sx != nil {
		xb := make(plotter.XErrors, len(x))
		for i := range xb {
			xb[i].Low, xb[i].High = -sx[i], sx[i]
		}
		if eb, err := plotter.NewXErrorBars(struct {
			plotter.XYs
			plotter.XErrors
		}{xys(x, y), xb}); err == nil {
			eb.LineStyle = draw.LineStyle{Color: inkError, Width: vg.Points(0.8)}
			eb.CapWidth = vg.Points(3)
			p.Add(eb)
		}
	}
}
