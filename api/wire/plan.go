package wire

import (
	"encoding/json"
	"fmt"
	"io"

	"eivfit/eiv"
	"eivfit/eiv/study"
)

// PlanRequest is the body of POST /v1/plan and the input of `eivfit plan`:
// a planned method-comparison study to simulate.
type PlanRequest struct {
	// Low and High bound the measuring range; Spread is uniform (the
	// default), log_uniform or levels (then Levels are the target levels).
	Low    *float64  `json:"low,omitempty"`
	High   *float64  `json:"high,omitempty"`
	Spread string    `json:"spread,omitempty"`
	Levels []float64 `json:"levels,omitempty"`
	// ErrorX is the comparative method's random error (required); ErrorY
	// the candidate's, or Lambda the ratio of their error variances.
	ErrorX *PlanError `json:"error_x,omitempty"`
	ErrorY *PlanError `json:"error_y,omitempty"`
	Lambda *float64   `json:"lambda,omitempty"`
	// Replicates are the measurements per sample by each method (default 1).
	Replicates *PlanReplicates `json:"replicates,omitempty"`
	// Sizes are the candidate numbers of samples; or TargetPower with
	// Target (slope, intercept or verdict) asks for the smallest n up to MaxN.
	Sizes       []int    `json:"sizes,omitempty"`
	TargetPower *float64 `json:"target_power,omitempty"`
	Target      string   `json:"target,omitempty"`
	MaxN        int      `json:"max_n,omitempty"`
	// Differences are the true systematic differences to plan against;
	// NoDifference adds "no difference" in front (the only scenario when
	// there are no differences).
	Differences  []PlanDifference `json:"differences,omitempty"`
	NoDifference bool             `json:"no_difference,omitempty"`
	// DecisionLevels are numbers or {"level", "allowable_bias"};
	// AllowableBias applies to every level without its own.
	DecisionLevels []DecisionLevel `json:"decision_levels,omitempty"`
	AllowableBias  *Allowable      `json:"allowable_bias,omitempty"`
	// Estimator is deming (the default), weighted_deming or passing_bablok.
	Estimator  string   `json:"estimator,omitempty"`
	Confidence *float64 `json:"confidence,omitempty"`
	Trials     int      `json:"trials,omitempty"`
	Seed       *uint64  `json:"seed,omitempty"`
	Unit       string   `json:"unit,omitempty"`
}

// PlanError is a method's random error: sd (units of the measurand) and/or
// cv_percent, combined as √(sd² + (cv·level)²).
type PlanError struct {
	SD        float64 `json:"sd,omitempty"`
	CVPercent float64 `json:"cv_percent,omitempty"`
}

// PlanReplicates are the measurements per sample by each method.
type PlanReplicates struct {
	X int `json:"x,omitempty"`
	Y int `json:"y,omitempty"`
}

// PlanDifference is a true difference of y from x: constant plus
// proportional_percent % of the level.
type PlanDifference struct {
	Constant            float64 `json:"constant"`
	ProportionalPercent float64 `json:"proportional_percent"`
}

// planJSON decodes the levels and allowable bias entry by entry, so that
// their errors name their place.
type planJSON struct {
	PlanRequest
	DecisionLevels []json.RawMessage `json:"decision_levels"`
	AllowableBias  json.RawMessage   `json:"allowable_bias"`
}

// DecodePlanJSON reads a PlanRequest strictly: unknown fields, trailing
// data and values of the wrong type are errors naming their place.
func DecodePlanJSON(r io.Reader) (*PlanRequest, error) {
	var w planJSON
	if err := decodeStrict(r, &w); err != nil {
		return nil, err
	}
	req := w.PlanRequest
	req.DecisionLevels, req.AllowableBias = nil, nil
	for i, raw := range w.DecisionLevels {
		var l DecisionLevel
		if err := l.UnmarshalJSON(raw); err != nil {
			return nil, prefixedErr(err, fmt.Sprintf("/decision_levels/%d", i))
		}
		req.DecisionLevels = append(req.DecisionLevels, l)
	}
	if len(w.AllowableBias) > 0 && string(w.AllowableBias) != "null" {
		var a Allowable
		if err := a.UnmarshalJSON(w.AllowableBias); err != nil {
			return nil, prefixedErr(err, "/allowable_bias")
		}
		req.AllowableBias = &a
	}
	return &req, nil
}

// Options are the plan's options with the server's settings.
func (req *PlanRequest) Options(set study.Settings) *study.PlanOptions {
	o := &study.PlanOptions{Low: req.Low, High: req.High, Spread: req.Spread, Levels: req.Levels, Lambda: req.Lambda,
		Sizes: req.Sizes, TargetPower: req.TargetPower, Target: req.Target, MaxN: req.MaxN, NoDifference: req.NoDifference,
		Allowable: req.AllowableBias.allowable(), Estimator: req.Estimator, Confidence: req.Confidence, Trials: req.Trials,
		Seed: req.Seed, Unit: req.Unit, Settings: set}
	if e := req.ErrorX; e != nil {
		o.ErrorX = &study.PlanError{SD: e.SD, CVPercent: e.CVPercent}
	}
	if e := req.ErrorY; e != nil {
		o.ErrorY = &study.PlanError{SD: e.SD, CVPercent: e.CVPercent}
	}
	if r := req.Replicates; r != nil {
		o.ReplicatesX, o.ReplicatesY = r.X, r.Y
	}
	for _, d := range req.Differences {
		o.Differences = append(o.Differences, study.PlanDifference(d))
	}
	for _, l := range req.DecisionLevels {
		o.DecisionLevels = append(o.DecisionLevels, study.DecisionLevel{Level: l.Level, Allowable: l.AllowableBias.allowable()})
	}
	return o
}

