package report

import (
	"bytes"
	"context"
	"encoding/xml"
	"fmt"
	"image/color"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
)

// box is a rectangle in the SVG's drawing coordinates (points, y up).
type box struct{ x0, y0, x1, y1 float64 }

func (b box) overlaps(o box, tol float64) bool {
	return b.x0+tol < o.x1 && o.x0+tol < b.x1 && b.y0+tol < o.y1 && o.y0+tol < b.y1
}

func (b box) inside(o box, clearance float64) bool {
	return b.x0 >= o.x0+clearance && b.x1 <= o.x1-clearance && b.y0 >= o.y0+clearance && b.y1 <= o.y1-clearance
}

// svgText is a text element with its estimated box.
type svgText struct {
	s   string
	box box
}

// svgPath is a path element: its style and the box of its points.
type svgPath struct {
	style string
	box   box
	arcs  bool
	n     int // points
}

// geometry reads the texts and paths of a plot drawn by vgsvg: the whole
// drawing is in one group flipped to y up; a text is flipped back by its
// own scale(1, -1) and the y axis label is in a rotate(90) group. Text
// boxes are estimated from the font size: an advance of 0.56 em a
// character (Liberation Sans's digits are 0.556 em; lower-case letters are
// narrower on average, capitals wider), 0.75 em above the baseline and 0.21
// em below.
func geometry(t *testing.T, svg []byte) (texts []svgText, paths []svgPath, height float64) {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(svg))
	num := regexp.MustCompile(`-?[0-9.]+(e-?[0-9]+)?`)
	fontSize := regexp.MustCompile(`font-size:([0-9.]+)px`)
	rotated := 0
	var stack []bool
	var cur *xml.StartElement
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("not XML: %v", err)
		}
		switch e := tok.(type) {
		case xml.StartElement:
			attr := map[string]string{}
			for _, a := range e.Attr {
				attr[a.Name.Local] = a.Value
			}
			switch e.Name.Local {
			case "svg":
				vb := strings.Fields(attr["viewBox"])
				height, _ = strconv.ParseFloat(vb[3], 64)
			case "g":
				r := strings.Contains(attr["transform"], "rotate(90)")
				stack = append(stack, r)
				if r {
					rotated++
				}
			case "path":
				var pts []float64
				for _, m := range num.FindAllString(attr["d"], -1) {
					v, _ := strconv.ParseFloat(m, 64)
					pts = append(pts, v)
				}
				p := svgPath{style: attr["style"], arcs: strings.Contains(attr["d"], "A"), box: box{math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)}}
				if p.arcs { // M x,y A r,r 0 1 1 x',y' …: the circle's box from its two ends and radius
					r := pts[2]
					x0, y0, x1 := pts[0], pts[1], pts[7]
					p.box = box{math.Min(x0, x1), y0 - r, math.Max(x0, x1), y0 + r}
				} else {
					for i := 0; i+1 < len(pts); i += 2 {
						p.box = box{math.Min(p.box.x0, pts[i]), math.Min(p.box.y0, pts[i+1]), math.Max(p.box.x1, pts[i]), math.Max(p.box.y1, pts[i+1])}
					}
				}
				p.n = len(pts) / 2
				paths = append(paths, p)
			case "text":
				ce := e.Copy()
				cur = &ce
			}
		case xml.EndElement:
			if e.Name.Local == "g" && len(stack) > 0 {
				if stack[len(stack)-1] {
					rotated--
				}
				stack = stack[:len(stack)-1]
			}
		case xml.CharData:
			if cur == nil {
				continue
			}
			s := strings.TrimSpace(string(e))
			var x, y, fs float64
			for _, a := range cur.Attr {
				switch a.Name.Local {
				case "x":
					x, _ = strconv.ParseFloat(a.Value, 64)
				case "y":
					y, _ = strconv.ParseFloat(a.Value, 64)
				case "style":
					if m := fontSize.FindStringSubmatch(a.Value); m != nil {
						fs, _ = strconv.ParseFloat(m[1], 64)
					}
				}
			}
			cur = nil
			if s == "" {
				continue
			}
			w, asc, desc := 0.56*fs*float64(utf8.RuneCountInString(s)), 0.75*fs, 0.21*fs
			b := box{x, -y - desc, x + w, -y + asc}
			if rotated > 0 {
				b = box{y - asc, x, y + desc, x + w}
			}
			texts = append(texts, svgText{s: s, box: b})
		}
	}
	return texts, paths, height
}

