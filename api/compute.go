package api

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net/url"
	"slices"
	"time"

	"eivfit/eiv"
)

// Settings of the computation that are the server's (or CLI's), not the client's.
type Settings struct {
	Limits
	// Workers for the bootstrap; zero means GOMAXPROCS.
	Workers int
	// JackknifeMaxN bounds the York jackknife and the paired jackknife of
	// the OLS comparison (each costs n refits). Zero means 2000.
	JackknifeMaxN int
	// Observe, when set, is told the time each method took (bootstrap
	// included) and the resamples it computed; the service feeds metrics.
	Observe func(method string, d time.Duration, resamples int)
}

// DefaultSettings are used by the CLI and, unless configured, the service.
var DefaultSettings = Settings{Limits: DefaultLimits}

func (s Settings) jackMax() int {
	if s.JackknifeMaxN > 0 {
		return s.JackknifeMaxN
	}
	return 2000
}

// Fit validates req and computes every requested fit. It is the one code
// path from a decoded request to its answer, shared by `eivfit fit` and
// POST /v1/fit. Errors are *Problem values (or ctx's error).
func Fit(ctx context.Context, req *FitRequest, set Settings) (*FitResponse, error) {
	if err := req.Validate(set.Limits); err != nil {
		return nil, err
	}
	d := &req.Points
	n := d.Len()
	conf := eiv.DefaultConfidence
	if req.Confidence != nil {
		conf = *req.Confidence
	}
	hasSigma := d.SX != nil && d.SY != nil
	methods := req.Methods
	explicit := len(methods) > 0
	resp := &FitResponse{N: n, Confidence: conf, Warnings: []Warning{}}
	if !explicit {
		methods = []string{"ols"}
		// Stated uncertainties that are all zero on one axis make that axis
		// exact: Deming's λ is then 0 or ∞ and the fit is OLS one way or
		// the other, so the Deming fits are left out.
		exactAxis := hasSigma && req.Lambda == nil && (allZero(d.SX) || allZero(d.SY))
		if exactAxis {
			resp.Warnings = append(resp.Warnings, Warning{Code: eiv.WarnNoUncertaintyInX, Message: "every stated uncertainty of one axis is zero, so that axis is taken as exact: the Deming fits are left out (they reduce to OLS), and york is weighted least squares"})
		} else {
			methods = append(methods, "deming")
			if allPositive(d.X) && allPositive(d.Y) {
				methods = append(methods, "weighted_deming")
			}
		}
		if hasSigma {
			methods = append(methods, "york")
		}
	}
	// Report in a fixed order whatever order the client listed.
	slices.SortFunc(methods, func(a, b string) int { return indexOf(methodNames, a) - indexOf(methodNames, b) })

	s := eiv.Sample{X: d.X, Y: d.Y, SX: d.SX, SY: d.SY, R: d.R}
	methodPtr := func(m string) string {
		if d.csv {
			return "query parameter methods"
		}
		if explicit {
			return fmt.Sprintf("/methods/%d", slices.Index(req.Methods, m))
		}
		return "/points"
	}
	if n < 10 {
		resp.Warnings = append(resp.Warnings, Warning{Code: eiv.WarnFewPoints, Message: fmt.Sprintf(
			"only %d points: intervals are wide and the checks of the assumptions have little power", n)})
	}

	var fits []*fitted
	for _, m := range methods {
		t0 := time.Now()
		if m == "passing_bablok" {
			ft, err := pbFitted(ctx, s, conf, set)
			if err != nil {
				if ctx.Err() != nil {
					return nil, ctx.Err()
				}
				return nil, fitProblem(err, eiv.MethodPassingBablok, d.locate, methodPtr(m))
			}
			fits = append(fits, ft)
			continue
		}
		f, est, lsrc, err := fitOne(m, req, conf, set)
		if err != nil {
			return nil, fitProblem(err, eiv.Method(m), d.locate, methodPtr(m))
		}
		ft := &fitted{name: m, fit: f, est: est, out: methodFit(f), elapsed: time.Since(t0)}
		if lsrc != "" {
			ft.out.Lambda, ft.out.LambdaSource = ptr(f.Lambda), lsrc
		}
		fits = append(fits, ft)
	}
	var err error
	resp.Fits, resp.OLSBias, err = finishFits(ctx, s, fits, req.At, req.Bootstrap, set, &resp.Warnings,
		func(m string, err error) error { return fitProblem(err, eiv.Method(m), d.locate, methodPtr(m)) })
	if err != nil {
		return nil, err
	}
	if err := checkFinite(resp); err != nil {
		return nil, err
	}
	return resp, nil
}

