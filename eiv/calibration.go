package eiv

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Calibration: the straight calibration line y = a + b·x fitted to reference
// standards whose assigned values x carry uncertainty, its validation, and
// its use in reverse (x₀ from readings y₀ of unknown samples, see
// Calibration.Inverse) and forward (Calibration.Forward), following
// ISO/TS 28037:2010 "Determination and use of straight-line calibration
// functions" and the law of propagation of uncertainty of JCGM 100:2008
// (GUM) §5, with the Monte Carlo check of JCGM 101:2008
// (Calibration.MonteCarlo).
//
// Uncertainty of the standards' x values. A standard's UX is its own,
// independent part of u(x). A shared component (for example a stock
// solution from which several standards were prepared, with relative
// standard uncertainty u_rel) adds u_rel·x in quadrature to each standard
// that shares it and correlates them:
//
//	u²(x_i)      = UX_i² + Σ_c u_rel,c²·x_i²        (components c that hold i)
//	cov(x_i, x_j) = Σ_c u_rel,c²·x_i·x_j             (components that hold both)
//
// An explicit covariance matrix of the x values may be given instead; it is
// then the whole covariance of x.

// CalibrationModel names the model of the calibration line.
type CalibrationModel string

const (
	// ModelWLS is weighted least squares in y, the x values exact
	// (ISO/TS 28037:2010 §6).
	ModelWLS CalibrationModel = "wls"
	// ModelGDR is generalized distance regression: per-standard u(x), u(y)
	// and correlation r, the standards independent (ISO/TS 28037:2010 §7;
	// York et al. 2004).
	ModelGDR CalibrationModel = "gdr"
	// ModelGMR is Gauss–Markov regression with the full covariance of all
	// x and y values (ISO/TS 28037:2010 §8–9; generalized least squares).
	ModelGMR CalibrationModel = "gmr"
)

// InconsistencyPolicy says what Calibrate does when the validation finds
// the scatter about the line larger than the stated uncertainties allow.
type InconsistencyPolicy string

const (
	// OnInconsistentReport (the default) warns and keeps the uncertainties as stated.
	OnInconsistentReport InconsistencyPolicy = "report"
	// OnInconsistentInflate multiplies u(a), u(b) by √(χ²/ν) (cov(a, b) by
	// χ²/ν), the Birge ratio; the line's uncertainty then has ν = m − 2
	// degrees of freedom.
	OnInconsistentInflate InconsistencyPolicy = "inflate"
	// OnInconsistentRefuse returns an *InconsistentError.
	OnInconsistentRefuse InconsistencyPolicy = "refuse"
)

// ReadingBasis says where the standard uncertainty of a mean reading came from.
type ReadingBasis string

const (
	// BasisStated: the stated u of one reading divided by √k (ν infinite).
	BasisStated ReadingBasis = "stated"
	// BasisReplicates: the sample's own replicate SD divided by √k (ν = k − 1).
	BasisReplicates ReadingBasis = "replicates"
	// BasisPooled: the standards' pooled replicate SD divided by √k (ν = Σ(kᵢ − 1)).
	BasisPooled ReadingBasis = "pooled"
)

// Standard is one reference standard of a calibration.
type Standard struct {
	// X is the standard's assigned (certified) value.
	X float64
	// UX is the independent part of the standard uncertainty of X (zero
	// for an exact value). Shared components add to it (see Calibrate).
	UX float64
	// Y holds the instrument's readings of the standard: one, or replicates.
	Y []float64
	// UY is the standard uncertainty of ONE reading; the mean of k readings
	// has UY/√k. Zero means not stated: then the pooled replicate SD of the
	// standards is used, with its degrees of freedom.
	UY float64
	// R is the correlation of the errors of X (its independent part) and of
	// the mean reading, in (−1, 1).
	R float64
}

// SharedComponent is an uncertainty component shared by several standards
// (common practice: standards prepared from one stock solution, or
// certified against one reference): each member's x carries the same
// relative error, so cov(x_i, x_j) = RelativeU²·x_i·x_j.
type SharedComponent struct {
	Name string
	// RelativeU is the relative standard uncertainty (e.g. 0.002 for 0.2 %).
	RelativeU float64
	// Members are the zero-based indices of the standards that share it.
	Members []int
}

