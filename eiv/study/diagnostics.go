package study

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"eivfit/eiv"
)

// Diagnostics checks the assumptions on the residuals of one fit, each
// check with its reading in words.
type Diagnostics struct {
	// ResidualsOf names the fit; Scale is "absolute", "relative"
	// (proportional error model) or "normalized" (York: in units of the
	// stated SD about the line).
	ResidualsOf string
	Scale       string
	// The residuals in input order, one entry per sample in parallel
	// slices (a plot of 10⁶ points reads them without a copy): Level is
	// (x + y)/2, Order the run order used (nil when it is the input
	// order 1, 2, …, which a line fit without an order column uses),
	// Residual the residual on the Scale and Standardized the residual
	// over the residuals' SD; IDs are the samples' ids, nil when the data
	// carry none (ID reads it).
	Level, Order, Residual, Standardized []float64
	IDs                                  []string

	ShapiroWilk *eiv.TestResult
	// QQ is the normal Q-Q plot; each point's Index is its residual's.
	// A line fit's diagnostics, whose Q-Q plot names no point, keep only
	// QQSample instead: the standardized residuals in ascending order
	// (eiv.NormalQQSample). QQLen and QQAt read either.
	QQ               []eiv.QQPoint
	QQSample         []float64
	NormalityReading string

	// OrderSource is "order" (given) or "input".
	OrderSource         string
	DurbinWatson, Runs  *eiv.TestResult
	IndependenceReading string

	BreuschPagan *eiv.TestResult
	// Spearman is Spearman's ρ of |residual| with the level.
	Spearman        *eiv.TestResult
	VarianceReading string

	Cusum            *eiv.CusumResult
	LackOfFit        *eiv.TestResult
	LinearityReading string

	// OutlierTest names the test; OutlierMaxTested is its r. Outliers
	// are flagged, never dropped.
	OutlierTest      string
	OutlierMaxTested int
	Outliers         []Outlier
	OutlierReading   string
}

// ID is the id of the sample of residual i, "" when it has none.
func (d *Diagnostics) ID(i int) string {
	if d.IDs == nil {
		return ""
	}
	return d.IDs[i]
}

// QQLen is the number of points of the Q-Q plot.
func (d *Diagnostics) QQLen() int {
	if d.QQ != nil {
		return len(d.QQ)
	}
	return len(d.QQSample)
}

// QQAt is point r of the Q-Q plot: the standard normal quantile and the
// r-th smallest standardized residual.
func (d *Diagnostics) QQAt(r int) (theoretical, sample float64) {
	if d.QQ != nil {
		return d.QQ[r].Theoretical, d.QQ[r].Sample
	}
	return eiv.BlomQuantile(r, len(d.QQSample)), d.QQSample[r]
}

// Outlier is one flagged sample; Index is its index in the caller's data.
type Outlier struct {
	ID        string
	Index     int
	Residual  float64
	R, Lambda float64 // the ESD statistic and its critical value
}

// DiagnoseFit checks the assumptions on the residuals of a line fit's
// method m (constant error model; the cusum linearity test on its line).
func DiagnoseFit(d *Data, m *MethodResult) *Diagnostics {
	a, b := m.Fit.Intercept.Value, m.Fit.Slope.Value
	c := eiv.CusumLinearity(d.X, d.Y, a, b)
	return diagnoseWith(fitReduced(d), m.Fit, m.Method.Name, string(eiv.ErrorConstant), &c, nil, nil, false)
}

// residuals computes the residuals of fit f on st's scale (model, and
// York's normalized residuals) and flags outliers among them.
func residuals(st *reduced, f *eiv.Fit, name, model string) *Diagnostics {
	n := st.Len()
	a, b := f.Intercept.Value, f.Slope.Value
	d := &Diagnostics{ResidualsOf: name, Scale: "absolute"}
	e := make([]float64, n)
	level := make([]float64, n)
	for i := range n {
		level[i] = (st.X[i] + st.Y[i]) / 2
		e[i] = st.Y[i] - a - b*st.X[i]
		if model == string(eiv.ErrorProportional) && level[i] > 0 {
			e[i] /= level[i]
		}
	}
	if model == string(eiv.ErrorProportional) {
		d.Scale = "relative"
	}
	if name == "york" && st.SX != nil {
		// York's residuals in units of their stated SD about the line.
		for i := range n {
			e[i] = (st.Y[i] - a - b*st.X[i]) / math.Sqrt(st.SY[i]*st.SY[i]+b*b*st.SX[i]*st.SX[i])
		}
		d.Scale = "normalized"
	}
	var ss float64
	for _, v := range e {
		ss += v * v
	}
	sd := math.Sqrt(ss / float64(max(n-2, 1)))
	d.Level, d.Order, d.Residual, d.IDs = level, st.Order, e, st.ID
	d.Standardized = make([]float64, n)
	for i := range n {
		if sd > 0 {
			d.Standardized[i] = e[i] / sd
		}
	}
	d.flagOutliers(st)
	return d
}

