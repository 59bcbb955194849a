// Package report renders eivfit's plots (SVG, with gonum.org/v1/plot) and
// its self-contained HTML report. It knows nothing of HTTP or of the API's
// types: callers pass plain series and a Page.
//
// The plot library only draws: every plot maps its data onto the unit
// square itself (see axis), places its own ticks, clips its own lines, and
// bins its points above MaxMarkers, so that no input can make the library
// loop, panic or write an SVG that grows with the number of points. A
// panic that escapes all the same is returned as ErrDraw.
package report

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"image/color"
	"iter"
	"math"
	"regexp"
	"slices"

	"eivfit/eiv/study"

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
	inkFlagged  = color.RGBA{0x00, 0x00, 0x00, 0xff}  // black: the diamond round a flagged outlier
	inkFrame    = color.RGBA{0x4D, 0x4D, 0x4D, 0xff}  // dark grey: the frame of the data area
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

var (
	dashRef   = []vg.Length{vg.Points(2), vg.Points(3)}
	dashLimit = []vg.Length{vg.Points(6), vg.Points(3)}
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

func (l Line) at(x float64) float64 { return l.Intercept + l.Slope*x }

// ErrNoData is returned for a plot with nothing to draw.
var ErrNoData = errors.New("report: nothing to plot")

// ErrDraw is returned when the plot library panicked on the input.
var ErrDraw = errors.New("report: the plot could not be drawn for these values")

// Binned reports whether a plot of n points draws a binned density
// instead of one marker per point.
func Binned(n int) bool { return n > MaxMarkers }

// figure is a plot whose data live in the unit square of two axes.
type figure struct {
	p    *plot.Plot
	x, y axis
	// Layers, drawn in order: areas (bands, densities, bars), lines,
	// markers.
	layers [3][]plot.Plotter
	// legend is drawn below the plot, outside the data area (see render).
	legend []legendEntry
}

// legendEntry is one line of a legend: its sample and its text.
type legendEntry struct {
	text  string
	thumb plot.Thumbnailer
}

// legendAdd names a drawn layer in the legend.
func (f *figure) legendAdd(text string, th plot.Thumbnailer) {
	f.legend = append(f.legend, legendEntry{text: text, thumb: th})
}

const (
	areas = iota
	lines
	markers
)

func (f *figure) add(layer int, ps ...plot.Plotter) { f.layers[layer] = append(f.layers[layer], ps...) }

func newFigure(title, xl, yl string, x, y axis) *figure {
	p := plot.New()
	f := &figure{p: p, x: x, y: y}
	p.X.Tick.Marker = &f.x
	p.Y.Tick.Marker = &f.y
	p.Title.Text = title
	p.Title.TextStyle.Font.Size = vg.Points(13)
	p.X.Label.Text = f.x.label(xl)
	p.Y.Label.Text = f.y.label(yl)
	p.X.Label.TextStyle.Font.Size = vg.Points(11)
	p.Y.Label.TextStyle.Font.Size = vg.Points(11)
	p.Title.Padding = vg.Points(8)
	p.Add(plotter.NewGrid(), frame{})
	// The frame is the data area's border: the axes draw no line of their
	// own, and their ticks start at the frame.
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.LineStyle.Width = 0
		a.Padding = 0
	}
	return f
}

// segment returns the line from (x0, y0) to (x1, y1), in data units,
// clipped to the view; nil when nothing of it is in view.
func (f *figure) segment(x0, y0, x1, y1 float64, c color.Color, width vg.Length, dash []vg.Length) *plotter.Line {
	a, b, ok := clip([2]float64{f.x.u(x0), f.y.u(y0)}, [2]float64{f.x.u(x1), f.y.u(y1)})
	if !ok {
		return nil
	}
	ln, err := plotter.NewLine(plotter.XYs{{X: a[0], Y: a[1]}, {X: b[0], Y: b[1]}})
	if err != nil {
		return nil
	}
	ln.LineStyle = draw.LineStyle{Color: c, Width: width, Dashes: dash}
	return ln
}

