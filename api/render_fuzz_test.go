package api

import (
	"bytes"
	"context"
	"encoding/binary"
	"encoding/xml"
	"errors"
	"io"
	"math"
	"net/url"
	"strconv"
	"strings"
	"testing"
	"time"

	"eivfit/api/report"
	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// renderExtremes are the values FuzzRender draws from: magnitudes at and
// near the float64 limits, 2^53 (where neighbours are 2 apart), subnormals.
var renderExtremes = []float64{
	0, 1, -1, 3, 0.1, 1 << 53, 1<<53 + 2, 1e16, -1e16, 1e150, -1e150, 1e300, -1e300,
	math.MaxFloat64, -math.MaxFloat64, math.SmallestNonzeroFloat64, -math.SmallestNonzeroFloat64,
	2.2250738585072014e-308, 1e-300,
}

// renderInput is FuzzRender's decoded input: n points with five columns
// (x, y, order, sx, sy) and four scalars (mean difference, lower and upper
// limit, estimate).
type renderInput struct {
	cols    [5][]float64
	scalars [4]float64
}

// decodeRenderInput reads n = 1 + data[0] mod 24, then 5n + 4 values: a
// byte below 128 picks renderExtremes[b mod len] moved by the next byte
// mod 4 ulps; a byte from 128 takes the next 8 bytes as float64 bits.
// Missing bytes read as zero.
func decodeRenderInput(data []byte) renderInput {
	next := func() byte {
		if len(data) == 0 {
			return 0
		}
		b := data[0]
		data = data[1:]
		return b
	}
	value := func() float64 {
		k := next()
		if k >= 128 {
			var raw [8]byte
			for i := range raw {
				raw[i] = next()
			}
			return math.Float64frombits(binary.LittleEndian.Uint64(raw[:]))
		}
		v := renderExtremes[int(k)%len(renderExtremes)]
		for range next() % 4 {
			v = math.Nextafter(v, math.Inf(1))
		}
		return v
	}
	var in renderInput
	n := 1 + int(next())%24
	for c := range in.cols {
		in.cols[c] = make([]float64, n)
		for i := range n {
			in.cols[c][i] = value()
		}
	}
	for i := range in.scalars {
		in.scalars[i] = value()
	}
	return in
}

// encodeRenderInput is the inverse of decodeRenderInput, for the seeds.
func encodeRenderInput(in renderInput) []byte {
	b := []byte{byte(len(in.cols[0]) - 1)}
	put := func(v float64) {
		b = append(b, 0xff)
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
	}
	for _, c := range in.cols {
		for _, v := range c {
			put(v)
		}
	}
	for _, v := range in.scalars {
		put(v)
	}
	return b
}

// renderSeeds are the reproducers and their neighbours as fuzz
// inputs (also committed in testdata/fuzz/FuzzRender).
func renderSeeds() [][]byte {
	p53 := float64(1 << 53)
	four := func(v float64) []float64 { return []float64{v, v, v, v} }
	ones := four(1)
	seeds := []renderInput{
		{cols: [5][]float64{{1, 2, 3, 4}, {1.1, 2.2, 2.9, 4.2}, four(p53), ones, ones}, scalars: [4]float64{0.1, -1, 1, 1}},
		{cols: [5][]float64{{p53, p53 + 2, p53 + 4, p53 + 6}, {p53, p53 + 4, p53 + 4, p53 + 8}, {1, 2, 3, 4}, ones, ones}, scalars: [4]float64{p53, p53 - 2, p53 + 2, 1}},
		{cols: [5][]float64{{1, 2, 3, 4}, {1.1, 2.2, 2.9, 4.2}, four(1e16), ones, ones}, scalars: [4]float64{1e16, 1e16, 1e16, 1e16}},
		{cols: [5][]float64{{-math.MaxFloat64, math.MaxFloat64, 0, 1}, {math.MaxFloat64, -math.MaxFloat64, 1, 0}, {-1e308, 1e308, 0, 1}, four(math.MaxFloat64), ones}, scalars: [4]float64{math.MaxFloat64, -math.MaxFloat64, math.MaxFloat64, 0}},
		{cols: [5][]float64{four(5e-324), {5e-324, 1e-323, 5e-324, 1.5e-323}, four(5e-324), four(5e-324), four(5e-324)}, scalars: [4]float64{5e-324, 0, 1e-323, 5e-324}},
		{cols: [5][]float64{{1e150, -1e150}, {-1e150, 1e150}, {1, 1}, {0, 0}, {1e150, 1e150}}, scalars: [4]float64{0, -1e150, 1e150, 1e150}},
		{cols: [5][]float64{{3}, {3}, {3}, {0}, {0}}, scalars: [4]float64{3, 3, 3, 3}},
	}
	out := make([][]byte, len(seeds))
	for i, s := range seeds {
		out[i] = encodeRenderInput(s)
	}
	return out
}

// renderBound is the time one fuzz input may take: every plot kind and a
// report of at most 24 points draw in milliseconds.
const renderBound = 5 * time.Second

// FuzzRender feeds small datasets with extreme values to every plot kind
// (the difference plot in each form of limits, the calibration plots) and,
// through a fit and a calibration, to the HTML report and the calibration
// record; each must answer within
// renderBound with well-formed SVG or an error that is not ErrDraw (a
// panic inside the plot library) and never panic.
func FuzzRender(f *testing.F) {
	for _, s := range renderSeeds() {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		in := decodeRenderInput(data)
		done := make(chan struct{})
		go func() {
			defer close(done)
			renderAll(t, in)
		}()
		select {
		case <-done:
		case <-time.After(renderBound):
			t.Fatalf("no answer within %v", renderBound)
		}
	})
}

