package study

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"eivfit/eiv"

	"gonum.org/v1/gonum/stat/distuv"
)

// CalibrationCaution is carried by every calibration answer and report.
const CalibrationCaution = "These results inform the decision; the laboratory's quality system, its accreditation " +
	"(e.g. ISO/IEC 17025) and local regulations decide whether the calibration and the values derived from it may be used."

// CalibrationData is a calibration study's input: the reference standards,
// the covariance of their assigned values, and the unknown samples.
type CalibrationData struct {
	Standards []CalStandard
	// Shared are uncertainty components shared by several standards.
	Shared []CalShared
	// XCovariance, when not nil, is the full covariance of the standards'
	// x values (it replaces each standard's ux, which must then be 0).
	XCovariance [][]float64
	Unknowns    []CalUnknown
}

// CalStandard is one reference standard.
type CalStandard struct {
	ID string
	// X is the assigned value with its independent standard uncertainty UX.
	X, UX float64
	// Y holds one reading or replicates.
	Y []float64
	// UY is the standard uncertainty of one reading; nil means not
	// stated (then the pooled replicate SD of the standards is used).
	UY *float64
	// R is the correlation of the x and y errors.
	R float64
}

// CalShared is a relative uncertainty component shared by the standards
// named in Standards (by id): cov(x_i, x_j) = RelativeU²·x_i·x_j.
type CalShared struct {
	Name      string
	RelativeU float64
	Standards []string
}

// CalUnknown is a sample whose x is sought from its readings.
type CalUnknown struct {
	ID string
	Y  []float64
	// UY is the standard uncertainty of one reading; nil means not stated
	// (then the sample's own replicate SD, or for one reading the
	// standards' pooled replicate SD).
	UY *float64
}

// CalForward is an x value at which the line is evaluated forward.
type CalForward struct {
	X, UX float64
}

// CalMonteCarlo asks for the Monte Carlo check of every unknown.
type CalMonteCarlo struct {
	// Trials per unknown; zero means 10⁶ (JCGM 101 §7.2.1).
	Trials int
	// Seed; nil means drawn at random (and reported).
	Seed *uint64
}

// CalibrationOptions are a calibration study's options; nil fields mean
// the documented defaults.
type CalibrationOptions struct {
	// Model forces wls, gdr or gmr; "" chooses from the data.
	Model string
	// OnInconsistent is report (default), inflate or refuse.
	OnInconsistent string
	// CoverageFactor k (default 2) or CoverageProbability p (k from
	// Student's t on the effective degrees of freedom); not both.
	CoverageFactor      *float64
	CoverageProbability *float64
	// Confidence is the probability of the χ² quantile of the validation
	// (default 0.95).
	Confidence *float64
	MonteCarlo *CalMonteCarlo
	Forward    []CalForward
	Settings
}

// MaxMonteCarloTrials bounds the trials of one unknown; MaxMonteCarloTotal
// the trials of one request.
const (
	MaxMonteCarloTrials = 10_000_000
	MaxMonteCarloTotal  = 50_000_000
)

// MaxCovarianceStandards bounds the standards of a calibration whose x
// errors are correlated (an x covariance or shared components): Gauss–Markov
// regression holds and factors their m×m covariance, O(m²) memory and O(m³)
// time. MaxSharedComponents bounds the shared components of one request.
const (
	MaxCovarianceStandards = 1000
	MaxSharedComponents    = 100
)

// UnknownResult is x₀ for one unknown.
type UnknownResult struct {
	ID      string
	Inverse eiv.InverseResult
	// MonteCarlo is the JCGM 101 check, when asked for.
	MonteCarlo *eiv.MonteCarloResult
}

// CalWarning is a calibration diagnostic; Unknown names the unknown it
// concerns ("" for the line).
type CalWarning struct {
	Unknown string
	Code    string
	Message string
}

// CalibrationResult is a calibration study's answer.
type CalibrationResult struct {
	Line *eiv.Calibration
	// StandardIDs are the standards' ids ("S1", ... where none was given).
	StandardIDs []string
	Unknowns    []UnknownResult
	Forward     []eiv.ForwardResult
	// BandK is the coverage factor of the line's band in the report: the
	// coverage factor, or the quantile for the coverage probability on the
	// line's degrees of freedom.
	BandK float64
	// Seed of the Monte Carlo trials (when they ran).
	Seed       *uint64
	Confidence float64
	Warnings   []CalWarning
	// Data is the input, for the report's plots.
	Data *CalibrationData
}