// CalibrationOptions are the settings of Calibrate. A nil pointer means defaults.
type CalibrationOptions struct {
	// Model forces a model; empty chooses from the data: wls when every
	// UX and R is zero and no covariance is given, gdr when the standards
	// are independent, gmr when shared components or XCovariance are given.
	Model CalibrationModel
	// Shared are the shared components of the x uncertainties.
	Shared []SharedComponent
	// XCovariance, when not nil, is the full m×m covariance matrix of the
	// standards' x values (symmetric, positive semi-definite). It replaces
	// UX (which must then be zero) and cannot be combined with Shared.
	XCovariance [][]float64
	// OnInconsistent chooses what an inconsistent validation does. Empty
	// means OnInconsistentReport.
	OnInconsistent InconsistencyPolicy
	// ValidationLevel is the probability of the χ² quantile that the
	// observed χ² is compared with. Zero means 0.95 (ISO/TS 28037 §6.2).
	ValidationLevel float64
}

// Calibration-specific sentinel errors.
var (
	// ErrNoReadings: a standard or an unknown has no readings.
	ErrNoReadings = errors.New("eiv: no readings")
	// ErrNoUncertainty: a reading's uncertainty is neither stated nor
	// obtainable from replicates.
	ErrNoUncertainty = errors.New("eiv: no uncertainty stated and none obtainable from replicates")
	// ErrNotSymmetric: a covariance matrix is not symmetric.
	ErrNotSymmetric = errors.New("eiv: covariance matrix is not symmetric")
	// ErrNotPSD: a covariance matrix is not positive semi-definite.
	ErrNotPSD = errors.New("eiv: covariance matrix is not positive semi-definite")
	// ErrMatrixSize: a covariance matrix does not have one row and column per standard.
	ErrMatrixSize = errors.New("eiv: covariance matrix has the wrong size")
	// ErrZeroSlope: the calibration slope is not distinguishable from zero,
	// so the line cannot be used in reverse.
	ErrZeroSlope = errors.New("eiv: the calibration slope is not distinguishable from zero")
	// ErrInconsistent: the validation failed and the caller asked to refuse.
	ErrInconsistent = errors.New("eiv: the calibration data are inconsistent with the stated uncertainties")
)

// InputError names the part of a calibration's input at fault, so that a
// caller can point at the field: Part is "standards", "unknowns",
// "shared_components" or "x_covariance"; Index the zero-based element (row
// of x_covariance), or −1 for the whole part; Col a second index (the column
// of x_covariance, the position in a shared component's member list), or −1;
// Field the field name ("x", "ux", "y", "uy", "r", "relative_u", "members").
type InputError struct {
	Part  string
	Index int
	Col   int
	Field string
	Err   error
}

func (e *InputError) Error() string {
	where := e.Part
	if e.Index >= 0 {
		where += fmt.Sprintf("[%d]", e.Index)
	}
	if e.Col >= 0 {
		if e.Part == "x_covariance" {
			where += fmt.Sprintf("[%d]", e.Col)
		} else {
			where += fmt.Sprintf(".%s[%d]", e.Field, e.Col)
		}
	} else if e.Field != "" {
		where += "." + e.Field
	}
	return "eiv: " + where + ": " + trimPrefix(e.Err.Error())
}

func (e *InputError) Unwrap() error { return e.Err }

func inputErr(part string, i int, field string, err error) *InputError {
	return &InputError{Part: part, Index: i, Col: -1, Field: field, Err: err}
}

// InconsistentError is returned under OnInconsistentRefuse.
type InconsistentError struct {
	Chi2, Quantile, P float64
	DOF               int
}

func (e *InconsistentError) Error() string {
	return fmt.Sprintf("eiv: the calibration data are inconsistent with the stated uncertainties: χ² = %.4g exceeds its %.4g quantile on %d degrees of freedom (p = %.2g)",
		e.Chi2, e.Quantile, e.DOF, e.P)
}

func (e *InconsistentError) Unwrap() error { return ErrInconsistent }

// Calibration warning codes.
const (
	WarnInconsistent   = "calibration_inconsistent"
	WarnInflated       = "uncertainty_inflated"
	WarnLargeResidual  = "large_residual"
	WarnExtrapolation  = "extrapolation"
	WarnSlopeUncertain = "slope_uncertain"
	WarnMonteCarloDiff = "monte_carlo_disagrees"
)