// fitted is one method's fit on its way to the answer.
type fitted struct {
	name    string
	fit     *eiv.Fit
	est     eiv.Estimator
	out     *MethodFit
	elapsed time.Duration
	// at, when set, replaces fit.At for the predictions (Passing–Bablok's
	// jackknife).
	at func(x0 float64) (eiv.Prediction, bool)
}

// finishFits adds to each fit its predictions at the x values in at, its
// bootstrap (when bo asks for one; every method refitted on the same
// resamples, paired with OLS), and the OLS comparison, and assembles the
// fits block. problem maps an estimator error of method m.
func finishFits(ctx context.Context, s eiv.Sample, fits []*fitted, at []float64, bo *BootstrapOptions,
	set Settings, warnings *[]Warning, problem func(m string, err error) error) (Fits, []OLSBias, error) {
	n := s.Len()
	var out Fits
	var olsBias []OLSBias
	var olsFit *eiv.Fit
	for _, f := range fits {
		if f.name == "ols" {
			olsFit = f.fit
		}
		for _, w := range f.fit.Warnings {
			*warnings = append(*warnings, warning(f.name, w))
		}
		f.out.band = func(x0 float64) (float64, float64, bool) {
			p, ok := f.fit.At(x0), true
			if f.at != nil {
				p, ok = f.at(x0)
			}
			return p.Y.CI.Lower, p.Y.CI.Upper, ok
		}
		for _, x0 := range at {
			p := f.fit.At(x0)
			if f.at != nil {
				p, _ = f.at(x0)
			}
			f.out.At = append(f.out.At, AtOut{X: x0, Y: interval(p.Y), Bias: interval(p.Bias)})
		}
	}
	boot := bo != nil && bo.Resamples > 0
	var seed uint64
	if boot {
		seed = rand.Uint64()
		if bo.Seed != nil {
			seed = *bo.Seed
		}
	}
	for _, f := range fits {
		conf := f.fit.Confidence
		ests := []eiv.Estimator{f.est}
		if olsFit != nil && f.name != "ols" {
			ests = append(ests, eiv.OLSEstimator{})
		}
		var br *eiv.BootstrapResult
		t0 := time.Now()
		if boot && f.name == "passing_bablok" && n > pbBootstrapMaxN {
			*warnings = append(*warnings, warning(f.name, &eiv.Warning{Code: eiv.WarnBootstrapSkipped, Message: fmt.Sprintf(
				"passing_bablok: no bootstrap above %d samples (each resample sorts n(n−1)/2 slopes); its rank interval is reported", pbBootstrapMaxN)}))
		} else if boot {
			var err error
			br, err = eiv.Bootstrap(ctx, s, ests, &eiv.BootstrapOptions{
				Resamples: bo.Resamples, Seed: seed, Scheme: eiv.Scheme(bo.Scheme),
				Workers: set.Workers, Confidence: conf, JackknifeMaxN: set.jackMax()})
			if err != nil {
				if ctx.Err() != nil {
					return out, nil, ctx.Err()
				}
				return out, nil, problem(f.name, err)
			}
			f.out.Bootstrap = bootstrapOut(br, seed)
			f.out.bootSlopes = br.Replicates(eiv.SlopeOf(0))
			for _, w := range br.Warnings {
				*warnings = append(*warnings, warning(f.name, w))
			}
			for i, x0 := range at {
				y := func(l []eiv.Line) float64 { return l[0].Intercept + l[0].Slope*x0 }
				if sum, err := br.Summarize(y); err == nil && sum.Percentile != nil {
					iv := sum.Percentile
					if sum.BCa != nil {
						iv = sum.BCa
					}
					f.out.At[i].Y.Bootstrap = bounds(iv)
					f.out.At[i].Bias.Bootstrap = &Bounds{iv.Lower - x0, iv.Upper - x0}
				}
			}
		}
		if set.Observe != nil {
			r := 0
			if boot {
				r = bo.Resamples
			}
			set.Observe(f.name, f.elapsed+time.Since(t0), r)
		}
		if olsFit == nil || f.name == "ols" {
			continue
		}
		var jack [][]eiv.Line
		if br == nil && n <= set.jackMax() && f.name != "passing_bablok" {
			// The fits' own leave-one-out lines pair up without refitting.
			if jf, jo := f.fit.Jackknife, olsFit.Jackknife; jf != nil && jo != nil && len(jf.SlopeLOO) == n && len(jo.SlopeLOO) == n {
				jack = make([][]eiv.Line, n)
				flat := make([]eiv.Line, 2*n) // one allocation for all the pairs
				for i := range n {
					flat[2*i] = eiv.Line{Intercept: jf.InterceptLOO[i], Slope: jf.SlopeLOO[i]}
					flat[2*i+1] = eiv.Line{Intercept: jo.InterceptLOO[i], Slope: jo.SlopeLOO[i]}
					jack[i] = flat[2*i : 2*i+2 : 2*i+2]
				}
			} else {
				jack, _ = eiv.JackknifeLines(s, ests) // nil on a degenerate sample: no interval
			}
		}
		c := eiv.CompareOLS(olsFit, f.fit, s.X, s.SX, at, br, jack)
		olsBias = append(olsBias, olsBiasOut(c))
	}
	for _, f := range fits {
		switch f.name {
		case "ols":
			out.OLS = f.out
		case "deming":
			out.Deming = f.out
		case "weighted_deming":
			out.WeightedDeming = f.out
		case "passing_bablok":
			out.PassingBablok = f.out
		case "york":
			out.York = f.out
		}
	}
	return out, olsBias, nil
}