func hex(c color.Color) string {
	r, g, b, _ := c.RGBA()
	return fmt.Sprintf("#%02X%02X%02X", r>>8, g>>8, b>>8)
}

// TestPlotLayout draws every plot kind on seeded data (with flagged
// outliers, error bars, long and offset tick labels) and checks from the
// SVG's geometry that no text box overlaps another, that every marker
// lies inside the frame of the data area with room to spare or in the
// legend strip below the plot, that the frame holds one marker per point,
// and that every tick mark has its label.
func TestPlotLayout(t *testing.T) {
	ctx := context.Background()
	type data struct{ x, y, sx, sy []float64 }
	gen := func(seed uint64, n int, x0, scale float64) data {
		r := rand.New(rand.NewPCG(seed, 7))
		var d data
		for i := range n {
			x := x0 + scale*float64(i)/float64(n-1) + scale*0.01*r.NormFloat64()
			d.x = append(d.x, x)
			d.y = append(d.y, 0.2*scale+1.03*x+0.02*scale*r.NormFloat64())
			d.sx = append(d.sx, 0.01*scale)
			d.sy = append(d.sy, 0.015*scale)
		}
		d.y[3] += 0.3 * scale // an outlier
		return d
	}
	fl := Flagged{Index: []int{3}, IDs: []string{"S004"}}
	cases := []struct {
		name    string
		points  int // markers expected in the frame
		draw    func(d data) ([]byte, error)
		scale   float64
		x0      float64
		n       int
		legends int // legend samples drawn as markers
	}{
		{"data", 41, func(d data) ([]byte, error) {
			fit := Line{Name: "deming", Intercept: 0.2, Slope: 1.03}
			return DataPlot(ctx, d.x, d.y, d.sx, d.sy, fit, &Line{Name: "OLS", Intercept: 0.25, Slope: 1.0}, Axes{X: "x", Y: "y", Unit: "mmol/L"}, fl)
		}, 20, 2, 40, 2},
		{"data, long labels", 40, func(d data) ([]byte, error) {
			fit := Line{Name: "york", Intercept: 0.2, Slope: 1.03}
			return DataPlot(ctx, d.x, d.y, d.sx, d.sy, fit, nil, Axes{X: "x", Y: "y"})
		}, 3.3e-5, 1.234567e-4, 40, 1},
		{"data, offset labels", 40, func(d data) ([]byte, error) {
			return DataPlot(ctx, d.x, d.y, nil, nil, Line{Name: "ols", Slope: 1}, nil, Axes{X: "x", Y: "y"})
		}, 0.004, 123456.7, 40, 1},
		{"residuals", 31, func(d data) ([]byte, error) { return ResidualPlot(ctx, d.x, d.y, Axes{Unit: "mg"}, "", fl) }, 10, 0, 30, 1},
		{"run-order", 31, func(d data) ([]byte, error) { return RunOrderPlot(ctx, d.x, d.y, Axes{}, "relative", fl) }, 10, 0, 30, 1},
		{"qq", 30, func(d data) ([]byte, error) { return QQPlot(ctx, d.x, d.y) }, 3, -1.5, 30, 0},
		{"difference, constant", 51, func(d data) ([]byte, error) {
			return DifferencePlot(ctx, d.x, d.y, 0.2, -1.1, 1.5, Axes{Unit: "mmol/L"}, fl)
		}, 1, 0, 50, 1},
		{"difference, regression", 50, func(d data) ([]byte, error) {
			f := DifferenceForm{Form: "regression", B0: 0.1, B1: 0.03, Proportional: true, K: 1.96, C0: 0.1, C1: 0.02}
			return DifferencePlotForm(ctx, d.x, d.y, 0.2, -1, 1, f, Axes{})
		}, 20, 1, 50, 0},
		{"difference, ratio with proportional bias", 50, func(d data) ([]byte, error) {
			f := DifferenceForm{Form: "ratio", Ratio: 1.02, RatioLower: 0.95, RatioUpper: 1.09, B0: 0.05, B1: -0.02, Proportional: true}
			return DifferencePlotForm(ctx, d.x, d.y, 0.2, -1, 1, f, Axes{})
		}, 20, 1, 50, 0},
		{"bootstrap", 0, func(d data) ([]byte, error) { return BootstrapPlot(ctx, d.y, 1.03, 0.98, 1.08, "BCa") }, 1, 0.5, 400, 0},
		{"calibration", 12 + 2, func(d data) ([]byte, error) {
			line := Line{Name: "gdr", Intercept: 2, Slope: 1.03}
			return CalibrationPlot(ctx, d.x, d.y, d.sx, d.sy, line, []float64{d.x[2], d.x[8]}, []float64{d.y[2], d.y[8]}, []float64{0.5, 0.7}, Axes{X: "x", Y: "y", Unit: "mg", YUnit: "mV"})
		}, 100, 5, 12, 2},
		{"standardized residuals", 12, func(d data) ([]byte, error) { return StandardizedResidualPlot(ctx, d.x, d.y, Axes{}) }, 2, -1, 12, 0},
	}
	glyph := regexp.MustCompile(`(fill|stroke):(` + hex(inkPoint) + `|` + hex(inkUnknown) + `)`)
	for i, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			svg, err := c.draw(gen(uint64(i+1), c.n, c.x0, c.scale))
			if err != nil {
				t.Fatal(err)
			}
			if dir := os.Getenv("EIVFIT_PLOT_DIR"); dir != "" {
				if err := os.WriteFile(filepath.Join(dir, strings.NewReplacer(" ", "-", ",", "").Replace(c.name)+".svg"), svg, 0o644); err != nil {
					t.Fatal(err)
				}
			}
			texts, paths, height := geometry(t, svg)
			for a := range texts {
				for b := a + 1; b < len(texts); b++ {
					// 0.5 pt: the estimate's own slack at a shared edge.
					if texts[a].box.overlaps(texts[b].box, 0.5) {
						t.Errorf("text %q %v overlaps %q %v", texts[a].s, texts[a].box, texts[b].s, texts[b].box)
					}
				}
			}
			var fr *box
			for _, p := range paths {
				if strings.Contains(p.style, "stroke:"+hex(inkFrame)) && p.n == 5 {
					fr = &p.box
				}
			}
			if fr == nil {
				t.Fatal("no frame")
			}
			strip := box{0, 0, math.Inf(1), height - float64(plotH.Points())}
			inFrame, inLegend := 0, 0
			for _, p := range paths {
				isMarker := (p.arcs || p.n == 3) && glyph.MatchString(p.style) ||
					strings.Contains(p.style, "stroke:"+hex(inkFlagged)+";stroke-width:1.3") && p.n == 4
				if !isMarker {
					continue
				}
				switch {
				// 1 pt of clearance: no marker touches the frame.
				case p.box.inside(*fr, 1):
					inFrame++
				case p.box.inside(strip, 0):
					inLegend++
				default:
					t.Errorf("a marker at %v lies outside the frame %v and the legend", p.box, *fr)
				}
			}
			if inFrame != c.points || inLegend != c.legends {
				t.Errorf("%d markers in the frame and %d in the legend, want %d and %d", inFrame, inLegend, c.points, c.legends)
			}
			// Every tick mark (a black 8 pt stroke outside the frame) has a
			// label beside it: centred under an x tick, level with a y tick.
			ticks := 0
			for _, p := range paths {
				if !strings.Contains(p.style, "stroke:#000000;stroke-width:0.5") || p.n != 2 {
					continue
				}
				w, h := p.box.x1-p.box.x0, p.box.y1-p.box.y0
				vertical := w < 0.01 && math.Abs(h-8) < 0.01 && p.box.y1 <= fr.y0+0.01
				horizontal := h < 0.01 && math.Abs(w-8) < 0.01 && p.box.x1 <= fr.x0+0.01
				if !vertical && !horizontal {
					continue
				}
				ticks++
				found := false
				for _, tx := range texts {
					b := tx.box
					// the estimate's centre is off by its width error, at
					// most a fifth of the width, plus 2 pt.
					if vertical && b.y1 <= p.box.y0 && math.Abs((b.x0+b.x1)/2-p.box.x0) < 0.2*(b.x1-b.x0)+2 {
						found = true
					}
					if horizontal && b.x0 < p.box.x0 && b.x1 <= p.box.x0+0.2*(b.x1-b.x0)+2 && math.Abs((b.y0+b.y1)/2-p.box.y0) < 0.3*(b.y1-b.y0)+2 {
						found = true
					}
				}
				if !found {
					t.Errorf("tick mark at %v has no label", p.box)
				}
			}
			if ticks < 4 {
				t.Errorf("%d tick marks, want at least two an axis", ticks)
			}
		})
	}
}