// line draws a fitted line across the data's x range and names it in the
// legend.
func (f *figure) line(l Line, xlo, xhi float64, c color.Color, dash []vg.Length, legend string) {
	if ln := f.segment(xlo, l.at(xlo), xhi, l.at(xhi), c, vg.Points(1.6), dash); ln != nil {
		f.add(lines, ln)
		if legend != "" {
			f.legendAdd(legend, ln)
		}
	}
}

// hline draws y = v across the view; x values are only needed for their
// range.
func (f *figure) hline(v float64, xlo, xhi float64, c color.Color, dash []vg.Length, legend string) {
	f.line(Line{Intercept: v}, xlo, xhi, c, dash, legend)
}

// pts are a plot's n points read in place: at(i) is point i in data
// units, so the points a plot derives from the data (means and
// differences, Q-Q pairs) are drawn without a copy of them.
type pts struct {
	n  int
	at func(i int) (x, y float64)
}

// xys are the points (x[i], y[i]).
func xys(x, y []float64) pts {
	return pts{n: len(x), at: func(i int) (float64, float64) { return x[i], y[i] }}
}

// xs and ys are the points' coordinates, for an axis.
func (p pts) xs() iter.Seq[float64] { return p.coord(0) }
func (p pts) ys() iter.Seq[float64] { return p.coord(1) }

func (p pts) coord(k int) iter.Seq[float64] {
	return func(yield func(float64) bool) {
		for i := range p.n {
			xy := [2]float64{}
			xy[0], xy[1] = p.at(i)
			if !yield(xy[k]) {
				return
			}
		}
	}
}

// finite is finite for the points' coordinates.
func (p pts) finite() error {
	for i := range p.n {
		if x, y := p.at(i); !isFinite(x) || !isFinite(y) {
			return errNotFinite
		}
	}
	return nil
}

// xRange is the smallest and the largest x of at least one point.
func (p pts) xRange() (lo, hi float64) {
	lo, _ = p.at(0)
	hi = lo
	for i := 1; i < p.n; i++ {
		x, _ := p.at(i)
		lo, hi = min(lo, x), max(hi, x)
	}
	return lo, hi
}

// points draws the points one by one up to MaxMarkers, else as a binned
// density; the legend entry names which.
func (f *figure) points(ctx context.Context, xs, ys []float64, legend string) (*density, error) {
	return f.pointsOf(ctx, xys(xs, ys), legend)
}

// unit is p's point i in unit coordinates.
func (f *figure) unit(p pts, i int) (u, v float64) {
	x, y := p.at(i)
	return f.x.u(x), f.y.u(y)
}

// pointsOf is points for points read in place.
func (f *figure) pointsOf(ctx context.Context, p pts, legend string) (*density, error) {
	if Binned(p.n) {
		d, err := binned(ctx, p.n, func(i int) (float64, float64) { return f.unit(p, i) })
		if err != nil {
			return nil, err
		}
		f.add(areas, d)
		f.legendAdd(d.legend(), d)
		return d, nil
	}
	u, v := make([]float64, p.n), make([]float64, p.n)
	for i := range p.n {
		u[i], v[i] = f.unit(p, i)
	}
	s, err := plotter.NewScatter(unitXYs(u, v))
	if err != nil {
		return nil, err
	}
	s.GlyphStyle = draw.GlyphStyle{Color: inkPoint, Radius: vg.Points(2.6), Shape: draw.CircleGlyph{}}
	f.add(markers, s)
	if legend != "" {
		f.legendAdd(legend, s)
	}
	return nil, nil
}

func unitXYs(u, v []float64) plotter.XYs {
	out := make(plotter.XYs, len(u))
	for i := range u {
		out[i].X, out[i].Y = u[i], v[i]
	}
	return out
}

