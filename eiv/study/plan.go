package study

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"

	"eivfit/eiv"
)

// PlanOptions describe a planned method-comparison study as a client
// states it: CVs, proportional differences and allowable biases in
// percent. Plan maps them to eiv.PlanOptions; the defaults are eiv's
// unless stated here.
type PlanOptions struct {
	// Low and High bound the measuring range (with Spread "levels" they
	// default to the levels' extremes).
	Low, High *float64
	// Spread is "uniform" (the default), "log_uniform" or "levels" (the
	// samples cycle through Levels).
	Spread string
	Levels []float64
	// ErrorX is the comparative method's random error (required); ErrorY
	// the candidate's, or Lambda, the ratio of y's error variance to x's.
	ErrorX, ErrorY *PlanError
	Lambda         *float64
	// ReplicatesX and ReplicatesY are the measurements per sample (0: 1).
	ReplicatesX, ReplicatesY int
	// Sizes are the candidate numbers of samples; or TargetPower (with
	// Target: slope, intercept or verdict) asks for the smallest n, up to MaxN.
	Sizes       []int
	TargetPower *float64
	Target      string
	MaxN        int
	// Differences are the true systematic differences to plan against;
	// NoDifference adds "no difference" as the first scenario (the only
	// one when Differences is empty).
	Differences  []PlanDifference
	NoDifference bool
	// DecisionLevels with their allowable bias; Allowable applies to every
	// level without its own.
	DecisionLevels []DecisionLevel
	Allowable      *Allowable
	// Estimator is "deming" (the default), "weighted_deming" or "passing_bablok".
	Estimator  string
	Confidence *float64
	// Trials per size and scenario (0: 1000); Seed of the simulation (nil: 1,
	// so that a plan repeats exactly).
	Trials int
	Seed   *uint64
	// Unit of the measurand, for the sentence.
	Unit string
	Settings
}

// PlanError is one method's random error: an SD in the units of the
// measurand and/or a CV in percent, combined as √(SD² + (CV·level)²).
type PlanError struct {
	SD        float64
	CVPercent float64
}

// PlanDifference is a true systematic difference of y from x: Constant
// plus ProportionalPercent % of the level.
type PlanDifference struct {
	Constant            float64
	ProportionalPercent float64
}

// PlanMaxWork bounds the simulated sample draws of one plan: trials × the
// sizes' sum × the scenarios (for a target power, the largest size stands
// for the search). A plan beyond it is too large.
const PlanMaxWork = 400_000_000