// SlopeUncertainLimit is the relative standard uncertainty of the slope,
// u(b)/|b|, above which an inverse evaluation carries WarnSlopeUncertain.
// x₀ = (ȳ₀ − a)/b is linear in ȳ₀ and a but not in b: the first neglected
// terms of the Taylor series are of relative order (u(b)/b)² in the
// variance and in the bias of x₀ − x̄, i.e. 1 % at 0.1, 4 % at 0.2. JCGM 101
// §8 validates an uncertainty stated to two significant digits within
// half a unit of the second digit, between 0.5 % and 5 % of u; at 0.1 the
// neglected terms reach the lower end of that range, and beyond it the
// linear result should be checked by Monte Carlo.
const SlopeUncertainLimit = 0.1

// UValue is a value with its standard uncertainty.
type UValue struct{ Value, U float64 }

// Validation is the check of the line against the stated uncertainties
// (ISO/TS 28037:2010 §6.2, §7.2): χ²_obs is compared with the
// ValidationLevel quantile of χ²(ν).
type Validation struct {
	Chi2     float64 // χ²_obs, the minimised generalized distance
	DOF      int     // ν = m − 2
	Level    float64 // probability of the quantile, e.g. 0.95
	Quantile float64 // χ²_Level(ν)
	P        float64 // P(χ²(ν) ≥ χ²_obs)
	// Consistent says χ²_obs ≤ Quantile.
	Consistent bool
	// Policy is the policy that was applied (whether or not it had to act).
	Policy InconsistencyPolicy
	// Scale is the factor applied to u(a), u(b): √(χ²/ν) when the line was
	// inflated, else 1.
	Scale float64
}

// StandardResult is what the calibration found for one standard.
type StandardResult struct {
	// Y is the mean reading ȳ with its standard uncertainty u(ȳ), from Basis.
	Y     UValue
	Basis ReadingBasis
	// Readings is the number of readings k.
	Readings int
	// UX is the total standard uncertainty of x (its independent part and
	// the shared components), √V_x,ii.
	UX float64
	// XAdjusted is the fitted true value ξ̂ of x (the adjusted point).
	XAdjusted float64
	// Residual is ȳ − a − b·x.
	Residual float64
	// Weighted is Residual/√M_ii, M = cov(ȳ − a − b·x) at fixed (a, b):
	// u²(y) + b²·u²(x) − 2·b·cov(x, y).
	Weighted float64
	// Standardized is Residual divided by its standard deviation after
	// the fit, √(M_ii − g_iᵀ·C·g_i), g_i = (1, ξ̂_i), C = cov(a, b) as
	// stated: under the model it has unit variance, so |Standardized| > 2
	// is unusual (Flagged).
	Standardized float64
	Flagged      bool
}

// Calibration is a fitted calibration line. Its uncertainties are on the
// stated basis (scaled by Validation.Scale when inflated).
type Calibration struct {
	Model CalibrationModel
	// Reason says in one sentence why Model was used.
	Reason string
	// M is the number of standards.
	M int
	// Intercept a and Slope b of y = a + b·x with standard uncertainties.
	Intercept, Slope UValue
	// Cov is cov(a, b); Corr is cov(a, b)/(u(a)·u(b)).
	Cov, Corr float64
	// XRef and YRef are the centred form of the line,
	//
	//	y = YRef.Value + b·(x − XRef),
	//
	// with XRef the weighted centroid of the adjusted x values, where the
	// line's value and the slope are uncorrelated: u²(ŷ(x)) =
	// YRef.U² + (x − XRef)²·u²(b). Every propagation here uses this form,
	// which keeps its digits far from the origin.
	XRef float64
	YRef UValue
	// LineDOF is the degrees of freedom of the line's uncertainty: +Inf
	// when every u(y) was stated and the line was not inflated; the pooled
	// replicate ν when u(y) came from replicates; m − 2 when inflated (the
	// smaller when both).
	LineDOF float64
	// XMin and XMax are the range of the standards' x values.
	XMin, XMax float64
	// PooledSD and PooledDOF are the pooled replicate SD of one reading over
	// the standards with replicates (zero when none has).
	PooledSD  float64
	PooledDOF int
	// Iterations done by the line's iterative fit.
	Iterations int
	Validation Validation
	Standards  []StandardResult
	// Warnings are non-fatal diagnostics, each a *Warning.
	Warnings []error
}

