package wire

// FitResponse is the answer of POST /v1/fit and the output of `eivfit fit
// --format json`: the same bytes for the same input.
type FitResponse struct {
	N          int     `json:"n"`
	Confidence float64 `json:"confidence"`
	// XUnit and YUnit are the units the caller stated. When they differ,
	// x and y are different quantities: the bias y − x (at[].bias), the
	// identity line and the difference plot are left out.
	XUnit string `json:"x_unit,omitempty"`
	YUnit string `json:"y_unit,omitempty"`
	Fits  Fits   `json:"fits"`
	// OLSBias shows how far ordinary least squares is from each
	// errors-in-variables fit (present when OLS and another fit ran).
	OLSBias []OLSBias `json:"ols_bias,omitempty"`
	// Warnings are non-fatal diagnostics; always an array.
	Warnings []Warning `json:"warnings"`
	// Input says how a CSV export was read: columns, units, ignored
	// columns, skipped rows (present when there is something to say).
	Input *InputOut `json:"input,omitempty"`
}

// Fits holds one entry per method that ran, in a fixed order.
type Fits struct {
	OLS            *MethodFit `json:"ols,omitempty"`
	Deming         *MethodFit `json:"deming,omitempty"`
	WeightedDeming *MethodFit `json:"weighted_deming,omitempty"`
	PassingBablok  *MethodFit `json:"passing_bablok,omitempty"`
	York           *MethodFit `json:"york,omitempty"`
}

// Each calls f for every fit present, in order.
func (fs *Fits) Each(f func(name string, m *MethodFit)) {
	for _, e := range fs.list() {
		if *e.m != nil {
			f(e.name, *e.m)
		}
	}
}

// Get returns the named fit, or nil.
func (fs *Fits) Get(name string) *MethodFit {
	for _, e := range fs.list() {
		if e.name == name {
			return *e.m
		}
	}
	return nil
}