// renderAll draws every plot and the report of in; it reports with Errorf
// as it runs off the test's goroutine.
func renderAll(t *testing.T, in renderInput) {
	ctx, cancel := context.WithTimeout(context.Background(), renderBound)
	defer cancel()
	x, y, order, sx, sy := in.cols[0], in.cols[1], in.cols[2], in.cols[3], in.cols[4]
	md, lo, hi, est := in.scalars[0], in.scalars[1], in.scalars[2], in.scalars[3]
	line := report.Line{Name: "fit", Intercept: md, Slope: est, BandX: x, BandLo: sx, BandHi: sy}
	plots := map[string]func() ([]byte, error){
		"data":       func() ([]byte, error) { return report.DataPlot(ctx, x, y, sx, sy, line, &line, report.Axes{}) },
		"residuals":  func() ([]byte, error) { return report.ResidualPlot(ctx, x, y, report.Axes{}, "") },
		"run-order":  func() ([]byte, error) { return report.RunOrderPlot(ctx, order, y, report.Axes{}, "") },
		"qq":         func() ([]byte, error) { return report.QQPlot(ctx, x, y) },
		"difference": func() ([]byte, error) { return report.DifferencePlot(ctx, x, y, md, lo, hi, report.Axes{}) },
		"bootstrap":  func() ([]byte, error) { return report.BootstrapPlot(ctx, y, est, lo, hi, "BCa") },
		"data, x and y in different units": func() ([]byte, error) {
			return report.DataPlot(ctx, x, y, sx, sy, line, &line, report.Axes{X: "x", Y: "y", Unit: "mg", YUnit: "mV"})
		},
		"difference, regression limits": func() ([]byte, error) {
			f := report.DifferenceForm{Form: "regression", B0: md, B1: est, K: 1.96, C0: lo, C1: hi}
			return report.DifferencePlotForm(ctx, x, y, md, lo, hi, f, report.Axes{})
		},
		"difference, ratio limits": func() ([]byte, error) {
			f := report.DifferenceForm{Form: "ratio", Ratio: md, RatioLower: lo, RatioUpper: hi, Proportional: true, B0: est, B1: md}
			return report.DifferencePlotForm(ctx, x, y, md, lo, hi, f, report.Axes{})
		},
		"calibration": func() ([]byte, error) {
			return report.CalibrationPlot(ctx, x, y, sx, sy, line, order, y, sy, report.Axes{X: "x", Y: "y", Unit: "mg", YUnit: "mV"})
		},
		"standardized residuals": func() ([]byte, error) { return report.StandardizedResidualPlot(ctx, x, y, report.Axes{}) },
	}
	for kind, draw := range plots {
		b, err := draw()
		if errors.Is(err, report.ErrDraw) {
			t.Errorf("%s: the plot library panicked", kind)
		}
		if err == nil {
			wellFormed(t, kind, b)
		}
	}
	// The report, through the fit as the service draws it.
	var csv strings.Builder
	csv.WriteString("x,y,order\n")
	for i := range x {
		csv.WriteString(strconv.FormatFloat(x[i], 'g', -1, 64) + "," + strconv.FormatFloat(y[i], 'g', -1, 64) + "," + strconv.FormatFloat(order[i], 'g', -1, 64) + "\n")
	}
	if a, err := csvFit(ctx, csv.String(), url.Values{}, fuzzSettings); err == nil {
		page, err := report.FitReport(ctx, a.resp.(*wire.FitResponse), a.res, &a.req.Points.Data, "sha", "fuzz")
		checkPage(t, "fit report", page, err)
	}
	// The calibration record: the points as standards with their
	// uncertainties, order as the unknowns' readings.
	var cal strings.Builder
	cal.WriteString("role,x,ux,y,uy\n")
	g := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	for i := range x {
		cal.WriteString("standard," + g(x[i]) + "," + g(math.Abs(sx[i])) + "," + g(y[i]) + "," + g(math.Abs(sy[i])) + "\n")
		cal.WriteString("unknown,,," + g(order[i]) + ",\n")
	}
	if a, err := csvCalibrate(ctx, cal.String(), fuzzSettings); err == nil {
		page, err := report.CalibrationReport(ctx, a.resp.(*wire.CalibrationResponse), a.res, "sha", "fuzz")
		checkPage(t, "calibration record", page, err)
	}
}

