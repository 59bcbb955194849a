package eiv

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"
)

// Unknown is a sample measured against a calibration: its readings y₀.
type Unknown struct {
	// Y holds one reading or replicate readings.
	Y []float64
	// UY is the standard uncertainty of ONE reading. Zero means not
	// stated: then the sample's own replicate SD (k ≥ 2 readings, ν = k − 1),
	// or for a single reading the standards' pooled replicate SD (ν its
	// degrees of freedom; common practice: the repeatability found while
	// calibrating).
	UY float64
}

// InverseOptions are the settings of Calibration.Inverse. A nil pointer
// means k = 2.
type InverseOptions struct {
	// CoverageFactor is k; zero means 2 unless CoverageProbability is set.
	CoverageFactor float64
	// CoverageProbability p, when set, gives k = t_p(ν_eff), Student's t
	// quantile with the effective degrees of freedom truncated to an integer
	// (JCGM 100 G.4.1, G.6.4), or the normal quantile when ν_eff is infinite.
	CoverageProbability float64
}

// Contribution is one line of an uncertainty budget (JCGM 100 §5.1.3):
// the input quantity's standard uncertainty, its sensitivity coefficient,
// and their product's magnitude, the contribution to u(x₀) in units of x.
type Contribution struct {
	// Source is "line" (the line's value at XRef), "slope" or "reading".
	Source       string
	Sensitivity  float64
	U            float64
	Contribution float64
	// DOF is the input's degrees of freedom (+Inf when known exactly).
	DOF float64
}

// InverseResult is x₀ for one unknown, with its uncertainty.
type InverseResult struct {
	// Readings is the number of readings k; Y their mean ȳ₀ with u(ȳ₀),
	// from Basis, on YDOF degrees of freedom (+Inf for a stated u).
	Readings int
	Y        UValue
	Basis    ReadingBasis
	YDOF     float64
	// X is x₀ = (ȳ₀ − a)/b = XRef + (ȳ₀ − YRef)/b with u(x₀) by the law of
	// propagation (JCGM 100 §5.1.2) in the centred form
	//
	//	u²(x₀) = [u²(YRef) + (x₀ − XRef)²·u²(b) + u²(ȳ₀)] / b²,
	//
	// which equals [u²(ȳ₀) + u²(a) + x₀²·u²(b) + 2·x₀·cov(a, b)]/b² and keeps
	// its digits far from the origin.
	X UValue
	// Budget holds the three contributions: line, slope, reading.
	Budget []Contribution
	// ULine and UReading split u(x₀): ULine² + UReading² = u²(x₀).
	ULine, UReading float64
	// DOF is ν_eff by the Welch–Satterthwaite formula (JCGM 100 G.4.1)
	// over the line (ULine, LineDOF) and the reading (UReading, YDOF), +Inf
	// when both ν are infinite. The line's two budget lines share one
	// variance estimate and so enter as one term; when the reading's u is
	// the pooled SD that the line also rests on, ν_eff is the pooled ν.
	DOF float64
	// K is the coverage factor; CoverageProbability is p when K came from
	// it, else zero.
	K                   float64
	CoverageProbability float64
	// Expanded is U = K·u(x₀); the coverage interval is [Lower, Upper] = x₀ ∓ U.
	Expanded     float64
	Lower, Upper float64
	// Warnings: WarnExtrapolation, WarnSlopeUncertain (each a *Warning).
	Warnings []error
}

// Inverse evaluates x₀ ± U(x₀) for each unknown. An unknown without
// readings, with a non-finite reading or a negative uncertainty, or whose
// uncertainty is neither stated nor obtainable from replicates is an
// *InputError (part "unknowns") naming it.
func (c *Calibration) Inverse(unknowns []Unknown, opt *InverseOptions) ([]InverseResult, error) {
	if opt == nil {
		opt = &InverseOptions{}
	}
	k, p := opt.CoverageFactor, opt.CoverageProbability
	if k != 0 && p != 0 {
		return nil, &OptionError{Option: "coverage_factor", Reason: "give a coverage factor or a coverage probability, not both"}
	}
	if p != 0 && !(p > 0 && p < 1) {
		return nil, &OptionError{Option: "coverage_probability", Reason: "must lie strictly between 0 and 1"}
	}
	if k == 0 && p == 0 {
		k = 2
	}
	if !(k >= 0 && k < 1e6) {
		return nil, &OptionError{Option: "coverage_factor", Reason: "must be positive and finite"}
	}
	out := make([]InverseResult, len(unknowns))
	for i, u := range unknowns {
		r, err := c.inverseOne(u, k, p)
		if err != nil {
			if ie, ok := err.(*InputError); ok {
				ie.Index = i
			}
			return nil, err
		}
		out[i] = r
	}
	return out, nil
}

