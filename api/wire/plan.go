package wire

import (
	"bytes"
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

var planKeys = []string{"low", "high", "spread", "levels", "error_x", "error_y", "lambda", "replicates", "sizes",
	"target_power", "target", "max_n", "differences", "no_difference", "decision_levels", "allowable_bias",
	"estimator", "confidence", "trials", "seed", "unit"}

var (
	planErrorKeys      = []string{"sd", "cv_percent"}
	planReplicateKeys  = []string{"x", "y"}
	planDifferenceKeys = []string{"constant", "proportional_percent"}
)

// DecodePlanJSON reads a PlanRequest strictly, in one pass: unknown,
// repeated or case-variant keys, trailing data and values of the wrong type
// are errors naming their place, and every list (levels, sizes,
// differences, decision levels) is counted against the planner's limit as
// it is read.
func DecodePlanJSON(r io.Reader) (*PlanRequest, error) {
	req := &PlanRequest{}
	err := readDocument(r, planKeys, func(p *pointParser, key []byte) error {
		var err error
		switch k := string(key); k {
		case "low":
			err = p.optNumber("/low", &req.Low)
		case "high":
			err = p.optNumber("/high", &req.High)
		case "lambda":
			err = p.optNumber("/lambda", &req.Lambda)
		case "target_power":
			err = p.optNumber("/target_power", &req.TargetPower)
		case "confidence":
			err = p.optNumber("/confidence", &req.Confidence)
		case "spread":
			req.Spread, err = p.text("/spread", true)
		case "target":
			req.Target, err = p.text("/target", true)
		case "estimator":
			req.Estimator, err = p.text("/estimator", true)
		case "unit":
			req.Unit, err = p.text("/unit", true)
		case "max_n":
			err = p.optInt("/max_n", &req.MaxN)
		case "trials":
			err = p.optInt("/trials", &req.Trials)
		case "seed":
			req.Seed = nil
			if !p.null() {
				var v int64
				v, err = p.integer("/seed", true)
				u := uint64(v)
				req.Seed = &u
			}
		case "no_difference":
			req.NoDifference, err = p.boolean("/no_difference")
		case "levels":
			req.Levels = nil
			return p.array("/levels", eiv.PlanMaxN, KindInvalid, "levels", func(i int) error {
				v, err := p.lazyNumber(func() string { return fmt.Sprintf("/levels/%d", i) })
				req.Levels = append(req.Levels, v)
				return err
			})
		case "sizes":
			req.Sizes = nil
			return p.array("/sizes", eiv.PlanMaxSizes, KindInvalid, "sizes", func(i int) error {
				v, err := p.integer(fmt.Sprintf("/sizes/%d", i), false)
				req.Sizes = append(req.Sizes, int(v))
				return err
			})
		case "differences":
			req.Differences = nil
			return p.array("/differences", eiv.PlanMaxScenarios, KindInvalid, "differences", func(i int) error {
				d, err := p.planDifference(fmt.Sprintf("/differences/%d", i))
				req.Differences = append(req.Differences, d)
				return err
			})
		case "decision_levels":
			req.DecisionLevels = nil
			return p.array("/decision_levels", eiv.PlanMaxDecisions, KindInvalid, "decision levels", func(i int) error {
				l, err := p.decisionLevel(fmt.Sprintf("/decision_levels/%d", i))
				req.DecisionLevels = append(req.DecisionLevels, l)
				return err
			})
		case "allowable_bias":
			req.AllowableBias, err = p.allowable("/allowable_bias")
		case "error_x", "error_y":
			var e *PlanError
			e, err = p.planError("/" + k)
			if k == "error_x" {
				req.ErrorX = e
			} else {
				req.ErrorY = e
			}
		case "replicates":
			req.Replicates = nil
			if !p.null() {
				req.Replicates = &PlanReplicates{}
				err = p.object("/replicates", func(key []byte) error {
					switch string(key) {
					case "x":
						return p.optInt("/replicates/x", &req.Replicates.X)
					case "y":
						return p.optInt("/replicates/y", &req.Replicates.Y)
					}
					return p.unknownKey("/replicates", key, planReplicateKeys)
				}, planReplicateKeys)
			}
		default:
			return p.unknownKey("", key, planKeys)
		}
		return err
	})
	if err != nil {
		return nil, err
	}
	return req, nil
}

// planError reads {"sd", "cv_percent"} or null.
func (p *pointParser) planError(ptr string) (*PlanError, error) {
	if p.null() {
		return nil, nil
	}
	e := &PlanError{}
	return e, p.object(ptr, func(key []byte) error {
		switch string(key) {
		case "sd":
			return p.zeroNumber(ptr+"/sd", &e.SD)
		case "cv_percent":
			return p.zeroNumber(ptr+"/cv_percent", &e.CVPercent)
		}
		return p.unknownKey(ptr, key, planErrorKeys)
	}, planErrorKeys)
}

// planDifference reads {"constant", "proportional_percent"}.
func (p *pointParser) planDifference(ptr string) (PlanDifference, error) {
	var d PlanDifference
	return d, p.object(ptr, func(key []byte) error {
		switch string(key) {
		case "constant":
			return p.zeroNumber(ptr+"/constant", &d.Constant)
		case "proportional_percent":
			return p.zeroNumber(ptr+"/proportional_percent", &d.ProportionalPercent)
		}
		return p.unknownKey(ptr, key, planDifferenceKeys)
	}, planDifferenceKeys)
}

// zeroNumber reads a number into dst; null leaves dst as it is (as
// encoding/json does for a plain number field).
func (p *pointParser) zeroNumber(ptr string, dst *float64) error {
	if p.null() {
		return nil
	}
	v, err := p.number(ptr)
	*dst = v
	return err
}

// optInt reads an integer in the int range into dst; null leaves dst as it
// is.
func (p *pointParser) optInt(ptr string, dst *int) error {
	if p.null() {
		return nil
	}
	v, err := p.integer(ptr, false)
	*dst = int(v)
	return err
}

// boolean reads true or false (null: false).
func (p *pointParser) boolean(ptr string) (bool, error) {
	switch {
	case p.null():
		return false, nil
	case bytes.HasPrefix(p.b[p.pos:], []byte("true")):
		p.pos += 4
		return true, nil
	case bytes.HasPrefix(p.b[p.pos:], []byte("false")):
		p.pos += 5
		return false, nil
	}
	if _, err := p.skip(0); err != nil {
		return false, err
	}
	return false, Invalid(ptr, "must be true or false")
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
