package report

import (
	"bytes"
	"context"
	"encoding/xml"
	"io"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"eivfit/eiv"
	"eivfit/eiv/study"
)

// TestDecimal: labels are written exactly from an integer and a power of
// ten (expected strings by hand arithmetic).
func TestDecimal(t *testing.T) {
	cases := []struct {
		m    int64
		k    int
		want string
	}{
		{0, 5, "0"}, {3, -1, "0.3"}, {-25, -2, "-0.25"}, {15, 0, "15"}, {2, 3, "2000"},
		{1, -5, "1e-5"}, {12, -6, "1.2e-5"}, {12, -5, "0.00012"}, {5, 6, "5000000"}, {1, 7, "1e7"}, {25, 14, "2.5e15"},
		{-2, 300, "-2e300"}, {5, -324, "5e-324"}, {100, -2, "1"},
	}
	for _, c := range cases {
		if got := decimal(c.m, c.k); got != c.want {
			t.Errorf("decimal(%d, %d) = %q, want %q", c.m, c.k, got, c.want)
		}
	}
}

// TestAxis: for every kind of range, the view has a positive width, every
// value maps into [0, 1], and the ticks are few, increasing, in view and
// labelled distinctly.
func TestAxis(t *testing.T) {
	p53 := float64(1 << 53)
	cases := []struct {
		name   string
		vals   []float64
		offset bool // the labels need an offset
	}{
		{"ordinary", []float64{1, 2.5, 4}, false},
		{"equal", []float64{3, 3, 3}, false},
		{"zero", []float64{0, 0}, false},
		{"equal at 2^53", []float64{p53, p53}, false},
		{"one ulp at 2^53", []float64{p53, p53 + 2}, true},
		{"ulps at 2^53", []float64{p53, p53 + 2, p53 + 4, p53 + 6}, true},
		{"equal at 1e16", []float64{1e16, 1e16}, false},
		{"float range", []float64{-math.MaxFloat64, math.MaxFloat64}, false},
		{"at the top", []float64{math.MaxFloat64, math.Nextafter(math.MaxFloat64, 0)}, true},
		{"subnormal", []float64{5e-324, 1e-323, 1.5e-323}, false},
		{"one subnormal", []float64{5e-324}, false},
		{"near one", []float64{1, 1 + 1e-12}, true},
		{"±1e150", []float64{-1e150, 1e150}, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			a := newAxis(c.vals)
			if !(a.w > 0) || math.IsInf(a.w, 0) {
				t.Fatalf("view width %g", a.w)
			}
			for _, v := range c.vals {
				if u := a.u(v); !(u >= 0 && u <= 1) {
					t.Errorf("u(%g) = %g, outside the view", v, u)
				}
			}
			if (a.offset != "") != c.offset {
				t.Errorf("offset %q, want one: %v", a.offset, c.offset)
			}
			ts := a.Ticks(0, 1)
			if len(ts) < 2 || len(ts) > maxTicks {
				t.Fatalf("%d ticks: %+v", len(ts), ts)
			}
			seen := map[string]bool{}
			for i, tk := range ts {
				if tk.Value < 0 || tk.Value > 1 || (i > 0 && tk.Value <= ts[i-1].Value) {
					t.Errorf("tick %d at %g: not increasing within the view", i, tk.Value)
				}
				if seen[tk.Label] {
					t.Errorf("label %q printed twice", tk.Label)
				}
				seen[tk.Label] = true
			}
		})
	}
}

// TestClip: Liang–Barsky against segments whose clipped ends are known.
func TestClip(t *testing.T) {
	cases := []struct {
		name string
		p, q [2]float64
		a, b [2]float64
		ok   bool
	}{
		{"inside", [2]float64{0.1, 0.2}, [2]float64{0.3, 0.4}, [2]float64{0.1, 0.2}, [2]float64{0.3, 0.4}, true},
		{"across", [2]float64{-1, 0.5}, [2]float64{2, 0.5}, [2]float64{0, 0.5}, [2]float64{1, 0.5}, true},
		{"diagonal far out", [2]float64{-1e9, -1e9}, [2]float64{1e9, 1e9}, [2]float64{0, 0}, [2]float64{1, 1}, true},
		{"outside", [2]float64{2, 2}, [2]float64{3, 3}, [2]float64{}, [2]float64{}, false},
		{"NaN", [2]float64{math.NaN(), 0}, [2]float64{1, 1}, [2]float64{}, [2]float64{}, false},
	}
	for _, c := range cases {
		a, b, ok := clip(c.p, c.q)
		// 1e-9: the cut ends come from t = (edge − p)/(q − p), a few
		// roundings of values of order one; ends on an edge are clamped.
		near := func(x, y [2]float64) bool {
			return math.Abs(x[0]-y[0]) < 1e-9 && math.Abs(x[1]-y[1]) < 1e-9
		}
		if ok != c.ok || (ok && (!near(a, c.a) || !near(b, c.b))) {
			t.Errorf("%s: clip = %v %v %v, want %v %v %v", c.name, a, b, ok, c.a, c.b, c.ok)
		}
	}
}