// Source locates the plan's errors as JSON pointers.
func (req *PlanRequest) Source() *Source { return &Source{Form: FormJSON} }

// PlanResponse is the answer of POST /v1/plan and the JSON output of
// `eivfit plan`: the same bytes for the same request.
type PlanResponse struct {
	Estimator  string  `json:"estimator"`
	Confidence float64 `json:"confidence"`
	Trials     int     `json:"trials"`
	Seed       uint64  `json:"seed"`
	// Lambda is the error-variance ratio of the means given to the Deming
	// fits (absent for Passing–Bablok).
	Lambda *float64 `json:"lambda,omitempty"`
	Unit   string   `json:"unit,omitempty"`
	// Target, TargetPower and SmallestN answer a target power (SmallestN
	// absent when no evaluated size met it).
	Target      string         `json:"target,omitempty"`
	TargetPower *float64       `json:"target_power,omitempty"`
	SmallestN   *int           `json:"smallest_n,omitempty"`
	Scenarios   []PlanScenario `json:"scenarios"`
	Sentence    string         `json:"sentence"`
	Warnings    []Warning      `json:"warnings"`
}

// PlanScenario is one true difference with its outcome per size.
type PlanScenario struct {
	Difference PlanDifference `json:"difference"`
	Sizes      []PlanSize     `json:"sizes"`
}

// PlanSize is the simulated outcome of the trials at n samples: the share
// of slope intervals excluding 1 and of intercept intervals excluding 0
// (the power; under no difference the false-positive rate), their
// coverage, and the outcome at each decision level.
type PlanSize struct {
	N                 int             `json:"n"`
	Failed            int             `json:"failed"`
	SlopePower        float64         `json:"slope_power"`
	InterceptPower    float64         `json:"intercept_power"`
	SlopeCoverage     float64         `json:"slope_coverage"`
	InterceptCoverage float64         `json:"intercept_coverage"`
	Levels            []PlanLevelSize `json:"levels"`
}

// PlanLevelSize is the outcome at one decision level: the share of each
// verdict, the mean half-width of the bias interval (with the SD of the
// half-widths) and the share of intervals covering the true bias.
type PlanLevelSize struct {
	Level        float64 `json:"level"`
	Limit        float64 `json:"limit"`
	TrueBias     float64 `json:"true_bias"`
	Within       float64 `json:"within"`
	Exceeds      float64 `json:"exceeds"`
	Inconclusive float64 `json:"inconclusive"`
	HalfWidth    float64 `json:"half_width"`
	HalfWidthSD  float64 `json:"half_width_sd"`
	Coverage     float64 `json:"coverage"`
}

// NewPlanResponse is the answer to a plan.
func NewPlanResponse(req *PlanRequest, r *eiv.PlanResult) *PlanResponse {
	out := &PlanResponse{Estimator: string(r.Estimator), Confidence: r.Confidence, Trials: r.Trials, Seed: r.Seed, Unit: req.Unit,
		Scenarios: []PlanScenario{}, Sentence: r.Sentence, Warnings: []Warning{}}
	if r.Lambda > 0 {
		out.Lambda = ptr(r.Lambda)
	}
	if r.TargetPower > 0 {
		out.Target, out.TargetPower = string(r.Target), ptr(r.TargetPower)
		if r.SmallestN > 0 {
			out.SmallestN = ptr(r.SmallestN)
		}
	}
	for _, sc := range r.Scenarios {
		ps := PlanScenario{Difference: PlanDifference{Constant: sc.Difference.Constant, ProportionalPercent: 100 * sc.Difference.Proportional},
			Sizes: []PlanSize{}}
		for _, s := range sc.Sizes {
			o := PlanSize{N: s.N, Failed: s.Failed, SlopePower: s.SlopePower, InterceptPower: s.InterceptPower,
				SlopeCoverage: s.SlopeCoverage, InterceptCoverage: s.InterceptCoverage, Levels: []PlanLevelSize{}}
			for _, l := range s.Levels {
				o.Levels = append(o.Levels, PlanLevelSize{Level: l.X, Limit: l.Limit, TrueBias: l.TrueBias, Within: l.Within,
					Exceeds: l.Exceeds, Inconclusive: l.Inconclusive, HalfWidth: l.HalfWidth, HalfWidthSD: l.HalfWidthSD, Coverage: l.Coverage})
			}
			ps.Sizes = append(ps.Sizes, o)
		}
		out.Scenarios = append(out.Scenarios, ps)
	}
	for _, w := range r.Warnings {
		out.Warnings = append(out.Warnings, Warning(warningOf(w)))
	}
	return out
}

// warningOf is an engine warning in the study's form.
func warningOf(err error) study.Warning {
	if w, ok := err.(*eiv.Warning); ok {
		return study.Warning{Code: w.Code, Message: w.Message}
	}
	return study.Warning{Code: "note", Message: err.Error()}
}