// list pairs each field with its method's name: the one place a new
// method's field is named.
func (fs *Fits) list() []struct {
	name string
	m    **MethodFit
} {
	return []struct {
		name string
		m    **MethodFit
	}{{"ols", &fs.OLS}, {"deming", &fs.Deming}, {"weighted_deming", &fs.WeightedDeming},
		{"passing_bablok", &fs.PassingBablok}, {"york", &fs.York}}
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

// AtOut is the prediction and the bias against identity at one x value;
// Bias is absent when x and y are in different units.
type AtOut struct {
	X float64 `json:"x"`
	// Extrapolated says x lies outside the range of the data's x values
	// (the answer also warns, code "extrapolated").
	Extrapolated bool      `json:"extrapolated"`
	Y            Interval  `json:"y"`
	Bias         *Interval `json:"bias,omitempty"`
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

// CompareResponse is the answer of POST /v1/method-comparison and of
// `eivfit compare --format json`.
type CompareResponse struct {
	XName          string `json:"x_name"`
	YName          string `json:"y_name"`
	Unit           string `json:"unit,omitempty"`
	SignConvention string `json:"sign_convention"`
	Comparison
	// WithoutExcluded is the same analysis without the samples named in
	// "exclude" (present only when some were excluded).
	WithoutExcluded *Comparison `json:"without_excluded,omitempty"`
	Caution         string      `json:"caution"`
	// Input says how a CSV export was read: columns, units, ignored
	// columns, skipped rows, replicates per sample.
	Input *InputOut `json:"input,omitempty"`
}

// Comparison is one analysis of a study.
type Comparison struct {
	N          int      `json:"n"`
	Excluded   []string `json:"excluded,omitempty"`
	Confidence float64  `json:"confidence"`
	// Replicates says whether any sample has replicates.
	Replicates     bool          `json:"replicates"`
	ErrorModel     ErrorModelOut `json:"error_model"`
	Fits           Fits          `json:"fits"`
	OLSBias        []OLSBias     `json:"ols_bias,omitempty"`
	Agreement      AgreementOut  `json:"agreement"`
	DecisionLevels []LevelOut    `json:"decision_levels,omitempty"`
	// Outcome sums up the recommended fit's verdicts; Robustness says
	// whether each verdict holds under every fit and without the outliers
	// (both present when a level has an allowable bias).
	Outcome        *OutcomeOut     `json:"outcome,omitempty"`
	Robustness     *RobustnessOut  `json:"robustness,omitempty"`
	Diagnostics    DiagnosticsOut  `json:"diagnostics"`
	Recommendation RecommendationO `json:"recommendation"`
	Warnings       []Warning       `json:"warnings"`
}

// ErrorModelOut describes the error model used for the Deming fits.
type ErrorModelOut struct {
	Model        string            `json:"model"`  // "constant" or "proportional"
	Source       string            `json:"source"` // "given", "replicates" or "assumed"
	Lambda       float64           `json:"lambda"`
	LambdaSource string            `json:"lambda_source"` // "given", "replicates", "uncertainties" or "assumed"
	X            *RepeatabilityOut `json:"x_repeatability,omitempty"`
	Y            *RepeatabilityOut `json:"y_repeatability,omitempty"`
	Reading      string            `json:"reading"`
}

// RepeatabilityOut is one method's replicate precision.
type RepeatabilityOut struct {
	SD    float64 `json:"sd"`
	CV    float64 `json:"cv"`
	DF    int     `json:"df"`
	Trend TestOut `json:"sd_trend"` // Spearman's ρ of per-sample SD with level
	Model string  `json:"model"`
}

// AgreementOut is the Bland–Altman analysis.
type AgreementOut struct {
	MeanDifference    Interval        `json:"mean_difference"`
	SDDifference      float64         `json:"sd_difference"`
	Multiplier        float64         `json:"multiplier"`
	LimitsOfAgreement LimitsOut       `json:"limits_of_agreement"`
	Percent           *PercentOut     `json:"percent,omitempty"`
	ProportionalBias  ProportionalOut `json:"proportional_bias"`
	// Describes says what limits_of_agreement describe: single_measurements,
	// or means_of_replicates when the samples have replicates (then
	// single_measurements holds the limits for single measurements).
	Describes          string               `json:"describes"`
	SingleMeasurements *SingleLimitsOut     `json:"single_measurements,omitempty"`
	LimitsForm         *LimitsFormOut       `json:"limits_form,omitempty"`
	RegressionLimits   *RegressionLimitsOut `json:"regression_limits,omitempty"`
	RatioLimits        *RatioLimitsOut      `json:"ratio_limits,omitempty"`
	Concordance        *ConcordanceOut      `json:"concordance,omitempty"`
	Repeatability      *RepeatabilityPair   `json:"repeatability,omitempty"`
	Reading            string               `json:"reading"`
}

// LimitsOut holds the limits of agreement with their intervals.
type LimitsOut struct {
	Lower Interval `json:"lower"`
	Upper Interval `json:"upper"`
}

// PercentOut is the agreement of the differences in percent of the level.
type PercentOut struct {
	MeanDifference    Interval  `json:"mean_difference"`
	SDDifference      float64   `json:"sd_difference"`
	LimitsOfAgreement LimitsOut `json:"limits_of_agreement"`
}

// ProportionalOut is the regression of differences on means; the line and
// its p-value are absent when the means do not vary (the reading says so).
type ProportionalOut struct {
	Slope     *Param   `json:"slope,omitempty"`
	Intercept *Param   `json:"intercept,omitempty"`
	PValue    *float64 `json:"p_value,omitempty"`
	Reading   string   `json:"reading"`
}

// LevelOut is the bias at one decision level under each fit.
type LevelOut struct {
	Level float64 `json:"level"`
	// Extrapolated says the level lies outside the range of the x values.
	Extrapolated bool `json:"extrapolated"`
	// Allowable is the limit applied here, when one was given.
	Allowable *AllowableOut       `json:"allowable_bias,omitempty"`
	Fits      map[string]LevelFit `json:"fits"`
}

// AllowableOut is the allowable bias at a level.
type AllowableOut struct {
	Absolute *float64 `json:"absolute,omitempty"`
	Percent  *float64 `json:"percent,omitempty"`
	Limit    float64  `json:"limit"` // max(absolute, percent·level/100), units of x
}

// LevelFit is one fit's bias at a level with its verdict.
type LevelFit struct {
	Bias Interval `json:"bias"`
	// BiasPercent is the bias in percent of the level (absent at level 0).
	BiasPercent *Interval `json:"bias_percent,omitempty"`
	// Verdict is "within" (the whole interval inside ±limit), "exceeds"
	// (the whole interval outside), or "inconclusive" (it straddles the
	// limit); empty when no allowable bias applies.
	Verdict string `json:"verdict,omitempty"`
}

// DiagnosticsOut checks the assumptions on the residuals of one fit.
type DiagnosticsOut struct {
	ResidualsOf  string          `json:"residuals_of"`
	Scale        string          `json:"scale"` // "absolute", "relative" or "normalized" (York: in units of the stated SD)
	Normality    NormalityOut    `json:"normality"`
	Independence IndependenceOut `json:"independence"`
	Variance     VarianceOut     `json:"variance"`
	Linearity    LinearityOut    `json:"linearity"`
	Outliers     OutliersOut     `json:"outliers"`
	// Residuals are the residuals in input order, with the level and run order used.
	Residuals []ResidualOut `json:"residuals"`
}

// ResidualOut is one sample's residual.
type ResidualOut struct {
	ID       string  `json:"id,omitempty"`
	Level    float64 `json:"level"`
	Order    float64 `json:"order"`
	Residual float64 `json:"residual"`
	// Standardized is the residual over the residuals' SD.
	Standardized float64 `json:"standardized"`
}

// NormalityOut is the Shapiro–Wilk test with the Q-Q points.
type NormalityOut struct {
	ShapiroWilk *TestOut `json:"shapiro_wilk,omitempty"`
	QQ          []QQOut  `json:"qq"`
	Reading     string   `json:"reading"`
}

// QQOut is one point of the normal Q-Q plot.
type QQOut struct {
	Theoretical float64 `json:"theoretical"`
	Sample      float64 `json:"sample"`
	ID          string  `json:"id,omitempty"`
}

// IndependenceOut holds the run-order checks.
type IndependenceOut struct {
	OrderSource  string   `json:"order_source"` // "order" or "input"
	DurbinWatson *TestOut `json:"durbin_watson,omitempty"`
	Runs         *TestOut `json:"runs,omitempty"`
	Reading      string   `json:"reading"`
}

// VarianceOut holds the checks of constant variance.
type VarianceOut struct {
	BreuschPagan *TestOut `json:"breusch_pagan,omitempty"`
	Spearman     *TestOut `json:"spearman_abs_residual,omitempty"`
	Reading      string   `json:"reading"`
}

// LinearityOut holds the checks of a straight line.
type LinearityOut struct {
	Cusum     *CusumOut `json:"cusum,omitempty"`
	LackOfFit *TestOut  `json:"lack_of_fit,omitempty"`
	Reading   string    `json:"reading"`
}

// OutliersOut lists the flagged samples; none is dropped.
type OutliersOut struct {
	Method    string       `json:"method"`
	MaxTested int          `json:"max_tested"`
	Flagged   []OutlierOut `json:"flagged"`
	Reading   string       `json:"reading"`
}

// OutlierOut is one flagged sample.
type OutlierOut struct {
	ID       string  `json:"id,omitempty"`
	Index    int     `json:"index"`
	Residual float64 `json:"residual"`
	R        float64 `json:"r"`
	Lambda   float64 `json:"lambda"`
}

// RecommendationO says which fit to report and why.
type RecommendationO struct {
	Method  string   `json:"method"`
	Reasons []string `json:"reasons"`
	Text    string   `json:"text"`
}