// pbJackknifeMaxN bounds the Passing–Bablok jackknife used for its
// predictions: n refits of O(n² log n) each.
const pbJackknifeMaxN = 200

// pbBootstrapMaxN bounds the samples for which Passing–Bablok joins the bootstrap.
const pbBootstrapMaxN = 300

// pbFitted runs Passing–Bablok with its checks. Its predictions and bias
// intervals come from the jackknife (the method has no analytic
// covariance); above pbJackknifeMaxN points they are given without interval.
func pbFitted(ctx context.Context, s eiv.Sample, conf float64, set Settings) (*fitted, error) {
	t0 := time.Now()
	pb, err := eiv.PassingBablokContext(ctx, s.X, s.Y, &eiv.Options{Confidence: conf})
	if err != nil {
		return nil, err
	}
	out := methodFit(pb.Fit)
	out.PairwiseSlopes, out.Shift = ptr(pb.Slopes), ptr(pb.Shift)
	c := pb.Cusum
	out.Cusum = &CusumOut{Max: c.Max, Above: c.Above, Below: c.Below, KS: c.KS, PValue: c.PValue, Linear: c.Linear}
	out.KendallTau = &TestOut{Statistic: pb.Kendall.Statistic, PValue: pb.Kendall.PValue, Detail: pb.Kendall.Detail}
	ft := &fitted{name: "passing_bablok", fit: pb.Fit, est: eiv.PassingBablokEstimator{}, out: out}
	full := eiv.Line{Intercept: pb.Fit.Intercept.Value, Slope: pb.Fit.Slope.Value}
	var loo []eiv.Line
	if s.Len() <= pbJackknifeMaxN {
		if jl, err := eiv.JackknifeLines(s, []eiv.Estimator{eiv.PassingBablokEstimator{}}); err == nil {
			for _, l := range jl {
				loo = append(loo, l[0])
			}
		}
	}
	ft.at = func(x0 float64) (eiv.Prediction, bool) {
		if loo == nil {
			// No uncertainty to give: the estimates alone, no SE, no interval.
			y := full.Intercept + full.Slope*x0
			return eiv.Prediction{X: x0, Y: eiv.Estimate{Value: y}, Bias: eiv.Estimate{Value: y - x0}}, false
		}
		return eiv.JackknifeAt(full, loo, x0, conf), true
	}
	ft.elapsed = time.Since(t0)
	return ft, nil
}

