package eiv

import (
	"fmt"
	"math"
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
	return tQuantile(p, max(1, int(nu)))
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
