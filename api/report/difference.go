package report

import (
	"context"
	"fmt"
	"image/color"
	"iter"
	"slices"

	"gonum.org/v1/plot/vg"
)

// DifferenceForm is the form of limits of agreement a difference plot
// draws. Every form is straight in the mean A of x and y: regression-based
// limits b0 + b1·A ∓ K·(c0 + c1·A) (Bland & Altman 1999, §3.2), and ratio
// limits y/x = r, which on the difference scale are d = 2A·(r − 1)/(r + 1).
type DifferenceForm struct {
	// Form is "constant", "ratio" or "regression".
	Form string
	// B0 and B1 are the regression of the differences on the means;
	// Proportional draws it (a proportional bias), and the regression
	// form draws its limits from it with K, C0 and C1.
	B0, B1       float64
	Proportional bool
	K, C0, C1    float64
	// Ratio, RatioLower and RatioUpper are the ratio form's y/x.
	Ratio, RatioLower, RatioUpper float64
}

// DifferencePlot is the Bland–Altman plot: y − x against the mean of the
// two, with the mean difference and the limits of agreement.
func DifferencePlot(ctx context.Context, mean, diff []float64, meanDiff, lower, upper float64, ax Axes, flagged ...Flagged) ([]byte, error) {
	return DifferencePlotForm(ctx, mean, diff, meanDiff, lower, upper, DifferenceForm{Form: "constant"}, ax, flagged...)
}

// DifferencePlotForm is DifferencePlot with the limits of the form the
// analysis chose and, with a proportional bias, the regression of the
// differences on the means. Like every plot it maps its data onto the unit
// square itself (see axis): the y view holds the differences, zero and
// each drawn line at the ends of the means' range, and the lines are
// clipped to the view.
func DifferencePlotForm(ctx context.Context, mean, diff []float64, meanDiff, lower, upper float64, f DifferenceForm, ax Axes, flagged ...Flagged) ([]byte, error) {
	if len(diff) != len(mean) {
		return nil, errLengths
	}
	return differencePlot(ctx, xys(mean, diff), meanDiff, lower, upper, f, ax, flagged...)
}

// differencePlot is DifferencePlotForm of the points (mean, difference)
// read in place.
func differencePlot(ctx context.Context, p pts, meanDiff, lower, upper float64, f DifferenceForm, ax Axes, flagged ...Flagged) ([]byte, error) {
	if p.n == 0 {
		return nil, ErrNoData
	}
	if err := p.finite(); err != nil {
		return nil, err
	}
	if err := finite([]float64{meanDiff, lower, upper, f.B0, f.B1, f.K, f.C0, f.C1, f.Ratio, f.RatioLower, f.RatioUpper}); err != nil {
		return nil, err
	}
	return drawn(func() (*figure, error) {
		lo, hi := p.xRange()
		type drawnLine struct {
			l      Line
			ink    color.Color
			dash   []vg.Length
			legend string
		}
		ratioLine := func(r float64) Line { return Line{Slope: 2 * (r - 1) / (r + 1)} }
		var ls []drawnLine
		switch f.Form {
		case "regression":
			ls = []drawnLine{
				{Line{Intercept: f.B0, Slope: f.B1}, inkFit, nil, "bias = " + affine(f.B0, f.B1)},
				{Line{Intercept: f.B0 - f.K*f.C0, Slope: f.B1 - f.K*f.C1}, inkLimit, dashLimit, "regression-based limits of agreement"},
				{Line{Intercept: f.B0 + f.K*f.C0, Slope: f.B1 + f.K*f.C1}, inkLimit, dashLimit, ""},
			}
		case "ratio":
			ls = []drawnLine{
				{ratioLine(f.Ratio), inkFit, nil, fmt.Sprintf("ratio y/x %.4g", f.Ratio)},
				{ratioLine(f.RatioLower), inkLimit, dashLimit, fmt.Sprintf("ratio limits %.4g, %.4g", f.RatioLower, f.RatioUpper)},
				{ratioLine(f.RatioUpper), inkLimit, dashLimit, ""},
			}
		default:
			ls = []drawnLine{
				{Line{Intercept: meanDiff}, inkFit, nil, fmt.Sprintf("mean difference %.4g", meanDiff)},
				{Line{Intercept: lower}, inkLimit, dashLimit, fmt.Sprintf("limits of agreement %.4g, %.4g", lower, upper)},
				{Line{Intercept: upper}, inkLimit, dashLimit, ""},
			}
		}
		if f.Proportional && f.Form != "regression" {
			ls = append(ls, drawnLine{Line{Intercept: f.B0, Slope: f.B1}, inkOLS, []vg.Length{vg.Points(2), vg.Points(2)},
				"regression of differences: " + affine(f.B0, f.B1)})
		}
		yv := []iter.Seq[float64]{p.ys(), slices.Values([]float64{0})}
		for _, d := range ls {
			yv = append(yv, slices.Values(lineEnds(d.l, lo, hi)))
		}
		fg := newFigure("Difference plot (Bland–Altman)", ax.label("mean of x and y"), ax.label("difference y − x"),
			axisOf(p.xs()), axisOf(yv...))
		fg.hline(0, lo, hi, inkIdentity, dashRef, "")
		for _, d := range ls {
			fg.line(d.l, lo, hi, d.ink, d.dash, d.legend)
		}
		if _, err := fg.pointsOf(ctx, p, ""); err != nil {
			return nil, err
		}
		return fg, fg.flagOf(p, flagged)
	})
}

// affine writes b0 + b1 × mean with the sign of b1 as an operator.
func affine(b0, b1 float64) string {
	op := "+"
	if b1 < 0 {
		op, b1 = "−", -b1
	}
	return fmt.Sprintf("%.4g %s %.4g × mean", b0, op, b1)
}