// fitOne runs one estimator. lsrc says where λ came from (Deming fits only).
func fitOne(m string, req *FitRequest, conf float64, set Settings) (*eiv.Fit, eiv.Estimator, string, error) {
	d := &req.Points
	opt := eiv.Options{Confidence: conf}
	hasSigma := d.SX != nil && d.SY != nil
	switch m {
	case "ols":
		f, err := eiv.OLS(d.X, d.Y, &opt)
		return f, eiv.OLSEstimator{}, "", err
	case "deming", "weighted_deming":
		lambda, lsrc := 0.0, "assumed"
		if req.Lambda != nil {
			lambda, lsrc = *req.Lambda, "given"
		} else if hasSigma {
			var err error
			if m == "deming" {
				lambda, err = eiv.LambdaFromUncertainties(d.SX, d.SY)
			} else {
				lambda, err = eiv.RelativeLambdaFromUncertainties(d.X, d.Y, d.SX, d.SY)
			}
			if err != nil {
				return nil, nil, "", &eiv.OptionError{Option: "sx, sy", Reason: "the stated uncertainties give no error-variance ratio (all zero on one axis); give lambda"}
			}
			lsrc = "uncertainties"
		}
		o := &eiv.DemingOptions{Options: opt, Lambda: lambda, Jackknife: true}
		if m == "deming" {
			f, err := eiv.Deming(d.X, d.Y, o)
			if err != nil {
				return nil, nil, "", err
			}
			return f, eiv.DemingEstimator{Lambda: f.Lambda}, lsrc, nil
		}
		f, err := eiv.WeightedDeming(d.X, d.Y, o)
		if err != nil {
			return nil, nil, "", err
		}
		return f, eiv.WeightedDemingEstimator{Lambda: f.Lambda}, lsrc, nil
	case "york":
		if !hasSigma {
			return nil, nil, "", &eiv.OptionError{Option: "sx, sy", Reason: "york needs per-point uncertainties sx and sy on every point"}
		}
		f, err := eiv.York(d.X, d.Y, d.SX, d.SY, d.R, &eiv.YorkOptions{Options: opt,
			Jackknife: true, JackknifeMaxN: set.jackMax()})
		return f, eiv.YorkEstimator{}, "", err
	}
	return nil, nil, "", fmt.Errorf("eiv: unknown method %q", m)
}

var seBasis = map[eiv.Method]string{
	eiv.MethodOLS:            "classical least squares, residual variance on n-2 df",
	eiv.MethodDeming:         "large-sample (Fuller 1987, Theorem 1.3.1)",
	eiv.MethodWeightedDeming: "jackknife (Linnet 1990)",
	eiv.MethodYork:           "York et al. (2004), stated uncertainties, unscaled",
	eiv.MethodPassingBablok:  "rank interval of Passing & Bablok (1983); se = half-width / z",
}

