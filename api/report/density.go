package report

import (
	"context"
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// MaxMarkers is the most points a plot draws one by one. Above it a scatter
// becomes a binned density: the view is cut into DensityCols × DensityRows
// rectangles and each rectangle that holds points is filled with a shade of
// blue for its count, so an SVG stays a few hundred kilobytes whatever the
// number of points; error bars are left out and a run-order plot joins the
// column means instead of every point. The legend and the report's caption
// say so.
const MaxMarkers = 2000

// The density grid: about 0.1 inch per cell on the 5.6 × 4 inch plot.
const (
	DensityCols = 56
	DensityRows = 40
)

// densityShades is a sequential single-hue ramp, pale to dark blue: it
// reads in grey and to every kind of colour vision because only lightness
// changes. Counts map to shades on a log scale.
var densityShades = func() []color.Color {
	lo := [3]float64{0xB4, 0xD7, 0xF0}
	hi := [3]float64{0x00, 0x2D, 0x5A}
	const k = 8
	out := make([]color.Color, k)
	for i := range out {
		t := float64(i) / (k - 1)
		var c [3]uint8
		for j := range c {
			c[j] = uint8(math.Round(lo[j] + t*(hi[j]-lo[j])))
		}
		out[i] = color.RGBA{c[0], c[1], c[2], 0xff}
	}
	return out
}()

// checkEvery is how many points a loop handles between looks at the
// context.
const checkEvery = 1 << 16

// density is a binned scatter in unit coordinates; it draws filled cells.
type density struct {
	counts []int32 // DensityCols × DensityRows, row-major from the bottom
	max    int32
	n      int
}

// binned counts n points per cell; at(i) gives point i in unit
// coordinates, so the points are binned without a copy of them.
func binned(ctx context.Context, n int, at func(i int) (u, v float64)) (*density, error) {
	d := &density{counts: make([]int32, DensityCols*DensityRows), n: n}
	for i := range n {
		if i%checkEvery == 0 {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
		}
		u, v := at(i)
		c, r := cell(u, DensityCols), cell(v, DensityRows)
		k := r*DensityCols + c
		d.counts[k]++
		d.max = max(d.max, d.counts[k])
	}
	return d, nil
}

// cell is the index of coordinate x in [0, 1] among n equal cells; values
// outside (and NaN) go to the nearest end.
func cell(x float64, n int) int {
	i := int(math.Floor(x * float64(n)))
	if !(x*float64(n) >= 0) {
		return 0
	}
	return min(max(i, 0), n-1)
}

func (d *density) shade(count int32) color.Color {
	k := len(densityShades)
	i := 0
	if d.max > 1 {
		i = int(float64(k-1) * math.Log(float64(count)) / math.Log(float64(d.max)))
	}
	return densityShades[min(max(i, 0), k-1)]
}

// Plot implements plot.Plotter.
func (d *density) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	for r := range DensityRows {
		for col := range DensityCols {
			n := d.counts[r*DensityCols+col]
			if n == 0 {
				continue
			}
			x0, x1 := trX(float64(col)/DensityCols), trX(float64(col+1)/DensityCols)
			y0, y1 := trY(float64(r)/DensityRows), trY(float64(r+1)/DensityRows)
			c.FillPolygon(d.shade(n), []vg.Point{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}})
		}
	}
}

// Thumbnail implements plot.Thumbnailer: the ramp from pale to dark.
func (d *density) Thumbnail(c *draw.Canvas) {
	k := len(densityShades)
	w := (c.Max.X - c.Min.X) / vg.Length(k)
	for i, col := range densityShades {
		x0 := c.Min.X + vg.Length(i)*w
		c.FillPolygon(col, []vg.Point{{X: x0, Y: c.Min.Y}, {X: x0 + w, Y: c.Min.Y}, {X: x0 + w, Y: c.Max.Y}, {X: x0, Y: c.Max.Y}})
	}
}

// legend is the density's legend text.
func (d *density) legend() string {
	return fmt.Sprintf("%d points binned %d × %d, 1 to %d per bin (log shade)", d.n, DensityCols, DensityRows, d.max)
}

// columnMeans returns, for each of DensityCols columns of u that holds
// points, the column's centre and the mean v of its points; at(i) gives
// point i in unit coordinates, read without a copy.
func columnMeans(ctx context.Context, n int, at func(i int) (u, v float64)) (cu, cv []float64, err error) {
	sum := make([]float64, DensityCols)
	cnt := make([]int, DensityCols)
	for i := range n {
		if i%checkEvery == 0 {
			if err := ctx.Err(); err != nil {
				return nil, nil, err
			}
		}
		u, v := at(i)
		c := cell(u, DensityCols)
		sum[c] += v
		cnt[c]++
	}
	for c := range sum {
		if cnt[c] > 0 {
			cu = append(cu, (float64(c)+0.5)/DensityCols)
			cv = append(cv, sum[c]/float64(cnt[c]))
		}
	}
	return cu, cv, nil
}

// rects draws filled rectangles given in unit coordinates (the bootstrap
// histogram's bars), clipped to the view.
type rects struct {
	x0, x1, y0, y1 []float64
	fill           color.Color
	edge           draw.LineStyle
}

// Plot implements plot.Plotter.
func (r *rects) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	cl := func(x float64) float64 { return math.Min(1, math.Max(0, x)) }
	for i := range r.x0 {
		x0, x1, y0, y1 := trX(cl(r.x0[i])), trX(cl(r.x1[i])), trY(cl(r.y0[i])), trY(cl(r.y1[i]))
		pts := []vg.Point{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}}
		c.FillPolygon(r.fill, pts)
		c.StrokeLines(r.edge, append(pts, pts[0]))
	}
}

// Thumbnail implements plot.Thumbnailer.
func (r *rects) Thumbnail(c *draw.Canvas) {
	c.FillPolygon(r.fill, []vg.Point{c.Min, {X: c.Max.X, Y: c.Min.Y}, c.Max, {X: c.Min.X, Y: c.Max.Y}})
}