var xmlHeader = regexp.MustCompile(`(?s)^<\?xml[^>]*\?>\s*(<!--.*?-->\s*)?`)

// render draws the figure as SVG for inline use: the XML declaration is
// dropped and the size given in CSS pixels' proportions so the page can
// scale it. The legend takes a strip below the plot, so the SVG is taller
// by the strip.
func (f *figure) render() ([]byte, error) {
	p := f.p
	for _, l := range f.layers {
		p.Add(l...)
	}
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, 1
	sty := legendStyle()
	rows := f.legendRows(sty, plotW-2*legendInset)
	lh := legendHeight(rows)
	c := vgsvg.New(plotW, plotH+lh)
	dc := draw.New(c)
	pc := draw.Crop(dc, 0, -rightMargin, lh, 0)
	for range 2 { // the y labels' width sets the x axis's length
		da := p.DataCanvas(pc)
		thinTicks(&f.x, p.X.Tick.Label, da.Max.X-da.Min.X, true)
		thinTicks(&f.y, p.Y.Tick.Label, da.Max.Y-da.Min.Y, false)
	}
	p.Draw(pc)
	drawLegend(draw.Crop(dc, 0, 0, 0, -plotH), sty, rows)
	var b bytes.Buffer
	if _, err := c.WriteTo(&b); err != nil {
		return nil, err
	}
	return xmlHeader.ReplaceAll(b.Bytes(), nil), nil
}

// drawn runs build and renders its figure, turning a panic into ErrDraw.
func drawn(build func() (*figure, error)) (b []byte, err error) {
	defer func() {
		if r := recover(); r != nil {
			b, err = nil, ErrDraw
		}
	}()
	f, err := build()
	if err != nil {
		return nil, err
	}
	return f.render()
}

var (
	errNotFinite = errors.New("report: a value to plot is not finite")
	errLengths   = errors.New("report: the coordinates to plot differ in length")
)

func finite(v ...[]float64) error {
	for _, s := range v {
		for _, f := range s {
			if !isFinite(f) {
				return errNotFinite
			}
		}
	}
	return nil
}

func isFinite(f float64) bool { return !math.IsNaN(f) && !math.IsInf(f, 0) }

// lineEnds returns l at lo and hi when both are finite.
func lineEnds(l Line, lo, hi float64) []float64 {
	a, b := l.at(lo), l.at(hi)
	if math.IsInf(a, 0) || math.IsNaN(a) || math.IsInf(b, 0) || math.IsNaN(b) {
		return nil
	}
	return []float64{a, b}
}

// DataPlot draws the points with their σx and σy error bars (when given,
// and up to MaxMarkers points), the errors-in-variables line with its
// confidence band, the OLS line and the identity line y = x.
func DataPlot(ctx context.Context, x, y, sx, sy []float64, fit Line, ols *Line, ax Axes, flagged ...Flagged) ([]byte, error) {
	if len(x) == 0 {
		return nil, ErrNoData
	}
	if err := finite(x, y, sx, sy, fit.BandLo, fit.BandHi); err != nil {
		return nil, err
	}
	return drawn(func() (*figure, error) {
		xlo, xhi := slices.Min(x), slices.Max(x)
		yv := [][]float64{y, fit.BandLo, fit.BandHi, lineEnds(fit, xlo, xhi)}
		if ols != nil {
			yv = append(yv, lineEnds(*ols, xlo, xhi))
		}
		xv := [][]float64{x}
		if !Binned(len(x)) { // the error bars are drawn whole
			xv = append(xv, spread(x, sx, -1), spread(x, sx, 1))
			yv = append(yv, spread(y, sy, -1), spread(y, sy, 1))
		}
		f := newFigure("Data and fitted lines", ax.label(ax.X), ax.labelY(ax.Y), newAxis(xv...), newAxis(yv...))
		f.band(fit)
		// The identity line across the view: its ends are found in unit
		// coordinates, so no data value is formed outside float64. Only
		// when x and y share a unit.
		if id := f.identity(); id != nil && ax.SameScale() {
			f.add(lines, id)
			f.legendAdd("identity y = x", id)
		}
		if ols != nil {
			f.line(*ols, xlo, xhi, inkOLS, dashLimit, fmt.Sprintf("OLS: y = %.4g + %.4g x", ols.Intercept, ols.Slope))
		}
		f.line(fit, xlo, xhi, inkFit, nil, fmt.Sprintf("%s: y = %.4g + %.4g x", displayName(fit.Name), fit.Intercept, fit.Slope))
		if !Binned(len(x)) {
			f.errorBars(x, y, sx, sy)
		}
		legend := "samples"
		if !Binned(len(x)) && (sx != nil || sy != nil) {
			legend = "samples, bars ±1 stated SD"
		}
		if _, err := f.points(ctx, x, y, legend); err != nil {
			return nil, err
		}
		return f, f.flag(x, y, flagged)
	})
}