// TestPlotsBounded: at 10⁶ points every plot kind is a binned density
// whose SVG is under 2 MiB and parses as XML.
func TestPlotsBounded(t *testing.T) {
	const n = 1_000_000
	r := rand.New(rand.NewPCG(13, 2))
	x, y, s := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range x {
		x[i] = 100 * r.Float64()
		y[i] = 0.5 + 1.02*x[i] + r.NormFloat64()
		s[i] = 0.5
	}
	ctx := context.Background()
	fit := Line{Name: "deming", Intercept: 0.5, Slope: 1.02}
	plots := map[string]func() ([]byte, error){
		"data":       func() ([]byte, error) { return DataPlot(ctx, x, y, s, s, fit, &fit, Axes{}) },
		"residuals":  func() ([]byte, error) { return ResidualPlot(ctx, x, y, Axes{}, "") },
		"run-order":  func() ([]byte, error) { return RunOrderPlot(ctx, x, y, Axes{}, "") },
		"qq":         func() ([]byte, error) { return QQPlot(ctx, x, y) },
		"difference": func() ([]byte, error) { return DifferencePlot(ctx, x, y, 1, 0, 2, Axes{}) },
	}
	for kind, draw := range plots {
		b, err := draw()
		if err != nil {
			t.Fatalf("%s: %v", kind, err)
		}
		if len(b) >= 2<<20 {
			t.Errorf("%s: %d-byte SVG, want < 2 MiB", kind, len(b))
		}
		if !strings.Contains(string(b), "1000000 points binned") {
			t.Errorf("%s: the legend does not say the points are binned", kind)
		}
		dec := xml.NewDecoder(bytes.NewReader(b))
		for {
			_, err := dec.Token()
			if err == io.EOF {
				break
			}
			if err != nil {
				t.Fatalf("%s: not XML: %v", kind, err)
			}
		}
	}
}

// TestPlotsReadInPlace: the report draws the Q-Q, difference and run-order
// plots from points read in place (the sorted standardized residuals with
// their quantiles computed as drawn, the means and differences formed as
// read, the input order without an order array); each SVG equals, byte for
// byte, the plot drawn from the copies the report made before, with markers
// (300 points) and binned (5,000), with a flagged point.
func TestPlotsReadInPlace(t *testing.T) {
	ctx := context.Background()
	for _, n := range []int{300, 5000} {
		r := rand.New(rand.NewPCG(uint64(n), 5))
		x, y, e := make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range x {
			x[i] = 10 + 90*r.Float64()
			y[i] = 0.5 + 1.02*x[i] + r.NormFloat64()
			e[i] = r.NormFloat64()
		}
		fl := Flagged{Index: []int{n / 2}, IDs: []string{"S"}}
		d := study.Diagnostics{Residual: e, QQSample: eiv.NormalQQSample(e)}
		qq := eiv.NormalQQ(e)
		th, sm := make([]float64, n), make([]float64, n)
		mean, diff, order := make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range n {
			th[i], sm[i] = qq[i].Theoretical, qq[i].Sample
			mean[i], diff[i], order[i] = x[i]/2+y[i]/2, y[i]-x[i], float64(i+1)
		}
		lines := DifferenceForm{Form: "regression", B0: 0.1, B1: 0.01, K: 1.96, C0: 0.8, C1: 0.002, Proportional: true}
		for _, c := range []struct {
			name          string
			inPlace, copy func() ([]byte, error)
		}{
			{"qq", func() ([]byte, error) { return qqPlot(ctx, pts{n: d.QQLen(), at: d.QQAt}) },
				func() ([]byte, error) { return QQPlot(ctx, th, sm) }},
			{"difference", func() ([]byte, error) {
				md := pts{n: n, at: func(i int) (float64, float64) { return x[i]/2 + y[i]/2, y[i] - x[i] }}
				return differencePlot(ctx, md, 0.3, -1.7, 2.3, lines, Axes{}, fl)
			}, func() ([]byte, error) { return DifferencePlotForm(ctx, mean, diff, 0.3, -1.7, 2.3, lines, Axes{}, fl) }},
			{"run-order", func() ([]byte, error) {
				return runOrderPlot(ctx, pts{n: n, at: func(i int) (float64, float64) { return float64(i + 1), e[i] }}, Axes{}, "", fl)
			}, func() ([]byte, error) { return RunOrderPlot(ctx, order, e, Axes{}, "", fl) }},
		} {
			got, err1 := c.inPlace()
			want, err2 := c.copy()
			if err1 != nil || err2 != nil {
				t.Fatalf("%s, %d points: %v, %v", c.name, n, err1, err2)
			}
			if !bytes.Equal(got, want) {
				t.Errorf("%s, %d points: the SVG drawn in place (%d bytes) differs from the one drawn from copies (%d bytes)", c.name, n, len(got), len(want))
			}
		}
	}
}