// fitReduced is a line fit's data as diagnose reads them: one reading
// per sample, indexed as the caller's data, with no sample index,
// replicate counts or copies of the data (a plot of 10⁶ points would pay
// for each); the run order is the input's (Order nil) unless the data
// give one.
func fitReduced(d *Data) *reduced {
	return &reduced{Data: *d, hasOrder: d.Order != nil}
}

// FitResiduals is DiagnoseFit without the tests and the Q-Q points: the
// residuals and the flagged outliers, all a plot of the residuals or of
// the data needs.
func FitResiduals(d *Data, m *MethodResult) *Diagnostics {
	return residuals(fitReduced(d), m.Fit, m.Method.Name, string(eiv.ErrorConstant))
}

func diagnose(st *reduced, f *eiv.Fit, name, model string, cusum *eiv.CusumResult, rx, ry *eiv.Repeatability) *Diagnostics {
	return diagnoseWith(st, f, name, model, cusum, rx, ry, true)
}

// diagnoseWith is diagnose; qqIndexed keeps the Q-Q points with their
// residuals' indices (QQ), else only their values (QQSample).
func diagnoseWith(st *reduced, f *eiv.Fit, name, model string, cusum *eiv.CusumResult, rx, ry *eiv.Repeatability, qqIndexed bool) *Diagnostics {
	d := residuals(st, f, name, model)
	e, level := d.Residual, d.Level
	a, b := f.Intercept.Value, f.Slope.Value
	to := func(r eiv.TestResult) *eiv.TestResult { return &r }
	// Normality.
	if sw, err := eiv.ShapiroWilk(e); err == nil {
		d.ShapiroWilk = to(sw)
		if sw.PValue < 0.05 {
			d.NormalityReading = fmt.Sprintf("The residuals depart from a normal distribution (Shapiro–Wilk W = %.3f, p = %.2g): prefer the distribution-free Passing–Bablok line, and look at the Q-Q plot for outliers or skew.", sw.Statistic, sw.PValue)
		} else {
			d.NormalityReading = fmt.Sprintf("No evidence against normal residuals (Shapiro–Wilk W = %.3f, p = %.2g).", sw.Statistic, sw.PValue)
		}
	} else {
		d.NormalityReading = "Normality could not be tested (the residuals are all equal)."
	}
	if qqIndexed {
		d.QQ = eiv.NormalQQ(e)
	} else {
		d.QQSample = eiv.NormalQQSample(e)
	}
	// Independence in run order: the residuals are read in run order
	// through ord, nil when the input is in run order already.
	ord := runOrder(st.Order)
	d.OrderSource = "input"
	if st.hasOrder {
		d.OrderSource = "order"
	}
	var reads []string
	if dw, err := eiv.DurbinWatsonInOrder(e, level, ord); err == nil {
		d.DurbinWatson = to(dw)
		if dw.PValue < 0.05 {
			reads = append(reads, fmt.Sprintf("successive residuals in run order are correlated (Durbin–Watson d = %.2f, p = %.2g): look for drift or carry-over", dw.Statistic, dw.PValue))
		}
	}
	if rt, err := eiv.RunsTestInOrder(e, ord); err == nil {
		d.Runs = to(rt)
		if rt.PValue < 0.05 {
			reads = append(reads, fmt.Sprintf("the signs of the residuals in run order form %s runs than chance gives (p = %.2g)", map[bool]string{true: "fewer", false: "more"}[rt.Statistic < 0], rt.PValue))
		}
	}
	d.IndependenceReading = sentence(reads, "No evidence of dependence in run order.", ".")
	// Constant variance.
	reads = nil
	if bp, err := eiv.BreuschPagan(e, level); err == nil {
		d.BreuschPagan = to(bp)
		if bp.PValue < 0.05 {
			reads = append(reads, fmt.Sprintf("the residual variance changes with the level (Breusch–Pagan p = %.2g)", bp.PValue))
		}
	}
	if sp, err := eiv.SpearmanAbs(level, e); err == nil {
		d.Spearman = to(sp)
		if sp.PValue < 0.05 && sp.Statistic > 0 {
			reads = append(reads, fmt.Sprintf("|residual| grows with the level (Spearman ρ = %.2f, p = %.2g)", sp.Statistic, sp.PValue))
		}
	}
	d.VarianceReading = sentence(reads, fmt.Sprintf("No evidence that the %s residual spread changes with the level.", d.Scale),
		fmt.Sprintf(": the %s error model may not hold.", model))
	// Linearity.
	d.Cusum = cusum
	reads = nil
	if cusum != nil && !cusum.Linear {
		reads = append(reads, fmt.Sprintf("the cusum test finds a departure from a straight line (p = %.2g)", cusum.PValue))
	}
	if rx != nil && ry != nil {
		if lof, err := eiv.LackOfFit(st.X, st.Y, st.kx, st.ky, a, b, rx, ry); err == nil && model == string(eiv.ErrorConstant) {
			d.LackOfFit = to(lof)
			if lof.PValue < 0.05 {
				reads = append(reads, fmt.Sprintf("the scatter about the line exceeds what the replicate error explains (lack of fit F = %.2f, p = %.2g): sample-specific differences (interferences, matrix effects) or curvature", lof.Statistic, lof.PValue))
			}
		}
	}
	if cusum != nil && !cusum.Linear {
		d.LinearityReading = sentence(reads, "", "; restrict the range or model the curvature before reporting a line.")
	} else {
		d.LinearityReading = sentence(reads, "No evidence against a straight line.", "; look at the samples with the largest residuals.")
	}
	return d
}