// calData holds a calibration's numbers in columns.
type calData struct {
	x, y, uy, ux, r []float64   // ux independent part; r correlation with it
	vx              [][]float64 // full covariance of x; nil when diagonal
	explicit        bool        // vx was given explicitly (r then multiplies √vx_ii)
	basis           []ReadingBasis
	k               []int
}

// Calibrate fits the calibration line to the standards by the model the
// data call for (or opt.Model) and validates it:
//
//   - wls (every u(x) zero): weighted least squares, weights 1/u²(ȳ_i)
//     (ISO/TS 28037:2010 §6);
//   - gdr (independent standards): the generalized distance
//     Σ[(x_i − ξ_i)², (ȳ_i − a − b·ξ_i)²] weighted by each standard's
//     2×2 covariance is minimised by York et al.'s (2004) iteration
//     (= ISO/TS 28037:2010 §7, the weighted total least squares problem);
//   - gmr (shared components or an explicit x covariance): the generalized
//     distance with the full 2m×2m covariance V of (x, y) is minimised,
//     see gmr.go (ISO/TS 28037:2010 §8–9).
//
// All three minimise S(a, b) = dᵀ·M(b)⁻¹·d, d = ȳ − a − b·x, M(b) =
// V_y + b²·V_x − b·(V_xy + V_yx), and report cov(a, b) = (GᵀM⁻¹G)⁻¹ with
// G = [1, ξ̂] at the adjusted points (the unscaled covariance of ISO/TS
// 28037 and York 2004). The validation compares χ²_obs = S(â, b̂) with
// χ²_0.95(m − 2); see CalibrationOptions.OnInconsistent for what then
// happens.
//
// Replicate readings: the mean ȳ of k readings has u(ȳ) = UY/√k when UY is
// stated, else s_p/√k with s_p the pooled SD of the standards' replicates,
// √(ΣΣ(y − ȳ)²/Σ(k − 1)), on Σ(k − 1) degrees of freedom.
//
// Errors: fewer than 3 standards (ErrTooFewPoints), bad values
// (*InputError naming the standard and field), a bad covariance
// (*InputError with ErrNotSymmetric, ErrNotPSD or ErrMatrixSize), a slope
// whose 95 % interval holds zero (ErrZeroSlope: the inverse interval of
// Fieller would be unbounded), and under OnInconsistentRefuse an
// *InconsistentError.
func Calibrate(stds []Standard, opt *CalibrationOptions) (*Calibration, error) {
	if opt == nil {
		opt = &CalibrationOptions{}
	}
	level := opt.ValidationLevel
	if level == 0 {
		level = 0.95
	}
	if !(level > 0 && level < 1) {
		return nil, &OptionError{Option: "validation_level", Reason: "must lie strictly between 0 and 1"}
	}
	policy := opt.OnInconsistent
	if policy == "" {
		policy = OnInconsistentReport
	}
	switch policy {
	case OnInconsistentReport, OnInconsistentInflate, OnInconsistentRefuse:
	default:
		return nil, &OptionError{Option: "on_inconsistent", Reason: "must be report, inflate or refuse"}
	}
	m := len(stds)
	if m < 3 {
		return nil, fmt.Errorf("%w: a calibration line needs at least 3 standards, got %d", ErrTooFewPoints, m)
	}
	d, pooledSD, pooledDOF, err := readStandards(stds)
	if err != nil {
		return nil, err
	}
	vx, full, err := xCovariance(d, opt)
	if err != nil {
		return nil, err
	}
	model, reason, err := chooseModel(d, full, opt.Model)
	if err != nil {
		return nil, err
	}
	var ln *lineSolution
	switch model {
	case ModelGMR:
		ln, err = solveGMR(d, vx)
	default:
		ln, err = solveDiagonal(d)
	}
	if err != nil {
		return nil, err
	}
	return finishCalibration(d, ln, model, reason, pooledSD, pooledDOF, level, policy)
}