func methodFit(f *eiv.Fit) *MethodFit {
	out := &MethodFit{
		Slope:     param(f.Slope),
		Intercept: param(f.Intercept),
		SEBasis:   seBasis[f.Method],
		DOF:       f.DOF,
		Converged: f.Converged,
	}
	if f.Method != eiv.MethodPassingBablok { // a rank method: no covariance
		out.CovSlopeIntercept = ptr(f.CovSlopeIntercept)
	}
	switch f.Method {
	case eiv.MethodOLS:
		out.RSquared, out.ResidualSD = ptr(f.RSquared), ptr(f.ResidualSD)
	case eiv.MethodDeming:
		out.ResidualSD = ptr(f.ResidualSD)
	case eiv.MethodWeightedDeming:
		out.ResidualSD, out.Iterations = ptr(f.ResidualSD), ptr(f.Iterations)
	case eiv.MethodYork:
		out.Slope.SEScaled, out.Intercept.SEScaled = ptr(f.Slope.SEScaled), ptr(f.Intercept.SEScaled)
		out.Chi2, out.MSWD, out.PValue = ptr(f.Chi2), ptr(f.MSWD), ptr(f.PValue)
		out.Iterations = ptr(f.Iterations)
	}
	if j := f.Jackknife; j != nil {
		out.Jackknife = &JackknifeOut{
			Slope:             SECI{SE: j.Slope.SE, CI: ci(j.Slope.CI)},
			Intercept:         SECI{SE: j.Intercept.SE, CI: ci(j.Intercept.CI)},
			CovSlopeIntercept: j.Cov,
		}
	}
	return out
}

func bootstrapOut(br *eiv.BootstrapResult, seed uint64) *BootstrapOut {
	out := &BootstrapOut{Resamples: br.Resamples, Failed: br.Failed, Seed: seed, Scheme: string(br.Scheme)}
	one := func(stat eiv.Statistic) BootParamOut {
		s, err := br.Summarize(stat) // a refused interval stays nil; the warning says why
		out := BootParamOut{Percentile: bounds(s.Percentile), BCa: bounds(s.BCa)}
		if err == nil || s.SE > 0 { // fewer than two fitted resamples leave no SE
			out.SE = ptr(s.SE)
		}
		return out
	}
	out.Slope, out.Intercept = one(eiv.SlopeOf(0)), one(eiv.InterceptOf(0))
	return out
}

func olsBiasOut(c *eiv.OLSComparison) OLSBias {
	out := OLSBias{
		Method:               string(c.Method),
		SlopeDifference:      interval(c.SlopeDiff),
		InterceptDifference:  interval(c.InterceptDiff),
		SlopeRelativePercent: interval(c.SlopeRelative),
		Summary:              c.Summary,
	}
	if c.HasReliability {
		out.Reliability, out.PredictedOLSSlope = ptr(c.Reliability), ptr(c.PredictedOLSSlope)
	}
	for _, a := range c.At {
		out.At = append(out.At, BiasAt{X: a.X, OLS: a.OLS, EIV: a.EIV, Difference: a.Difference})
	}
	return out
}

// param and interval carry an estimate to the answer. An eiv estimate
// without an interval method has no uncertainty (its SE and CI are unset
// zeros): the answer then leaves se and ci out.
func param(e eiv.Estimate) Param {
	p := Param{Estimate: e.Value}
	p.SE, p.CI = seCI(e)
	return p
}

func interval(e eiv.Estimate) Interval {
	iv := Interval{Estimate: e.Value}
	iv.SE, iv.CI = seCI(e)
	return iv
}

func seCI(e eiv.Estimate) (*float64, CI) {
	if e.CI.Method == "" {
		return nil, CI{}
	}
	return ptr(e.SE), ci(e.CI)
}

func ci(i eiv.Interval) CI {
	return CI{Lower: i.Lower, Upper: i.Upper, Level: i.Level, Method: i.Method}
}

func bounds(i *eiv.Interval) *Bounds {
	if i == nil {
		return nil
	}
	return &Bounds{Lower: i.Lower, Upper: i.Upper}
}

func warning(method string, err error) Warning {
	var w *eiv.Warning
	if errors.As(err, &w) {
		return Warning{Method: method, Code: w.Code, Message: w.Message}
	}
	return Warning{Method: method, Code: "note", Message: err.Error()}
}

func ptr[T any](v T) *T { return &v }

func allZero(v []float64) bool {
	for _, x := range v {
		if x != 0 {
			return false
		}
	}
	return true
}

func allPositive(v []float64) bool {
	for _, x := range v {
		if !(x > 0) {
			return false
		}
	}
	return len(v) > 0
}