// Plan checks the options, maps them to eiv.PlanOptions and simulates the
// plan. Errors are *Error (invalid options, a plan too large) or ctx's error.
func Plan(ctx context.Context, o *PlanOptions) (*eiv.PlanResult, error) {
	if o == nil {
		o = &PlanOptions{}
	}
	eo := &eiv.PlanOptions{Spread: eiv.Spread(o.Spread), Levels: o.Levels, ReplicatesX: o.ReplicatesX, ReplicatesY: o.ReplicatesY,
		Sizes: o.Sizes, Target: eiv.PlanTarget(o.Target), MaxN: o.MaxN, Estimator: eiv.Method(o.Estimator),
		Trials: o.Trials, Seed: 1, Workers: o.Workers, Units: o.Unit}
	if o.Low != nil {
		eo.Low = *o.Low
	}
	if o.High != nil {
		eo.High = *o.High
	}
	if o.ErrorX == nil {
		return nil, &Error{Kind: Invalid, Field: "error_x", Index: -1, Err: errors.New("the comparative method's error (sd and/or cv_percent) is required")}
	}
	eo.ErrorX = eiv.ErrorSpec{SD: o.ErrorX.SD, CV: o.ErrorX.CVPercent / 100}
	if o.ErrorY != nil {
		eo.ErrorY = &eiv.ErrorSpec{SD: o.ErrorY.SD, CV: o.ErrorY.CVPercent / 100}
	}
	if o.Lambda != nil {
		eo.Lambda = *o.Lambda
		if !(*o.Lambda > 0) {
			return nil, &Error{Kind: Invalid, Field: "lambda", Index: -1, Err: errors.New("lambda must be a finite number > 0")}
		}
	}
	if o.TargetPower != nil {
		eo.TargetPower = *o.TargetPower
		if eo.TargetPower == 0 {
			return nil, &Error{Kind: Invalid, Field: "target_power", Index: -1, Err: errors.New("must lie strictly between 0 and 1")}
		}
	}
	if o.Confidence != nil {
		eo.Confidence = *o.Confidence
		if err := CheckConfidence(*o.Confidence); err != nil {
			return nil, &Error{Kind: Invalid, Field: "confidence", Index: -1, Err: err}
		}
	}
	if o.Seed != nil {
		eo.Seed = *o.Seed
	}
	if o.NoDifference {
		eo.Differences = append(eo.Differences, eiv.Difference{})
	}
	for _, d := range o.Differences {
		eo.Differences = append(eo.Differences, eiv.Difference{Constant: d.Constant, Proportional: d.ProportionalPercent / 100})
	}
	for k, l := range o.DecisionLevels {
		a := l.Allowable
		if a == nil {
			a = o.Allowable
		}
		if a == nil {
			return nil, &Error{Kind: Invalid, Field: "decision_levels", Index: k, Err: errors.New("the level needs an allowable bias (its own or allowable_bias)")}
		}
		dl := eiv.DecisionLevel{X: l.Level}
		if a.Absolute != nil {
			dl.Allowable = *a.Absolute
		}
		if a.Percent != nil {
			dl.AllowablePercent = *a.Percent
		}
		eo.Decisions = append(eo.Decisions, dl)
	}
	if err := planWork(eo); err != nil {
		return nil, err
	}
	res, err := eiv.Plan(ctx, eo)
	if err != nil {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		shift := 0
		if o.NoDifference {
			shift = 1 // the scenario added in front of the client's differences
		}
		return nil, planError(err, shift)
	}
	return res, nil
}

// planWork refuses a plan whose simulated draws exceed PlanMaxWork.
func planWork(eo *eiv.PlanOptions) error {
	trials := eo.Trials
	if trials <= 0 {
		trials = 1000
	}
	var n int
	for _, s := range eo.Sizes {
		n += max(s, 0)
	}
	if len(eo.Sizes) == 0 {
		n = eo.MaxN
		if n <= 0 {
			n = 2000
		}
		n *= 2 // the doubling and the bisection evaluate about twice the largest size
	}
	scen := max(len(eo.Differences), 1)
	k := max(eo.ReplicatesX, 1) + max(eo.ReplicatesY, 1)
	if w := float64(trials) * float64(n) * float64(scen) * float64(k) / 2; w > PlanMaxWork {
		return &Error{Kind: TooLarge, Field: "trials", Index: -1, Err: fmt.Errorf(
			"the plan asks for %.3g simulated samples (trials × sizes × scenarios × replicates/2), above this server's limit of %.3g; ask for fewer trials or sizes", w, float64(PlanMaxWork))}
	}
	return nil
}

// planError classifies an error of eiv.Plan: an *eiv.OptionError names
// its option as "name" or "name[i]".
func planError(err error, shift int) error {
	var oe *eiv.OptionError
	if !errors.As(err, &oe) {
		return &Error{Kind: Invalid, Field: "plan", Index: -1, Err: err}
	}
	field, index := oe.Option, -1
	if i := strings.IndexByte(field, '['); i > 0 && strings.HasSuffix(field, "]") {
		if k, err := strconv.Atoi(field[i+1 : len(field)-1]); err == nil {
			field, index = field[:i], k
		}
	}
	if field == "differences" && index >= 0 {
		index -= shift
	}
	if field == "plan" {
		field = FieldData
	}
	return &Error{Kind: Invalid, Field: field, Index: index, Err: fmt.Errorf("%s: %s", field, oe.Reason)}
}