// readStandards validates the standards and reduces their readings to means.
func readStandards(stds []Standard) (*calData, float64, int, error) {
	m := len(stds)
	d := &calData{x: make([]float64, m), y: make([]float64, m), uy: make([]float64, m),
		ux: make([]float64, m), r: make([]float64, m), basis: make([]ReadingBasis, m), k: make([]int, m)}
	var ss float64
	var df int
	const part = "standards"
	for i, s := range stds {
		if !allFinite(s.X) {
			return nil, 0, 0, inputErr(part, i, "x", ErrNonFinite)
		}
		if !allFinite(s.UX) || s.UX < 0 {
			return nil, 0, 0, inputErr(part, i, "ux", badU(s.UX))
		}
		if !allFinite(s.UY) || s.UY < 0 {
			return nil, 0, 0, inputErr(part, i, "uy", badU(s.UY))
		}
		if !allFinite(s.R) {
			return nil, 0, 0, inputErr(part, i, "r", ErrNonFinite)
		}
		if !(s.R > -1 && s.R < 1) {
			return nil, 0, 0, inputErr(part, i, "r", ErrInvalidCorrelation)
		}
		mean, dev, err := meanOf(s.Y)
		if err != nil {
			return nil, 0, 0, inputErr(part, i, "y", err)
		}
		ss += dev
		df += len(s.Y) - 1
		d.x[i], d.y[i], d.ux[i], d.r[i], d.k[i] = s.X, mean, s.UX, s.R, len(s.Y)
	}
	if err := checkXY(d.x, d.y); err != nil {
		var pe *PointError
		if errors.As(err, &pe) {
			return nil, 0, 0, inputErr(part, pe.Index, pe.Field, pe.Err)
		}
		return nil, 0, 0, err
	}
	var pooled float64
	if df > 0 {
		pooled = math.Sqrt(ss / float64(df))
	}
	for i, s := range stds {
		k := math.Sqrt(float64(d.k[i]))
		switch {
		case s.UY > 0:
			d.uy[i], d.basis[i] = s.UY/k, BasisStated
		case df > 0:
			d.uy[i], d.basis[i] = pooled/k, BasisPooled
		default:
			return nil, 0, 0, inputErr(part, i, "uy", fmt.Errorf("%w (no standard has replicate readings)", ErrNoUncertainty))
		}
	}
	return d, pooled, df, nil
}

func badU(v float64) error {
	if !allFinite(v) {
		return ErrNonFinite
	}
	return ErrInvalidUncertainty
}

// meanOf returns the mean of readings and their sum of squared deviations.
func meanOf(v []float64) (mean, ss float64, err error) {
	if len(v) == 0 {
		return 0, 0, ErrNoReadings
	}
	for _, r := range v {
		if !allFinite(r) {
			return 0, 0, ErrNonFinite
		}
		mean += r
	}
	mean /= float64(len(v))
	for _, r := range v {
		ss += (r - mean) * (r - mean)
	}
	return mean, ss, nil
}

// chooseModel picks the model and says why; a forced model that the data
// do not allow is an *OptionError.
func chooseModel(d *calData, full bool, forced CalibrationModel) (CalibrationModel, string, error) {
	exact := true
	for i := range d.x {
		if d.ux[i] != 0 || d.r[i] != 0 {
			exact = false
		}
	}
	auto := ModelGDR
	reason := "the standards' x values carry independent uncertainties: generalized distance regression (ISO/TS 28037:2010 §7, York et al. 2004)"
	switch {
	case full:
		auto = ModelGMR
		reason = "the standards' x values share uncertainty components (a full covariance): Gauss–Markov regression (ISO/TS 28037:2010 §8–9)"
	case exact:
		auto = ModelWLS
		reason = "the standards' x values are exact (u(x) = 0): weighted least squares (ISO/TS 28037:2010 §6)"
	}
	switch forced {
	case "":
		return auto, reason, nil
	case ModelWLS:
		if auto != ModelWLS {
			return "", "", &OptionError{Option: "model", Reason: "wls needs every u(x) and r to be zero and no shared covariance"}
		}
	case ModelGDR:
		if full {
			return "", "", &OptionError{Option: "model", Reason: "gdr treats the standards as independent; shared components or an x covariance need gmr"}
		}
		if auto == ModelWLS {
			reason = "requested: generalized distance regression (ISO/TS 28037:2010 §7), here equal to weighted least squares as u(x) = 0"
		} else {
			reason = "requested: " + reason
		}
	case ModelGMR:
		if !full {
			reason = "requested: Gauss–Markov regression (ISO/TS 28037:2010 §8–9) with a diagonal covariance"
		} else {
			reason = "requested: " + reason
		}
	default:
		return "", "", &OptionError{Option: "model", Reason: "must be wls, gdr or gmr"}
	}
	return forced, reason, nil
}