// checkFinite is the last guard before encoding: no NaN or infinity may
// reach a client. The estimators already refuse to return one, so a
// failure here is reported as unfittable data rather than a bad number.
func checkFinite(r *FitResponse) error {
	bad := ""
	visit := func(name string, v float64) {
		if bad == "" && (math.IsNaN(v) || math.IsInf(v, 0)) {
			bad = name
		}
	}
	r.Fits.each(func(name string, f *MethodFit) {
		f.eachNumber(func(field string, v float64) { visit(name+"/"+field, v) })
	})
	for _, c := range r.OLSBias {
		for _, iv := range []Interval{c.SlopeDifference, c.InterceptDifference, c.SlopeRelativePercent} {
			iv.eachNumber(func(field string, v float64) { visit("ols_bias/"+field, v) })
		}
		for _, a := range c.At {
			visit("ols_bias/at", a.Difference)
		}
	}
	if bad != "" {
		return newProblem(kindUnfittable, "the result is not a finite number ("+bad+"): the data are too extreme for double precision",
			FieldError{Pointer: "/points", Detail: "values too extreme to fit"})
	}
	return nil
}

func (p Param) eachNumber(f func(string, float64)) {
	f("estimate", p.Estimate)
	optional(f, "se", p.SE)
	optional(f, "se_scaled", p.SEScaled)
	f("ci", p.CI.Lower)
	f("ci", p.CI.Upper)
}

func optional(f func(string, float64), k string, v *float64) {
	if v != nil {
		f(k, *v)
	}
}

func (iv Interval) eachNumber(f func(string, float64)) {
	f("estimate", iv.Estimate)
	optional(f, "se", iv.SE)
	f("ci", iv.CI.Lower)
	f("ci", iv.CI.Upper)
	if iv.Bootstrap != nil {
		f("bootstrap", iv.Bootstrap.Lower)
		f("bootstrap", iv.Bootstrap.Upper)
	}
}

func (m *MethodFit) eachNumber(f func(string, float64)) {
	m.Slope.eachNumber(func(k string, v float64) { f("slope/"+k, v) })
	m.Intercept.eachNumber(func(k string, v float64) { f("intercept/"+k, v) })
	for _, o := range [...]struct {
		k string
		p *float64
	}{{"cov_slope_intercept", m.CovSlopeIntercept}, {"r_squared", m.RSquared}, {"residual_sd", m.ResidualSD},
		{"lambda", m.Lambda}, {"chi2", m.Chi2}, {"mswd", m.MSWD}, {"p_value", m.PValue}} {
		optional(f, o.k, o.p)
	}
	if j := m.Jackknife; j != nil {
		for _, v := range []float64{j.Slope.SE, j.Slope.CI.Lower, j.Slope.CI.Upper, j.Intercept.SE,
			j.Intercept.CI.Lower, j.Intercept.CI.Upper, j.CovSlopeIntercept} {
			f("jackknife", v)
		}
	}
	if b := m.Bootstrap; b != nil {
		for _, p := range []BootParamOut{b.Slope, b.Intercept} {
			optional(f, "bootstrap/se", p.SE)
			for _, bd := range []*Bounds{p.Percentile, p.BCa} {
				if bd != nil {
					f("bootstrap", bd.Lower)
					f("bootstrap", bd.Upper)
				}
			}
		}
	}
	for _, a := range m.At {
		a.Y.eachNumber(func(k string, v float64) { f("at/y/"+k, v) })
		a.Bias.eachNumber(func(k string, v float64) { f("at/bias/"+k, v) })
	}
}

// FitCSV decodes a CSV dataset, takes the options from query parameters,
// and fits: the path of `eivfit fit` and of POST /v1/fit with a text/csv body.
func FitCSV(ctx context.Context, body io.Reader, q url.Values, set Settings) (*FitResponse, error) {
	req, err := fitFromCSV(body, q)
	if err != nil {
		return nil, err
	}
	return Fit(ctx, req, set)
}