func (c *Calibration) inverseOne(u Unknown, k, p float64) (InverseResult, error) {
	const part = "unknowns"
	if !allFinite(u.UY) || u.UY < 0 {
		return InverseResult{}, inputErr(part, -1, "uy", badU(u.UY))
	}
	mean, ss, err := meanOf(u.Y)
	if err != nil {
		return InverseResult{}, inputErr(part, -1, "y", err)
	}
	n := len(u.Y)
	r := InverseResult{Readings: n}
	sqn := math.Sqrt(float64(n))
	switch {
	case u.UY > 0:
		r.Y, r.Basis, r.YDOF = UValue{mean, u.UY / sqn}, BasisStated, math.Inf(1)
	case n >= 2:
		r.Y, r.Basis, r.YDOF = UValue{mean, math.Sqrt(ss/float64(n-1)) / sqn}, BasisReplicates, float64(n-1)
	case c.PooledDOF > 0:
		r.Y, r.Basis, r.YDOF = UValue{mean, c.PooledSD / sqn}, BasisPooled, float64(c.PooledDOF)
	default:
		return InverseResult{}, inputErr(part, -1, "uy", fmt.Errorf(
			"%w: one reading without a stated uy, and the standards have no replicates", ErrNoUncertainty))
	}
	b := c.Slope.Value
	dx := (r.Y.Value - c.YRef.Value) / b
	x0 := c.XRef + dx
	cl := Contribution{Source: "line", Sensitivity: -1 / b, U: c.YRef.U, DOF: c.LineDOF}
	cb := Contribution{Source: "slope", Sensitivity: -dx / b, U: c.Slope.U, DOF: c.LineDOF}
	cr := Contribution{Source: "reading", Sensitivity: 1 / b, U: r.Y.U, DOF: r.YDOF}
	r.Budget = []Contribution{cl, cb, cr}
	for i := range r.Budget {
		ci := &r.Budget[i]
		ci.Contribution = math.Abs(ci.Sensitivity) * ci.U
	}
	r.ULine = math.Hypot(r.Budget[0].Contribution, r.Budget[1].Contribution)
	r.UReading = r.Budget[2].Contribution
	ux := math.Hypot(r.ULine, r.UReading)
	r.X = UValue{x0, ux}
	// Welch–Satterthwaite over the two independent variance estimates: the
	// line's two contributions come from one estimate (the same pooled SD or
	// Birge ratio), so they enter as one term with the line's ν.
	// When the reading's u is the standards' pooled SD and so is the
	// line's, the whole variance is one scaled χ² on the pooled ν.
	var ws float64
	if q := r.ULine * r.ULine; !math.IsInf(c.LineDOF, 1) {
		ws += q * q / c.LineDOF
	}
	if q := r.UReading * r.UReading; !math.IsInf(r.YDOF, 1) {
		ws += q * q / r.YDOF
	}
	r.DOF = math.Inf(1)
	if v := ux * ux; r.Basis == BasisPooled && c.LineDOF == float64(c.PooledDOF) && c.Validation.Scale == 1 {
		r.DOF = float64(c.PooledDOF)
	} else if ws > 0 {
		r.DOF = v * v / ws
	}
	r.K = k
	if p != 0 {
		r.K, r.CoverageProbability = coverageK(p, r.DOF), p
	}
	r.Expanded = r.K * ux
	r.Lower, r.Upper = x0-r.Expanded, x0+r.Expanded
	if !allFinite(x0, ux, r.Expanded, r.Lower, r.Upper) {
		return InverseResult{}, inputErr(part, -1, "y", fmt.Errorf("%w: x₀ leaves the double-precision range", ErrDegenerate))
	}
	if x0 < c.XMin || x0 > c.XMax {
		r.Warnings = append(r.Warnings, &Warning{Code: WarnExtrapolation, Message: fmt.Sprintf(
			"x₀ = %.6g lies outside the range of the standards [%.6g, %.6g]: the straight line is extrapolated", x0, c.XMin, c.XMax)})
	}
	if rel := c.Slope.U / math.Abs(b); rel > SlopeUncertainLimit {
		r.Warnings = append(r.Warnings, &Warning{Code: WarnSlopeUncertain, Message: fmt.Sprintf(
			"u(b)/|b| = %.2g exceeds %.2g: the linear propagation through 1/b is not trustworthy; check it by Monte Carlo", rel, SlopeUncertainLimit)})
	}
	return r, nil
}

// coverageK is the two-sided coverage factor for probability p on ν degrees
// of freedom, ν truncated to an integer (JCGM 100 G.4.1 note 1); the normal
// quantile when ν is infinite or beyond 10⁷.
func coverageK(p, nu float64) float64 {
	if math.IsInf(nu, 1) || nu > 1e7 {
		return zQuantile(p)
	}
	return tTwoSidedQuantile(p, math.Max(1, math.Trunc(nu)))
}

// tSeriesDOF is the ν from which tTwoSidedQuantile uses Fisher's
// expansion. Below it, the Newton iteration's error grows with ν (the
// argument ν/(ν+t²) of the incomplete beta nears 1, and its rounding weighs
// ν/2-fold: about 1e-13 relative at ν = 200); above it, the expansion's
// first neglected term falls with ν⁻⁶ (2e-13 at ν = 300, p = 0.9999).
const tSeriesDOF = 400

