package report

import (
	"fmt"
	"image/color"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// The layout of a plot on paper:
//
//   - the data area has a frame, and every axis view is padded (see axis),
//     so no marker and no line drawn over the data's range touches it;
//   - the legend sits below the plot, outside the data area, in rows that
//     wrap at the plot's width: it can never cover a point or a line;
//   - every tick drawn is labelled: where neighbouring labels would touch,
//     every other tick is dropped (the labels stay multiples of the step);
//   - flagged outliers carry a black diamond and are named in the legend.

// Legend geometry.
var (
	legendFont   = vg.Points(9)
	legendThumb  = vg.Points(24) // width of a line or marker sample
	legendGap    = vg.Points(4)  // between a sample and its text
	legendSep    = vg.Points(14) // between entries on one row
	legendRow    = vg.Points(13) // height of a row
	legendInset  = vg.Points(6)  // left and right margins of the strip
	legendTop    = vg.Points(6)  // space between the x axis label and the strip
	rightMargin  = vg.Points(12) // keeps the last tick label and the frame off the edge
	minLabelGap  = vg.Points(6)  // least space between neighbouring tick labels
	maxLegendRow = 8             // rows shown; the rest are joined on the last
)

// frame strokes the border of the data area.
type frame struct{}

// Plot implements plot.Plotter.
func (frame) Plot(c draw.Canvas, _ *plot.Plot) {
	r := c.Rectangle
	c.StrokeLines(draw.LineStyle{Color: inkFrame, Width: vg.Points(0.8)}, []vg.Point{
		r.Min, {X: r.Max.X, Y: r.Min.Y}, r.Max, {X: r.Min.X, Y: r.Max.Y}, r.Min,
	})
}

func legendStyle() text.Style {
	fnt := plot.DefaultFont
	fnt.Size = legendFont
	return text.Style{Color: color.Black, Font: fnt, Handler: plot.DefaultTextHandler, XAlign: draw.XLeft, YAlign: draw.YCenter}
}

// legendRows lays the entries out in rows no wider than width.
func (f *figure) legendRows(sty text.Style, width vg.Length) [][]legendEntry {
	var rows [][]legendEntry
	var x vg.Length
	for _, e := range f.legend {
		w := legendThumb + legendGap + sty.Width(e.text)
		if len(rows) == 0 || (x > 0 && x+legendSep+w > width && len(rows) < maxLegendRow) {
			rows = append(rows, nil)
			x = 0
		} else if x > 0 {
			x += legendSep
		}
		rows[len(rows)-1] = append(rows[len(rows)-1], e)
		x += w
	}
	return rows
}

// legendHeight is the height of the strip the rows take.
func legendHeight(rows [][]legendEntry) vg.Length {
	if len(rows) == 0 {
		return 0
	}
	return legendTop + vg.Length(len(rows))*legendRow
}

// drawLegend draws the rows in the strip at the bottom of c.
func drawLegend(c draw.Canvas, sty text.Style, rows [][]legendEntry) {
	y := c.Min.Y + vg.Length(len(rows))*legendRow - legendRow/2
	for _, row := range rows {
		x := c.Min.X + legendInset
		for _, e := range row {
			icon := draw.Canvas{Canvas: c.Canvas, Rectangle: vg.Rectangle{
				Min: vg.Point{X: x, Y: y - legendRow/2 + vg.Points(2)},
				Max: vg.Point{X: x + legendThumb, Y: y + legendRow/2 - vg.Points(2)},
			}}
			e.thumb.Thumbnail(&icon)
			x += legendThumb + legendGap
			c.FillText(sty, vg.Point{X: x, Y: y}, e.text)
			x += sty.Width(e.text) + legendSep
		}
		y -= legendRow
	}
}

// thinTicks drops every other tick of an axis while neighbouring labels
// would come closer than minLabelGap, measured on the data canvas dc.
func thinTicks(a *axis, sty text.Style, length vg.Length, horizontal bool) {
	crowded := func() bool {
		for i := 1; i < len(a.ticks); i++ {
			d := vg.Length(a.ticks[i].Value-a.ticks[i-1].Value) * length
			var need vg.Length
			if horizontal {
				need = (sty.Width(a.ticks[i].Label)+sty.Width(a.ticks[i-1].Label))/2 + minLabelGap
			} else {
				need = (sty.Height(a.ticks[i].Label)+sty.Height(a.ticks[i-1].Label))/2 + minLabelGap/2
			}
			if d < need {
				return true
			}
		}
		return false
	}
	for len(a.ticks) > 2 && crowded() {
		// Keep the phase that holds zero, if a tick is at zero.
		phase := 0
		for i, t := range a.ticks {
			if t.Label == "0" {
				phase = i % 2
			}
		}
		kept := a.ticks[:0:0]
		for i, t := range a.ticks {
			if i%2 == phase {
				kept = append(kept, t)
			}
		}
		a.ticks = kept
	}
}

// Flagged names the points an outlier test flagged: each is drawn with a
// black diamond round its marker and named in the legend.
type Flagged struct {
	Index []int    // indices into the plot's points
	IDs   []string // their sample ids, in the same order ("" when none)
}

// maxFlaggedNames is how many flagged ids a legend names before "and k
// more".
const maxFlaggedNames = 6

// names lists the flagged points by id (or by row number when they have
// none).
func (fl Flagged) names() string {
	var ns []string
	for k, i := range fl.Index {
		id := ""
		if k < len(fl.IDs) {
			id = fl.IDs[k]
		}
		if id == "" {
			id = fmt.Sprintf("point %d", i+1)
		}
		ns = append(ns, id)
	}
	if len(ns) > maxFlaggedNames {
		ns = append(ns[:maxFlaggedNames], fmt.Sprintf("and %d more", len(fl.Index)-maxFlaggedNames))
	}
	return strings.Join(ns, ", ")
}

// diamond is a glyph: a diamond outline with a line heavier than the
// library's own outlines, so that it reads at print size.
type diamond struct{}

// DrawGlyph implements draw.GlyphDrawer.
func (diamond) DrawGlyph(c *draw.Canvas, sty draw.GlyphStyle, pt vg.Point) {
	c.SetLineStyle(draw.LineStyle{Color: sty.Color, Width: vg.Points(1.3)})
	r := sty.Radius
	var p vg.Path
	p.Move(vg.Point{X: pt.X, Y: pt.Y - r})
	p.Line(vg.Point{X: pt.X + r, Y: pt.Y})
	p.Line(vg.Point{X: pt.X, Y: pt.Y + r})
	p.Line(vg.Point{X: pt.X - r, Y: pt.Y})
	p.Close()
	c.Stroke(p)
}

// flag draws the diamonds round the flagged points of xs, ys (in data
// units) and names them in the legend.
func (f *figure) flag(xs, ys []float64, fls []Flagged) error {
	return f.flagOf(xys(xs, ys), fls)
}

// flagOf is flag for points read in place.
func (f *figure) flagOf(p pts, fls []Flagged) error {
	if len(fls) == 0 {
		return nil
	}
	fl := fls[0]
	var marks plotter.XYs
	var kept Flagged
	for k, i := range fl.Index {
		if i < 0 || i >= p.n || len(marks) >= MaxMarkers {
			continue
		}
		u, v := f.unit(p, i)
		marks = append(marks, plotter.XY{X: u, Y: v})
		kept.Index = append(kept.Index, i)
		if k < len(fl.IDs) {
			kept.IDs = append(kept.IDs, fl.IDs[k])
		}
	}
	if len(marks) == 0 {
		return nil
	}
	s, err := plotter.NewScatter(marks)
	if err != nil {
		return err
	}
	s.GlyphStyle = draw.GlyphStyle{Color: inkFlagged, Radius: vg.Points(5.5), Shape: diamond{}}
	f.add(markers, s)
	f.legendAdd("flagged outlier: "+kept.names(), s)
	return nil
}