// lineSolution is a fitted line in the centred coordinates of the data:
// X = x − xc, Y = y − yc.
type lineSolution struct {
	xc, yc float64
	ac, b  float64   // Y = ac + b·X
	xi     []float64 // adjusted points, centred
	mdiag  []float64 // M_ii
	chi2   float64
	iter   int
	// s0, s1, s2 are GᵀM⁻¹G: 1ᵀM⁻¹1, 1ᵀM⁻¹ξ, (ξ − ξ̄)ᵀM⁻¹(ξ − ξ̄), ξ̄ = s1/s0.
	s0, s1, s2 float64
}

// solveDiagonal fits wls and gdr: York's iteration for the slope
// (york.go), then one closing pass in centred coordinates.
func solveDiagonal(d *calData) (*lineSolution, error) {
	f, err := York(d.x, d.y, d.ux, d.uy, d.r, nil)
	if err != nil {
		var pe *PointError
		if errors.As(err, &pe) {
			return nil, inputErr("standards", pe.Index, map[string]string{"sx": "ux", "sy": "uy"}[pe.Field], pe.Err)
		}
		return nil, err
	}
	b := f.Slope.Value
	m := len(d.x)
	xc, yc := origin(d.x, d.y)
	ln := &lineSolution{xc: xc, yc: yc, b: b, xi: make([]float64, m), mdiag: make([]float64, m), iter: f.Iterations}
	var sw, swd float64
	for i := range m {
		rho := d.r[i] * d.ux[i] * d.uy[i]
		mi := d.uy[i]*d.uy[i] + b*b*d.ux[i]*d.ux[i] - 2*b*rho
		if !(mi > 0) {
			return nil, inputErr("standards", i, "uy", fmt.Errorf("%w: the standard's combined variance about the line is zero", ErrDegenerate))
		}
		ln.mdiag[i] = mi
		w := 1 / mi
		sw += w
		swd += w * ((d.y[i] - yc) - b*(d.x[i]-xc))
	}
	ln.ac = swd / sw
	var s1 float64
	for i := range m {
		X := d.x[i] - xc
		dd := (d.y[i] - yc) - ln.ac - b*X
		rho := d.r[i] * d.ux[i] * d.uy[i]
		w := 1 / ln.mdiag[i]
		// ξ = x − ê, ê = (ρ − b·u²(x))·M⁻¹·d (see gmr.go).
		ln.xi[i] = X - (rho-b*d.ux[i]*d.ux[i])*w*dd
		s1 += w * ln.xi[i]
		ln.chi2 += w * dd * dd
	}
	ln.s0, ln.s1 = sw, s1
	xbar := s1 / sw
	for i := range m {
		e := ln.xi[i] - xbar
		ln.s2 += e * e / ln.mdiag[i]
	}
	return ln, nil
}