// TestThinTicks: on an axis too short for its labels every other tick is
// dropped until the labels have room; zero stays, and every tick kept
// keeps its label (a multiple of the step, written as before).
func TestThinTicks(t *testing.T) {
	sty := legendStyle()
	cases := []struct {
		name       string
		vals       []float64
		length     vg.Length
		horizontal bool
		wantLE     int // at most this many ticks remain
	}{
		{"x, room for all", []float64{-10, 10}, vg.Points(400), true, 12},
		{"x, short", []float64{-10, 10}, vg.Points(60), true, 3},
		{"x, long labels", []float64{1.00001e-13, 1.00009e-13}, vg.Points(120), true, 3},
		{"y, short", []float64{0, 100}, vg.Points(30), false, 2},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			a := newAxis(c.vals)
			before := map[string]float64{}
			for _, tk := range a.ticks {
				before[tk.Label] = tk.Value
			}
			hadZero := before["0"] != 0 || slices.ContainsFunc(a.ticks, func(tk plot.Tick) bool { return tk.Label == "0" })
			thinTicks(&a, sty, c.length, c.horizontal)
			if len(a.ticks) > c.wantLE || len(a.ticks) < 2 {
				t.Errorf("%d ticks left, want 2 to %d", len(a.ticks), c.wantLE)
			}
			zero := false
			for i, tk := range a.ticks {
				if v, ok := before[tk.Label]; !ok || v != tk.Value || tk.Label == "" {
					t.Errorf("tick %q at %g was not one of the labelled ticks", tk.Label, tk.Value)
				}
				zero = zero || tk.Label == "0"
				if i > 0 && len(a.ticks) > 2 {
					d := vg.Length(tk.Value-a.ticks[i-1].Value) * c.length
					need := (sty.Width(tk.Label)+sty.Width(a.ticks[i-1].Label))/2 + minLabelGap
					if !c.horizontal {
						need = (sty.Height(tk.Label)+sty.Height(a.ticks[i-1].Label))/2 + minLabelGap/2
					}
					if d < need {
						t.Errorf("labels %q and %q %v apart, need %v", a.ticks[i-1].Label, tk.Label, d, need)
					}
				}
			}
			if hadZero && !zero {
				t.Error("the tick at zero was dropped")
			}
		})
	}
}