// spread is v + sign·s elementwise, nil without s; an end that overflows
// is left out of the view (its bar is clipped).
func spread(v, s []float64, sign float64) []float64 {
	if s == nil {
		return nil
	}
	out := make([]float64, 0, len(v))
	for i := range v {
		if e := v[i] + sign*s[i]; !math.IsInf(e, 0) && !math.IsNaN(e) {
			out = append(out, e)
		}
	}
	return out
}

// displayName is a method's name in words ("Passing–Bablok" for
// passing_bablok); other names are kept.
func displayName(name string) string {
	if m := study.MethodNamed(name); m != nil {
		return m.Display
	}
	return name
}

// band draws the line's pointwise band, clipped to the view, when it has
// one.
func (f *figure) band(l Line) {
	if len(l.BandX) < 2 {
		return
	}
	poly := make([][2]float64, 0, 2*len(l.BandX))
	for i := range l.BandX {
		poly = append(poly, [2]float64{f.x.u(l.BandX[i]), f.y.u(l.BandHi[i])})
	}
	for i := len(l.BandX) - 1; i >= 0; i-- {
		poly = append(poly, [2]float64{f.x.u(l.BandX[i]), f.y.u(l.BandLo[i])})
	}
	if pts := clipPolygon(poly); len(pts) > 2 {
		if band, err := plotter.NewPolygon(pts); err == nil {
			band.Color = inkBand
			band.LineStyle.Width = 0
			f.add(areas, band)
		}
	}
}

// identity is y = x clipped to the view, found from the data values at
// the view's corners in each axis's scaled units.
func (f *figure) identity() *plotter.Line {
	// Points of y = x at the x view's ends, in data units, if finite.
	xa, xb := math.Ldexp(f.x.lo, f.x.e), math.Ldexp(f.x.lo+f.x.w, f.x.e)
	if math.IsInf(xa, 0) || math.IsInf(xb, 0) {
		return nil
	}
	return f.segment(xa, xa, xb, xb, inkIdentity, vg.Points(1.6), dashRef)
}

// errorBars draws ±σ bars, clipped to the view, with caps where a bar ends
// in view.
func (f *figure) errorBars(x, y, sx, sy []float64) {
	bars := &segments{style: draw.LineStyle{Color: inkError, Width: vg.Points(0.8)}, cap: vg.Points(3)}
	for i := range x {
		if sy != nil {
			bars.add(f.x.u(x[i]), f.y.u(y[i]-sy[i]), f.x.u(x[i]), f.y.u(y[i]+sy[i]), false)
		}
		if sx != nil {
			bars.add(f.x.u(x[i]-sx[i]), f.y.u(y[i]), f.x.u(x[i]+sx[i]), f.y.u(y[i]), true)
		}
	}
	if len(bars.a) > 0 {
		f.add(lines, bars)
	}
}

