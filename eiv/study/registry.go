package study

import (
	"context"
	"slices"

	"eivfit/eiv"
)

// Method is one entry of the registry: everything the study layer, the
// wire format and the reports need to know about an estimator.
type Method struct {
	// Name is the method's name in requests and answers.
	Name string
	// Display is its name in sentences ("weighted Deming").
	Display string
	// SEBasis says how the reported standard errors were computed.
	SEBasis string
	// ReportRank orders the methods for the fit a report or a plot draws
	// when none is named: the lowest rank present is drawn.
	ReportRank int
	// Default says whether a fit that names no methods runs this one on d
	// (nil: never; it must be asked for).
	Default func(d *Data, o *FitOptions) bool
	// fit runs the estimator on s.
	fit func(s eiv.Sample, p fitParams) (*MethodResult, error)
}

// fitParams are what a method's fitter takes besides the sample.
type fitParams struct {
	ctx       context.Context // a fitter that takes long (Passing–Bablok) stops when it ends
	conf      float64
	lambda    float64 // Deming fits: the error-variance ratio; 0 means 1 with a warning
	jackknife bool    // ask for the jackknife where it is optional
	jackMax   int     // York: the largest n for the jackknife
}

// Methods is the registry, in the order fits are reported.
var Methods = []*Method{
	{Name: "ols", Display: "OLS", SEBasis: "classical least squares, residual variance on n-2 df", ReportRank: 4,
		Default: func(*Data, *FitOptions) bool { return true },
		fit: func(s eiv.Sample, p fitParams) (*MethodResult, error) {
			f, err := eiv.OLS(s.X, s.Y, &eiv.Options{Confidence: p.conf})
			return &MethodResult{Fit: f, est: eiv.OLSEstimator{}}, err
		}},
	{Name: "deming", Display: "Deming", SEBasis: "large-sample (Fuller 1987, Theorem 1.3.1)", ReportRank: 1,
		Default: func(d *Data, o *FitOptions) bool { return !exactAxis(d, o) },
		fit: func(s eiv.Sample, p fitParams) (*MethodResult, error) {
			f, err := eiv.Deming(s.X, s.Y, &eiv.DemingOptions{Options: eiv.Options{Confidence: p.conf}, Lambda: p.lambda, Jackknife: true})
			if err != nil {
				return nil, err
			}
			return &MethodResult{Fit: f, est: eiv.DemingEstimator{Lambda: f.Lambda}}, nil
		}},
	{Name: "weighted_deming", Display: "weighted Deming", SEBasis: "jackknife (Linnet 1990)", ReportRank: 2,
		Default: func(d *Data, o *FitOptions) bool {
			return !exactAxis(d, o) && allPositive(d.X) && allPositive(d.Y)
		},
		fit: func(s eiv.Sample, p fitParams) (*MethodResult, error) {
			f, err := eiv.WeightedDeming(s.X, s.Y, &eiv.DemingOptions{Options: eiv.Options{Confidence: p.conf}, Lambda: p.lambda, Jackknife: p.jackknife})
			if err != nil {
				return nil, err
			}
			return &MethodResult{Fit: f, est: eiv.WeightedDemingEstimator{Lambda: f.Lambda}}, nil
		}},
	{Name: "passing_bablok", Display: "Passing–Bablok", SEBasis: "rank interval of Passing & Bablok (1983); se = half-width / z", ReportRank: 3,
		fit: passingBablok},
	{Name: "york", Display: "York", SEBasis: "York et al. (2004), stated uncertainties, unscaled", ReportRank: 0,
		Default: func(d *Data, _ *FitOptions) bool { return d.hasSigma() },
		fit: func(s eiv.Sample, p fitParams) (*MethodResult, error) {
			if s.SX == nil || s.SY == nil {
				return nil, &eiv.OptionError{Option: "sx, sy", Reason: "york needs per-point uncertainties sx and sy on every point"}
			}
			f, err := eiv.York(s.X, s.Y, s.SX, s.SY, s.R, &eiv.YorkOptions{Options: eiv.Options{Confidence: p.conf},
				Jackknife: true, JackknifeMaxN: p.jackMax})
			if err != nil {
				return nil, err
			}
			return &MethodResult{Fit: f, est: eiv.YorkEstimator{}}, nil
		}},
}

// MethodNamed returns the registry entry of name, or nil.
func MethodNamed(name string) *Method {
	i := slices.IndexFunc(Methods, func(m *Method) bool { return m.Name == name })
	if i < 0 {
		return nil
	}
	return Methods[i]
}

// MethodNames lists the registry's names in report order.
func MethodNames() []string {
	out := make([]string, len(Methods))
	for i, m := range Methods {
		out[i] = m.Name
	}
	return out
}

func (m *Method) order() int { return slices.Index(Methods, m) }

// exactAxis says whether stated uncertainties that are all zero on one axis
// make that axis exact: Deming's λ is then 0 or ∞ and the fit is OLS one
// way or the other, so the Deming fits are left out by default.
func exactAxis(d *Data, o *FitOptions) bool {
	return d.hasSigma() && o.Lambda == nil && (allZero(d.SX) || allZero(d.SY))
}

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
