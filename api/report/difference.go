package report

import (
	"fmt"

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

// DifferencePlotForm is DifferencePlot with the limits of the form the
// analysis chose and, with a proportional bias, the regression of the
// differences on the means.
func DifferencePlotForm(mean, diff []float64, meanDiff, lower, upper float64, f DifferenceForm, ax Axes) ([]byte, error) {
	if len(mean) == 0 {
		return nil, ErrNoData
	}
	if err := finite(mean, diff, []float64{meanDiff, lower, upper, f.B0, f.B1, f.K, f.C0, f.C1, f.Ratio, f.RatioLower, f.RatioUpper}); err != nil {
		return nil, err
	}
	p := newPlot("Difference plot (Bland–Altman)", ax.label("mean of x and y"), ax.label("difference y − x"))
	x0, x1 := span(mean)
	dash := []vg.Length{vg.Points(6), vg.Points(3)}
	p.Add(hline(0, x0, x1, inkIdentity, []vg.Length{vg.Points(2), vg.Points(3)}))
	ratioLine := func(r float64) Line { return Line{Slope: 2 * (r - 1) / (r + 1)} }
	switch f.Form {
	case "regression":
		bias := straight(Line{Intercept: f.B0, Slope: f.B1}, x0, x1, inkFit, nil)
		lo := straight(Line{Intercept: f.B0 - f.K*f.C0, Slope: f.B1 - f.K*f.C1}, x0, x1, inkLimit, dash)
		hi := straight(Line{Intercept: f.B0 + f.K*f.C0, Slope: f.B1 + f.K*f.C1}, x0, x1, inkLimit, dash)
		p.Add(bias, lo, hi)
		p.Legend.Add(fmt.Sprintf("bias %.4g %+.4g·A", f.B0, f.B1), bias)
		p.Legend.Add("regression-based limits of agreement", lo)
	case "ratio":
		bias := straight(ratioLine(f.Ratio), x0, x1, inkFit, nil)
		lo := straight(ratioLine(f.RatioLower), x0, x1, inkLimit, dash)
		hi := straight(ratioLine(f.RatioUpper), x0, x1, inkLimit, dash)
		p.Add(bias, lo, hi)
		p.Legend.Add(fmt.Sprintf("ratio y/x %.4g", f.Ratio), bias)
		p.Legend.Add(fmt.Sprintf("ratio limits %.4g, %.4g", f.RatioLower, f.RatioUpper), lo)
	default:
		md := hline(meanDiff, x0, x1, inkFit, nil)
		lo, hi := hline(lower, x0, x1, inkLimit, dash), hline(upper, x0, x1, inkLimit, dash)
		p.Add(md, lo, hi)
		p.Legend.Add(fmt.Sprintf("mean difference %.4g", meanDiff), md)
		p.Legend.Add(fmt.Sprintf("limits of agreement %.4g, %.4g", lower, upper), lo)
	}
	if f.Proportional && f.Form != "regression" {
		reg := straight(Line{Intercept: f.B0, Slope: f.B1}, x0, x1, inkOLS, []vg.Length{vg.Points(2), vg.Points(2)})
		p.Add(reg)
		p.Legend.Add(fmt.Sprintf("differences on means %.4g %+.4g·A", f.B0, f.B1), reg)
	}
	s, err := points(mean, diff)
	if err != nil {
		return nil, err
	}
	p.Add(s)
	return render(p)
}