// Calibrate runs a calibration study: the line by the model the data call
// for (eiv.Calibrate: ISO/TS 28037:2010 §6–9), its validation, x₀ ± U(x₀)
// for every unknown (JCGM 100 §5, G.4), the Monte Carlo check when asked
// (JCGM 101:2008), and the forward evaluations. Errors are *Error naming
// the offending part of the input.
func Calibrate(ctx context.Context, d CalibrationData, o *CalibrationOptions) (*CalibrationResult, error) {
	if o == nil {
		o = &CalibrationOptions{}
	}
	ids, shared, err := checkCalibration(&d, o)
	if err != nil {
		return nil, err
	}
	conf := 0.95
	if o.Confidence != nil {
		conf = *o.Confidence
	}
	stds := make([]eiv.Standard, len(d.Standards))
	for i, s := range d.Standards {
		stds[i] = eiv.Standard{X: s.X, UX: s.UX, Y: s.Y, R: s.R}
		if s.UY != nil {
			stds[i].UY = *s.UY
		}
	}
	line, err := eiv.Calibrate(stds, &eiv.CalibrationOptions{Model: eiv.CalibrationModel(o.Model), Shared: shared,
		XCovariance: d.XCovariance, OnInconsistent: eiv.InconsistencyPolicy(o.OnInconsistent), ValidationLevel: conf})
	if err != nil {
		return nil, calError(err)
	}
	res := &CalibrationResult{Line: line, StandardIDs: ids, Confidence: conf, Data: &d}
	for _, w := range line.Warnings {
		var ew *eiv.Warning
		if errors.As(w, &ew) && ew.Code == eiv.WarnLargeResidual {
			continue // said below with the standard's id
		}
		res.Warnings = append(res.Warnings, calWarning("", w))
	}
	for i, s := range line.Standards {
		if s.Flagged {
			res.Warnings = append(res.Warnings, CalWarning{Code: eiv.WarnLargeResidual, Message: fmt.Sprintf(
				"standard %s: standardized residual %.3g (|z| > 2)", ids[i], s.Standardized)})
		}
	}
	inv := &eiv.InverseOptions{}
	if o.CoverageFactor != nil {
		inv.CoverageFactor = *o.CoverageFactor
	}
	if o.CoverageProbability != nil {
		inv.CoverageProbability = *o.CoverageProbability
	}
	res.BandK = bandK(inv, line.LineDOF)
	us := make([]eiv.Unknown, len(d.Unknowns))
	for i, u := range d.Unknowns {
		us[i] = eiv.Unknown{Y: u.Y}
		if u.UY != nil {
			us[i].UY = *u.UY
		}
	}
	xs, err := line.Inverse(us, inv)
	if err != nil {
		return nil, calError(err)
	}
	var mc *eiv.MonteCarloOptions
	if m := o.MonteCarlo; m != nil {
		seed := rand.Uint64()
		if m.Seed != nil {
			seed = *m.Seed
		}
		res.Seed = &seed
		mc = &eiv.MonteCarloOptions{Trials: m.Trials, Seed: seed, Workers: o.Workers}
		if o.CoverageProbability != nil {
			mc.CoverageProbability = *o.CoverageProbability
		}
	}
	for i, x := range xs {
		id := d.Unknowns[i].ID
		if id == "" {
			id = fmt.Sprintf("U%d", i+1)
		}
		ur := UnknownResult{ID: id, Inverse: x}
		for _, w := range x.Warnings {
			res.Warnings = append(res.Warnings, calWarning(id, w))
		}
		if mc != nil {
			r, err := line.MonteCarlo(ctx, &xs[i], mc)
			if err != nil {
				if ctx.Err() != nil {
					return nil, ctx.Err()
				}
				return nil, calError(err)
			}
			ur.MonteCarlo = r
			for _, w := range r.Warnings {
				res.Warnings = append(res.Warnings, calWarning(id, w))
			}
		}
		res.Unknowns = append(res.Unknowns, ur)
	}
	for i, f := range o.Forward {
		r, err := line.Forward(f.X, f.UX)
		if err != nil {
			field := "forward/*/x"
			var oe *eiv.OptionError
			if errors.As(err, &oe) && oe.Option == "ux" {
				field = "forward/*/ux"
			}
			return nil, &Error{Kind: Invalid, Field: field, Index: i, Err: err}
		}
		res.Forward = append(res.Forward, r)
	}
	return res, nil
}