// checkPage fails on a panic inside the plot library or a page that does
// not write. It reports with Errorf: it runs off the test's goroutine.
func checkPage(t *testing.T, what string, page *report.Page, err error) {
	if errors.Is(err, report.ErrDraw) {
		t.Errorf("%s: the plot library panicked", what)
	}
	if err == nil {
		if err := page.Write(io.Discard); err != nil {
			t.Errorf("%s: %v", what, err)
		}
	}
}

// csvCalibrate decodes a CSV calibration and computes it, as the service
// does before it draws the record.
func csvCalibrate(ctx context.Context, body string, set study.Settings) (*calibrationAnswer, error) {
	req, err := wire.CalibrationFromCSV(strings.NewReader(body), url.Values{})
	if err != nil {
		return nil, err
	}
	res, err := study.Calibrate(ctx, req.Data, req.Options(set))
	if err != nil {
		return nil, err
	}
	return &calibrationAnswer{req: req, res: res, resp: wire.NewCalibrationResponse(req, res)}, nil
}

// wellFormed checks that b parses as XML and stays small. It reports
// with Errorf: it runs off the test's goroutine.
func wellFormed(t *testing.T, kind string, b []byte) {
	t.Helper()
	if len(b) > 2<<20 {
		t.Errorf("%s: %d-byte SVG", kind, len(b))
	}
	dec := xml.NewDecoder(bytes.NewReader(b))
	for {
		_, err := dec.Token()
		if err == io.EOF {
			return
		}
		if err != nil {
			t.Errorf("%s: SVG is not well-formed XML: %v", kind, err)
			return
		}
	}
}
