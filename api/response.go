package api

// FitResponse is the answer of POST /v1/fit and the output of `eivfit fit
// --format json`: the same bytes for the same input.
type FitResponse struct {
	N          int     `json:"n"`
	Confidence float64 `json:"confidence"`
	Fits       Fits    `json:"fits"`
	// OLSBias shows how far ordinary least squares is from each
	// errors-in-variables fit (present when OLS and another fit ran).
	OLSBias []OLSBias `json:"ols_bias,omitempty"`
	// Warnings are non-fatal diagnostics; always an array.
	Warnings []Warning `json:"warnings"`
}

// Fits holds one entry per method that ran, in a fixed order.
type Fits struct {
	OLS            *MethodFit `json:"ols,omitempty"`
	Deming         *MethodFit `json:"deming,omitempty"`
	WeightedDeming *MethodFit `json:"weighted_deming,omitempty"`
	PassingBablok  *MethodFit `json:"passing_bablok,omitempty"`
	York           *MethodFit `json:"york,omitempty"`
}

// each calls f for every fit present, in order.
func (fs *Fits) each(f func(name string, m *MethodFit)) {
	for _, e := range []struct {
		n string
		m *MethodFit
	}{{"ols", fs.OLS}, {"deming", fs.Deming}, {"weighted_deming", fs.WeightedDeming},
		{"passing_bablok", fs.PassingBablok}, {"york", fs.York}} {
		if e.m != nil {
			f(e.n, e.m)
		}
	}
}

// MethodFit is one estimator's line. Method-specific fields are omitted
// where they do not apply.
type MethodFit struct {
	Slope     Param `json:"slope"`
	Intercept Param `json:"intercept"`
	// CovSlopeIntercept is cov(slope, intercept) on the basis of se; absent
	// for passing_bablok, which has none.
	CovSlopeIntercept *float64 `json:"cov_slope_intercept,omitempty"`
	// SEBasis says how se was computed.
	SEBasis string `json:"se_basis"`

	RSquared   *float64 `json:"r_squared,omitempty"`
	ResidualSD *float64 `json:"residual_sd,omitempty"`

	Lambda       *float64 `json:"lambda,omitempty"`
	LambdaSource string   `json:"lambda_source,omitempty"` // "given", "uncertainties" or "assumed"

	Chi2       *float64 `json:"chi2,omitempty"`
	DOF        int      `json:"dof"`
	MSWD       *float64 `json:"mswd,omitempty"`
	PValue     *float64 `json:"p_value,omitempty"`
	Iterations *int     `json:"iterations,omitempty"`
	Converged  bool     `json:"converged"`

	// Passing–Bablok: the number of pairwise slopes used and the shift K,
	// the cusum linearity test and Kendall's τ.
	PairwiseSlopes *int      `json:"pairwise_slopes,omitempty"`
	Shift          *int      `json:"shift,omitempty"`
	Cusum          *CusumOut `json:"cusum,omitempty"`
	KendallTau     *TestOut  `json:"kendall_tau,omitempty"`

	Jackknife *JackknifeOut `json:"jackknife,omitempty"`
	Bootstrap *BootstrapOut `json:"bootstrap,omitempty"`
	At        []AtOut       `json:"at,omitempty"`

	// For the plots and the report, not sent.
	bootSlopes []float64                                  // bootstrap replicate slopes
	band       func(x0 float64) (lo, hi float64, ok bool) // pointwise confidence band
}

// CusumOut is Passing & Bablok's cusum linearity test.
type CusumOut struct {
	Max    float64 `json:"max_cusum"`
	Above  int     `json:"above"`
	Below  int     `json:"below"`
	KS     float64 `json:"ks_statistic"`
	PValue float64 `json:"p_value"`
	Linear bool    `json:"linear"`
}

// TestOut is a hypothesis test's result.
type TestOut struct {
	Statistic float64 `json:"statistic"`
	PValue    float64 `json:"p_value"`
	Detail    string  `json:"detail,omitempty"`
}