// segments are line pieces in unit coordinates, each with caps at the ends
// that lie in view.
type segments struct {
	a, b       [][2]float64
	capA, capB []bool
	horiz      []bool
	style      draw.LineStyle
	cap        vg.Length
}

func (s *segments) add(x0, y0, x1, y1 float64, horizontal bool) {
	p, q := [2]float64{x0, y0}, [2]float64{x1, y1}
	a, b, ok := clip(p, q)
	if !ok {
		return
	}
	s.a, s.b = append(s.a, a), append(s.b, b)
	s.capA, s.capB = append(s.capA, a == p), append(s.capB, b == q)
	s.horiz = append(s.horiz, horizontal)
}

// Plot implements plot.Plotter.
func (s *segments) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	h := s.cap / 2
	for i := range s.a {
		a := vg.Point{X: trX(s.a[i][0]), Y: trY(s.a[i][1])}
		b := vg.Point{X: trX(s.b[i][0]), Y: trY(s.b[i][1])}
		c.StrokeLine2(s.style, a.X, a.Y, b.X, b.Y)
		for _, e := range []struct {
			pt vg.Point
			on bool
		}{{a, s.capA[i]}, {b, s.capB[i]}} {
			switch {
			case !e.on:
			case s.horiz[i]:
				c.StrokeLine2(s.style, e.pt.X, e.pt.Y-h, e.pt.X, e.pt.Y+h)
			default:
				c.StrokeLine2(s.style, e.pt.X-h, e.pt.Y, e.pt.X+h, e.pt.Y)
			}
		}
	}
}