// runOrder returns the indices of the samples in run order (a stable
// sort of order), nil when the samples are in run order already.
func runOrder(order []float64) []int {
	sorted := true
	for i := 1; i < len(order) && sorted; i++ {
		sorted = !(order[i] < order[i-1])
	}
	if sorted {
		return nil
	}
	ord := make([]int, len(order))
	for i := range ord {
		ord[i] = i
	}
	slices.SortStableFunc(ord, func(p, q int) int {
		switch {
		case order[p] < order[q]:
			return -1
		case order[p] > order[q]:
			return 1
		}
		return 0
	})
	return ord
}

// flagOutliers runs the generalized ESD test on the residuals; outliers
// are flagged, never dropped.
func (d *Diagnostics) flagOutliers(st *reduced) {
	n, e := len(d.Residual), d.Residual
	r := max(1, min(10, n/10))
	d.OutlierTest, d.OutlierMaxTested, d.Outliers = "generalized ESD (Rosner 1983), α = 0.05", r, []Outlier{}
	if n-r >= 3 {
		if esd, err := eiv.GeneralizedESD(e, r, 0.05); err == nil {
			for k, i := range esd.Outliers {
				at := i // the caller's index: st's own unless st was reduced
				if st.idx != nil {
					at = st.idx[i]
				}
				d.Outliers = append(d.Outliers, Outlier{ID: d.ID(i), Index: at, Residual: e[i], R: esd.R[k], Lambda: esd.Lambda[k]})
			}
		}
	}
	if len(d.Outliers) == 0 {
		d.OutlierReading = "No outliers flagged."
	} else {
		var names []string
		for _, o := range d.Outliers {
			name := o.ID
			if name == "" {
				name = fmt.Sprintf("#%d", o.Index+1)
			}
			names = append(names, name)
		}
		d.OutlierReading = fmt.Sprintf("Flagged as outliers: %s. They are kept in every fit; check them against the records, and exclude them only by listing their ids in \"exclude\", which shows the analysis both ways.", strings.Join(names, ", "))
	}
}

// sentence joins the findings into one sentence ending in tail, or says
// none when there are none.
func sentence(reads []string, none, tail string) string {
	if len(reads) == 0 {
		return none
	}
	s := strings.Join(reads, "; ")
	return strings.ToUpper(s[:1]) + s[1:] + tail
}