// Param is a fitted parameter. SE and CI are absent where the method
// gives none (Passing–Bablok with too few slopes for its rank interval):
// never a zero in place of a missing value.
type Param struct {
	Estimate float64  `json:"estimate"`
	SE       *float64 `json:"se,omitempty"`
	SEScaled *float64 `json:"se_scaled,omitempty"`
	CI       CI       `json:"ci,omitzero"`
}

// CI is a confidence interval. The zero CI (no method) stands for no
// interval and is left out of the JSON.
type CI struct {
	Lower  float64 `json:"lower"`
	Upper  float64 `json:"upper"`
	Level  float64 `json:"level"`
	Method string  `json:"method"`
}

// IsZero reports a missing interval, for the JSON tag omitzero.
func (c CI) IsZero() bool { return c.Method == "" }

// JackknifeOut is the leave-one-out uncertainty of a fit.
type JackknifeOut struct {
	Slope             SECI    `json:"slope"`
	Intercept         SECI    `json:"intercept"`
	CovSlopeIntercept float64 `json:"cov_slope_intercept"`
}

// SECI is a standard error with its interval.
type SECI struct {
	SE float64 `json:"se"`
	CI CI      `json:"ci"`
}

// BootstrapOut is the bootstrap uncertainty of a fit.
type BootstrapOut struct {
	Resamples int          `json:"resamples"`
	Failed    int          `json:"failed"`
	Seed      uint64       `json:"seed"`
	Scheme    string       `json:"scheme"`
	Slope     BootParamOut `json:"slope"`
	Intercept BootParamOut `json:"intercept"`
}

// BootParamOut holds the bootstrap SE and intervals of one parameter; SE
// is absent when fewer than two resamples could be fitted.
type BootParamOut struct {
	SE         *float64 `json:"se,omitempty"`
	Percentile *Bounds  `json:"percentile,omitempty"`
	BCa        *Bounds  `json:"bca,omitempty"`
}

// Bounds is an interval without its metadata (the level is the fit's).
type Bounds struct {
	Lower float64 `json:"lower"`
	Upper float64 `json:"upper"`
}

// AtOut is the prediction and the bias against identity at one x value.
type AtOut struct {
	X    float64  `json:"x"`
	Y    Interval `json:"y"`
	Bias Interval `json:"bias"`
}

// Interval is an estimate with its confidence interval and, when the
// bootstrap ran, the bootstrap's. SE and CI are absent where there is no
// uncertainty to give (the OLS comparison without resamples for
// Passing–Bablok; Passing–Bablok predictions above its jackknife limit).
type Interval struct {
	Estimate  float64  `json:"estimate"`
	SE        *float64 `json:"se,omitempty"`
	CI        CI       `json:"ci,omitzero"`
	Bootstrap *Bounds  `json:"bootstrap,omitempty"`
}

// OLSBias compares OLS with one errors-in-variables fit.
type OLSBias struct {
	Method string `json:"method"`
	// SlopeDifference and InterceptDifference are OLS minus the EIV fit.
	SlopeDifference     Interval `json:"slope_difference"`
	InterceptDifference Interval `json:"intercept_difference"`
	// SlopeRelative is (OLS − EIV)/EIV, in percent.
	SlopeRelativePercent Interval `json:"slope_relative_percent"`
	// Reliability is κ = 1 − mean(σx²)/var(x), when σx is stated, with the
	// attenuated slope κ·b_EIV it predicts for OLS.
	Reliability       *float64 `json:"reliability,omitempty"`
	PredictedOLSSlope *float64 `json:"predicted_ols_slope,omitempty"`
	At                []BiasAt `json:"at,omitempty"`
	Summary           string   `json:"summary"`
}

// BiasAt is the bias against identity at one x under OLS and under the EIV fit.
type BiasAt struct {
	X          float64 `json:"x"`
	OLS        float64 `json:"ols"`
	EIV        float64 `json:"eiv"`
	Difference float64 `json:"difference"` // OLS − EIV
}

// Warning is a non-fatal diagnostic.
type Warning struct {
	Method  string `json:"method,omitempty"`
	Code    string `json:"code"`
	Message string `json:"message"`
}