// ResidualPlot draws residuals against level with the zero line.
func ResidualPlot(ctx context.Context, level, resid []float64, ax Axes, scale string, flagged ...Flagged) ([]byte, error) {
	if len(level) == 0 {
		return nil, ErrNoData
	}
	if err := finite(level, resid); err != nil {
		return nil, err
	}
	return drawn(func() (*figure, error) {
		f := newFigure("Residuals against level", ax.label("level, mean of x and y"), residualLabel(ax, scale),
			newAxis(level), newAxis(resid, []float64{0}))
		f.hline(0, slices.Min(level), slices.Max(level), inkIdentity, dashRef, "")
		if _, err := f.points(ctx, level, resid, ""); err != nil {
			return nil, err
		}
		return f, f.flag(level, resid, flagged)
	})
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
// Above MaxMarkers points it draws their density and joins the mean
// residual of each column instead.
func RunOrderPlot(ctx context.Context, order, resid []float64, ax Axes, scale string, flagged ...Flagged) ([]byte, error) {
	if len(resid) != len(order) {
		return nil, errLengths
	}
	return runOrderPlot(ctx, xys(order, resid), ax, scale, flagged...)
}

// runOrderPlot is RunOrderPlot of the points (order, residual) read in
// place.
func runOrderPlot(ctx context.Context, p pts, ax Axes, scale string, flagged ...Flagged) ([]byte, error) {
	if p.n == 0 {
		return nil, ErrNoData
	}
	if err := p.finite(); err != nil {
		return nil, err
	}
	return drawn(func() (*figure, error) {
		f := newFigure("Residuals in run order", "run order", residualLabel(ax, scale),
			axisOf(p.xs()), axisOf(p.ys(), slices.Values([]float64{0})))
		lo, hi := p.xRange()
		f.hline(0, lo, hi, inkIdentity, dashRef, "")
		var ju, jv []float64
		legend := ""
		if Binned(p.n) {
			var err error
			if ju, jv, err = columnMeans(ctx, p.n, func(i int) (float64, float64) { return f.unit(p, i) }); err != nil {
				return nil, err
			}
			legend = fmt.Sprintf("mean residual in each of %d columns", DensityCols)
		} else {
			idx := make([]int, p.n)
			for i := range idx {
				idx[i] = i
			}
			at := func(i int) float64 { o, _ := p.at(i); return o }
			slices.SortStableFunc(idx, func(a, b int) int {
				switch oa, ob := at(a), at(b); {
				case oa < ob:
					return -1
				case oa > ob:
					return 1
				}
				return 0
			})
			ju, jv = make([]float64, len(idx)), make([]float64, len(idx))
			for k, i := range idx {
				ju[k], jv[k] = f.unit(p, i)
			}
		}
		if ln, err := plotter.NewLine(unitXYs(ju, jv)); err == nil {
			ln.LineStyle = draw.LineStyle{Color: inkError, Width: vg.Points(0.7)}
			if legend != "" {
				ln.LineStyle = draw.LineStyle{Color: inkFit, Width: vg.Points(1.2)}
				f.legendAdd(legend, ln)
			}
			f.add(lines, ln)
		}
		if _, err := f.pointsOf(ctx, p, ""); err != nil {
			return nil, err
		}
		return f, f.flagOf(p, flagged)
	})
}

// QQPlot draws ordered standardized residuals against normal quantiles
// with the reference line of slope 1 through the origin.
func QQPlot(ctx context.Context, theoretical, sample []float64) ([]byte, error) {
	if len(sample) != len(theoretical) {
		return nil, errLengths
	}
	return qqPlot(ctx, xys(theoretical, sample))
}

// qqPlot is QQPlot of the points (theoretical, sample) read in place.
func qqPlot(ctx context.Context, p pts) ([]byte, error) {
	if p.n == 0 {
		return nil, ErrNoData
	}
	if err := p.finite(); err != nil {
		return nil, err
	}
	return drawn(func() (*figure, error) {
		both := axisOf(p.xs(), p.ys())
		f := newFigure("Normal Q-Q plot of standardized residuals", "standard normal quantile", "standardized residual", both, both)
		if ref := f.identity(); ref != nil {
			f.add(lines, ref)
			f.legendAdd("normal reference", ref)
		}
		_, err := f.pointsOf(ctx, p, "")
		return f, err
	})
}

// BootstrapPlot is the histogram of the bootstrap slopes with the
// estimate and the interval marked. The bins are the histogram's own,
// equal in unit coordinates, so equal or nearly equal slopes still draw.
func BootstrapPlot(ctx context.Context, slopes []float64, estimate, lower, upper float64, method string) ([]byte, error) {
	if len(slopes) < 2 {
		return nil, ErrNoData
	}
	if err := finite(slopes, []float64{estimate, lower, upper}); err != nil {
		return nil, err
	}
	return drawn(func() (*figure, error) {
		xa := newAxis(slopes, []float64{estimate, lower, upper})
		nb := max(10, min(60, int(math.Sqrt(float64(len(slopes))))))
		smin, smax := math.Inf(1), math.Inf(-1)
		for i, s := range slopes {
			if i%checkEvery == 0 {
				if err := ctx.Err(); err != nil {
					return nil, err
				}
			}
			u := xa.u(s)
			smin, smax = math.Min(smin, u), math.Max(smax, u)
		}
		width := (smax - smin) / float64(nb)
		if !(width > 0) { // every slope the same: one bar
			nb, width = 1, 1.0/32
			smin -= width / 2
		}
		counts := make([]float64, nb)
		for _, s := range slopes {
			k := int((xa.u(s) - smin) / width)
			counts[min(max(k, 0), nb-1)]++
		}
		top := slices.Max(counts)
		f := newFigure("Bootstrap distribution of the slope", "slope", "resamples", xa, newAxis([]float64{0, top * 1.05}))
		bars := &rects{fill: inkBar, edge: draw.LineStyle{Color: color.White, Width: vg.Points(0.5)}}
		for k, c := range counts {
			if c == 0 {
				continue
			}
			bars.x0 = append(bars.x0, smin+float64(k)*width)
			bars.x1 = append(bars.x1, smin+float64(k+1)*width)
			bars.y0 = append(bars.y0, f.y.u(0))
			bars.y1 = append(bars.y1, f.y.u(c))
		}
		f.add(areas, bars)
		vline := func(x float64, c color.Color, dash []vg.Length, legend string) {
			if ln := f.segment(x, 0, x, top*1.05, c, vg.Points(1.6), dash); ln != nil {
				f.add(lines, ln)
				if legend != "" {
					f.legendAdd(legend, ln)
				}
			}
		}
		vline(estimate, inkFit, nil, fmt.Sprintf("estimate %.4g", estimate))
		vline(lower, inkLimit, dashLimit, fmt.Sprintf("%s interval %.4g to %.4g", method, lower, upper))
		vline(upper, inkLimit, dashLimit, "")
		return f, nil
	})
}

// clip cuts the segment p–q to the unit square (Liang & Barsky 1984);
// ok is false when no part of it is inside or a coordinate is NaN.
func clip(p, q [2]float64) (a, b [2]float64, ok bool) {
	t0, t1 := 0.0, 1.0
	d := [2]float64{q[0] - p[0], q[1] - p[1]}
	for k := range 2 {
		if math.IsNaN(p[k]) || math.IsNaN(q[k]) {
			return a, b, false
		}
		for _, e := range [2]struct{ pp, qq float64 }{{-d[k], p[k]}, {d[k], 1 - p[k]}} {
			if e.pp == 0 {
				if e.qq < 0 {
					return a, b, false
				}
				continue
			}
			r := e.qq / e.pp
			if e.pp < 0 {
				t0 = math.Max(t0, r)
			} else {
				t1 = math.Min(t1, r)
			}
		}
	}
	if t0 > t1 {
		return a, b, false
	}
	// A cut end lies on the square's edge up to rounding (of order 1e−7
	// for ends 1e9 away): clamp it onto the square.
	in := func(x [2]float64) [2]float64 {
		return [2]float64{math.Min(1, math.Max(0, x[0])), math.Min(1, math.Max(0, x[1]))}
	}
	a, b = p, q
	if t0 > 0 {
		a = in([2]float64{p[0] + t0*d[0], p[1] + t0*d[1]})
	}
	if t1 < 1 {
		b = in([2]float64{p[0] + t1*d[0], p[1] + t1*d[1]})
	}
	return a, b, true
}

// clipPolygon cuts a polygon to the unit square (Sutherland & Hodgman
// 1974).
func clipPolygon(in [][2]float64) plotter.XYs {
	for _, pt := range in {
		if math.IsNaN(pt[0]) || math.IsNaN(pt[1]) {
			return nil
		}
	}
	type edge struct {
		k    int
		v    float64
		keep func(float64) bool
	}
	for _, e := range []edge{
		{0, 0, func(x float64) bool { return x >= 0 }}, {0, 1, func(x float64) bool { return x <= 1 }},
		{1, 0, func(x float64) bool { return x >= 0 }}, {1, 1, func(x float64) bool { return x <= 1 }},
	} {
		var out [][2]float64
		for i := range in {
			cur, prev := in[i], in[(i+len(in)-1)%len(in)]
			cin, pin := e.keep(cur[e.k]), e.keep(prev[e.k])
			if cin != pin {
				t := (e.v - prev[e.k]) / (cur[e.k] - prev[e.k])
				x := [2]float64{prev[0] + t*(cur[0]-prev[0]), prev[1] + t*(cur[1]-prev[1])}
				x[e.k] = e.v
				out = append(out, x)
			}
			if cin {
				out = append(out, cur)
			}
		}
		in = out
		if len(in) == 0 {
			return nil
		}
	}
	xy := make(plotter.XYs, len(in))
	for i, p := range in {
		xy[i].X, xy[i].Y = p[0], p[1]
	}
	return xy
}