// finishCalibration turns a centred line into a Calibration: covariance,
// the centred form, residuals and the validation.
func finishCalibration(d *calData, ln *lineSolution, model CalibrationModel, reason string,
	pooledSD float64, pooledDOF int, level float64, policy InconsistencyPolicy) (*Calibration, error) {
	m := len(d.x)
	dof := m - 2
	xbar := ln.s1 / ln.s0 // centred
	varC, varB := 1/ln.s0, 1/ln.s2
	c := &Calibration{Model: model, Reason: reason, M: m, PooledSD: pooledSD, PooledDOF: pooledDOF,
		Iterations: ln.iter, LineDOF: math.Inf(1)}
	if !allFinite(varC, varB) || !(varB > 0) {
		return nil, fmt.Errorf("%w: the standards do not determine the slope", ErrDegenerate)
	}
	chi := distuv.ChiSquared{K: float64(dof)}
	v := Validation{Chi2: ln.chi2, DOF: dof, Level: level, Quantile: chi.Quantile(level),
		P: chiSquaredSF(ln.chi2, float64(dof)), Policy: policy, Scale: 1}
	v.Consistent = v.Chi2 <= v.Quantile
	if !v.Consistent {
		switch policy {
		case OnInconsistentRefuse:
			return nil, &InconsistentError{Chi2: v.Chi2, Quantile: v.Quantile, P: v.P, DOF: dof}
		case OnInconsistentInflate:
			v.Scale = math.Sqrt(v.Chi2 / float64(dof))
			c.LineDOF = float64(dof)
			c.Warnings = append(c.Warnings, &Warning{Code: WarnInflated, Message: fmt.Sprintf(
				"the line's uncertainties were multiplied by √(χ²/ν) = %.4g because the validation failed", v.Scale)})
		default:
			c.Warnings = append(c.Warnings, &Warning{Code: WarnInconsistent, Message: fmt.Sprintf(
				"χ² = %.4g exceeds χ²_%g(%d) = %.4g (p = %.2g): the scatter about the line is larger than the stated uncertainties allow; the uncertainties are reported as stated",
				v.Chi2, level, dof, v.Quantile, v.P)})
		}
	}
	c.Validation = v
	for i := range m {
		if d.basis[i] == BasisPooled {
			c.LineDOF = math.Min(c.LineDOF, float64(pooledDOF))
			break
		}
	}
	s2 := v.Scale * v.Scale
	varC, varB = varC*s2, varB*s2
	b := ln.b
	c.XRef = ln.xc + xbar
	c.YRef = UValue{Value: ln.yc + ln.ac + b*xbar, U: math.Sqrt(varC)}
	ub := math.Sqrt(varB)
	c.Slope = UValue{Value: b, U: ub}
	c.Intercept = UValue{Value: c.YRef.Value - b*c.XRef, U: math.Sqrt(varC + c.XRef*c.XRef*varB)}
	c.Cov = -c.XRef * varB
	if c.Intercept.U > 0 {
		c.Corr = c.Cov / (c.Intercept.U * ub)
	}
	c.XMin, c.XMax = d.x[0], d.x[0]
	c.Standards = make([]StandardResult, m)
	// Unscaled cov(a, b) at the centred origin for the residuals' variances.
	for i := range m {
		X := d.x[i] - ln.xc
		res := (d.y[i] - ln.yc) - ln.ac - b*X
		g := ln.xi[i] - xbar
		vr := ln.mdiag[i] - (1/ln.s0 + g*g/ln.s2)
		st := StandardResult{Y: UValue{d.y[i], d.uy[i]}, Basis: d.basis[i], Readings: d.k[i],
			UX: math.Sqrt(d.vxDiag(i)), XAdjusted: ln.xc + ln.xi[i], Residual: res,
			Weighted: res / math.Sqrt(ln.mdiag[i])}
		if vr > 1e-12*ln.mdiag[i] {
			st.Standardized = res / math.Sqrt(vr)
		} else {
			st.Standardized = st.Weighted
		}
		st.Flagged = math.Abs(st.Standardized) > 2
		if st.Flagged {
			c.Warnings = append(c.Warnings, &Warning{Code: WarnLargeResidual, Message: fmt.Sprintf(
				"standard %d: standardized residual %.3g (|z| > 2)", i+1, st.Standardized)})
		}
		c.Standards[i] = st
		c.XMin, c.XMax = math.Min(c.XMin, d.x[i]), math.Max(c.XMax, d.x[i])
	}
	if !allFinite(c.Intercept.Value, c.Intercept.U, c.Slope.Value, c.Slope.U, c.Cov, c.YRef.Value, c.YRef.U, c.XRef, v.Chi2, v.P) {
		return nil, fmt.Errorf("%w: the calibration line leaves the double-precision range", ErrDegenerate)
	}
	if !(math.Abs(b) > zQuantile(0.95)*ub) {
		return nil, fmt.Errorf("%w: b = %.4g with u(b) = %.4g; the 95 %% interval of the slope holds zero", ErrZeroSlope, b, ub)
	}
	return c, nil
}

// vxDiag is u²(x_i), the diagonal of the x covariance.
func (d *calData) vxDiag(i int) float64 {
	if d.vx != nil {
		return d.vx[i][i]
	}
	return d.ux[i] * d.ux[i]
}