// bandK is the coverage factor of the line's band: k as given, else the
// quantile for p on the line's ν (normal when ν is infinite), else 2.
func bandK(o *eiv.InverseOptions, nu float64) float64 {
	switch {
	case o.CoverageFactor > 0:
		return o.CoverageFactor
	case o.CoverageProbability > 0 && o.CoverageProbability < 1:
		q := 0.5 + o.CoverageProbability/2
		if math.IsInf(nu, 1) {
			return distuv.UnitNormal.Quantile(q)
		}
		return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: math.Max(1, math.Floor(nu))}.Quantile(q)
	}
	return 2
}

// checkCalibration checks what eiv does not know about (ids, the shared
// components' member names, the options' ranges and the limits) and
// returns the standards' ids and the shared components by index.
func checkCalibration(d *CalibrationData, o *CalibrationOptions) ([]string, []eiv.SharedComponent, error) {
	if o.MaxPoints > 0 && (len(d.Standards) > o.MaxPoints || len(d.Unknowns) > o.MaxPoints) {
		return nil, nil, &Error{Kind: TooLarge, Field: "standards", Index: -1,
			Err: fmt.Errorf("more than this server's limit of %d standards or unknowns", o.MaxPoints)}
	}
	if o.MaxAt > 0 && len(o.Forward) > o.MaxAt {
		return nil, nil, &Error{Kind: TooLarge, Field: "forward", Index: -1,
			Err: fmt.Errorf("%d forward evaluations exceed this server's limit of %d", len(o.Forward), o.MaxAt)}
	}
	if (d.XCovariance != nil || len(d.Shared) > 0) && len(d.Standards) > MaxCovarianceStandards {
		field := "x_covariance"
		if d.XCovariance == nil {
			field = "shared_components"
		}
		return nil, nil, &Error{Kind: TooLarge, Field: field, Index: -1, Err: fmt.Errorf(
			"correlated x errors (an x covariance or shared components) are taken for at most %d standards, not %d", MaxCovarianceStandards, len(d.Standards))}
	}
	if len(d.Shared) > MaxSharedComponents {
		return nil, nil, &Error{Kind: TooLarge, Field: "shared_components", Index: -1, Err: fmt.Errorf(
			"at most %d shared components, not %d", MaxSharedComponents, len(d.Shared))}
	}
	var c checker
	switch o.Model {
	case "", "wls", "gdr", "gmr":
	default:
		c.add("model", -1, "must be wls, gdr or gmr, not %q", o.Model)
	}
	switch o.OnInconsistent {
	case "", "report", "inflate", "refuse":
	default:
		c.add("on_inconsistent", -1, "must be report, inflate or refuse, not %q", o.OnInconsistent)
	}
	if k := o.CoverageFactor; k != nil && !(*k > 0 && *k < 1e6) {
		c.add("coverage_factor", -1, "must be positive (typically 2)")
	}
	if p := o.CoverageProbability; p != nil && !(*p > 0 && *p < 1) {
		c.add("coverage_probability", -1, "must lie strictly between 0 and 1")
	}
	if o.CoverageFactor != nil && o.CoverageProbability != nil {
		c.add("coverage_probability", -1, "give coverage_factor or coverage_probability, not both")
	}
	if p := o.Confidence; p != nil && !(*p > 0 && *p < 1) {
		c.add("confidence", -1, "must lie strictly between 0 and 1")
	}
	if m := o.MonteCarlo; m != nil {
		trials := m.Trials
		if trials == 0 {
			trials = 1_000_000
		}
		switch {
		case trials < 100 || trials > MaxMonteCarloTrials:
			c.add("monte_carlo/trials", -1, "must lie between 100 and %d", MaxMonteCarloTrials)
		case trials*len(d.Unknowns) > MaxMonteCarloTotal:
			return nil, nil, &Error{Kind: TooLarge, Field: "monte_carlo/trials", Index: -1, Err: fmt.Errorf(
				"%d trials for each of %d unknowns exceed this server's limit of %d trials per request", trials, len(d.Unknowns), MaxMonteCarloTotal)}
		}
	}
	ids := make([]string, len(d.Standards))
	index := map[string]int{}
	for i, s := range d.Standards {
		ids[i] = s.ID
		if s.ID == "" {
			ids[i] = fmt.Sprintf("S%d", i+1)
		}
		if j, dup := index[ids[i]]; dup {
			c.add("standards/*/id", i, "the id %q is also standard %d's", truncate(ids[i]), j+1)
		}
		index[ids[i]] = i
		if s.UY != nil && !(*s.UY > 0) {
			c.add("standards/*/uy", i, "a stated uy must be positive; leave it out to use the replicate SD")
		}
	}
	seen := map[string]bool{}
	for i, u := range d.Unknowns {
		if len(u.Y) == 0 {
			c.add("unknowns/*/y", i, "an unknown needs at least one reading")
		}
		if u.UY != nil && !(*u.UY > 0) {
			c.add("unknowns/*/uy", i, "a stated uy must be positive; leave it out to use the replicate SD")
		}
		if u.ID != "" && seen[u.ID] {
			c.add("unknowns/*/id", i, "the id %q appears twice", truncate(u.ID))
		}
		seen[u.ID] = true
	}
	var shared []eiv.SharedComponent
	for k, sc := range d.Shared {
		comp := eiv.SharedComponent{Name: sc.Name, RelativeU: sc.RelativeU}
		if len(sc.Standards) == 0 {
			c.add("shared_components/*/standards", k, "name the standards that share the component")
		}
		for j, id := range sc.Standards {
			i, ok := index[id]
			if !ok {
				c.add(fmt.Sprintf("shared_components/*/standards/%d", j), k, "no standard has the id %q", truncate(id))
				continue
			}
			comp.Members = append(comp.Members, i)
		}
		shared = append(shared, comp)
	}
	if err := c.err(); err != nil {
		return nil, nil, err
	}
	return ids, shared, nil
}