// tTwoSidedQuantile is t with P(|T| ≤ t) = p for Student's t on ν ≥ 1
// degrees of freedom, the (1 + p)/2 quantile, to about 1e-13 relative for
// p in [0.5, 0.9999] and ν from 1 to 10⁷ (TestTQuantileAgainstReference,
// against mpmath): closed forms for ν = 1 and 2; from ν = tSeriesDOF on,
// Fisher's (1926) expansion in powers of 1/ν about the normal quantile z
// (Abramowitz and Stegun 26.7.5, five terms); in between, Newton's method on the logarithm of
// the two-sided tail I_{ν/(ν+t²)}(ν/2, ½) against log t, which is concave
// and decreasing, so that the iterates close in on the root from above
// after the first step. The tail, gonum's regularized incomplete beta,
// costs about a microsecond; the inverse incomplete beta behind gonum's
// StudentsT.Quantile costs tens.
func tTwoSidedQuantile(p, nu float64) float64 {
	q := 1 - p // two-sided tail; exact for p ≥ ½ (Sterbenz)
	switch {
	case nu == 1: // Cauchy: t = tan(πp/2) = 1/tan(πq/2)
		return 1 / math.Tan(math.Pi/2*q)
	case nu == 2: // P(|T| ≤ t) = t/√(2 + t²)
		return p * math.Sqrt(2/(q*(1+p)))
	}
	z := -distuv.UnitNormal.Quantile(q / 2)
	if nu >= tSeriesDOF {
		return fisherT(z, nu)
	}
	// log f(t) = lf − (ν+1)/2·log(1 + t²/ν), f the density of T.
	lg1, _ := math.Lgamma((nu + 1) / 2)
	lg2, _ := math.Lgamma(nu / 2)
	lf := lg1 - lg2 - 0.5*math.Log(nu*math.Pi)
	lq := math.Log(q)
	t := z + z*(z*z+1)/(4*nu) // the expansion's first two terms
	if nu >= 10 {
		t = fisherT(z, nu)
	}
	for range 60 {
		tail := mathext.RegIncBeta(nu/2, 0.5, nu/(nu+t*t))
		// d log(tail)/d log t = −2·t·f(t)/tail
		slope := -2 * t * math.Exp(lf-(nu+1)/2*math.Log1p(t*t/nu)) / tail
		step := (math.Log(tail) - lq) / slope
		if !allFinite(step) {
			break
		}
		t *= math.Exp(-step)
		// Newton's error after a step of h is of order h² (relative, in
		// log t): below 1e-9 the step just taken has reached the rounding.
		if math.Abs(step) < 1e-9 {
			break
		}
	}
	return t
}

// fisherT is Fisher's expansion of Student's t quantile on ν degrees of
// freedom about the normal quantile z (Abramowitz and Stegun 1964, 26.7.5):
// t = z + g₁/ν + g₂/ν² + g₃/ν³ + g₄/ν⁴ + g₅/ν⁵.
func fisherT(z, nu float64) float64 {
	z2 := z * z
	g1 := z * (z2 + 1) / 4
	g2 := z * ((5*z2+16)*z2 + 3) / 96
	g3 := z * (((3*z2+19)*z2+17)*z2 - 15) / 384
	g4 := z * ((((79*z2+776)*z2+1482)*z2-1920)*z2 - 945) / 92160
	g5 := z * (((((27*z2+339)*z2+930)*z2-1782)*z2-765)*z2 + 17955) / 368640
	return z + (g1+(g2+(g3+(g4+g5/nu)/nu)/nu)/nu)/nu
}

// ForwardResult is the calibration line evaluated at one x.
type ForwardResult struct {
	// X is the value with its standard uncertainty as given.
	X UValue
	// Y is ŷ = YRef + b·(x − XRef) with
	//
	//	u²(ŷ) = u²(YRef) + (x − XRef)²·u²(b) + b²·u²(x)
	//
	// (JCGM 100 §5.1.2; the line and x independent).
	Y UValue
	// ULine is the line's part of u(ŷ), √(u²(YRef) + (x − XRef)²·u²(b)).
	ULine float64
}

// Forward evaluates the line at x with standard uncertainty ux (zero for an
// exact x).
func (c *Calibration) Forward(x, ux float64) (ForwardResult, error) {
	if !allFinite(x) {
		return ForwardResult{}, &OptionError{Option: "x", Reason: "must be a finite number"}
	}
	if !allFinite(ux) || ux < 0 {
		return ForwardResult{}, &OptionError{Option: "ux", Reason: "must be finite and not negative"}
	}
	dx := x - c.XRef
	b := c.Slope.Value
	ul := math.Hypot(c.YRef.U, dx*c.Slope.U)
	y := c.YRef.Value + b*dx
	r := ForwardResult{X: UValue{x, ux}, Y: UValue{y, math.Hypot(ul, b*ux)}, ULine: ul}
	if !allFinite(y, r.Y.U) {
		return ForwardResult{}, &OptionError{Option: "x", Reason: "ŷ leaves the double-precision range"}
	}
	return r, nil
}