// calError classifies an error of the calibration engine. Field is a
// slash path into the request in which "*" stands for Index.
func calError(err error) error {
	var ie *eiv.InputError
	var oe *eiv.OptionError
	var inc *eiv.InconsistentError
	switch {
	case errors.As(err, &ie):
		kind := Invalid
		if errors.Is(err, eiv.ErrDegenerate) {
			kind = Unfittable
		}
		field := ie.Part
		if ie.Index >= 0 {
			field += "/*"
		}
		switch {
		case ie.Part == "x_covariance" && ie.Col >= 0:
			field += fmt.Sprintf("/%d", ie.Col)
		case ie.Part == "shared_components" && ie.Field == "members":
			field += "/standards"
			if ie.Col >= 0 {
				field += fmt.Sprintf("/%d", ie.Col)
			}
		case ie.Field != "":
			field += "/" + ie.Field
		}
		return &Error{Kind: kind, Field: field, Index: ie.Index, Err: err}
	case errors.As(err, &inc):
		return &Error{Kind: Unfittable, Field: "on_inconsistent", Index: -1, Err: err}
	case errors.As(err, &oe):
		field := oe.Option
		if field == "trials" {
			field = "monte_carlo/trials"
		}
		return &Error{Kind: Invalid, Field: field, Index: -1, Err: err}
	case errors.Is(err, eiv.ErrTooFewPoints), errors.Is(err, eiv.ErrZeroSlope),
		errors.Is(err, eiv.ErrDegenerate), errors.Is(err, eiv.ErrConstantX), errors.Is(err, eiv.ErrMagnitude):
		return &Error{Kind: Unfittable, Field: "standards", Index: -1, Err: err}
	}
	var ce *eiv.ConvergenceError
	if errors.As(err, &ce) {
		return &Error{Kind: Unfittable, Field: "standards", Index: -1, Err: err}
	}
	return err
}

func calWarning(unknown string, err error) CalWarning {
	var w *eiv.Warning
	if errors.As(err, &w) {
		return CalWarning{Unknown: unknown, Code: w.Code, Message: w.Message}
	}
	return CalWarning{Unknown: unknown, Code: "note", Message: err.Error()}
}
