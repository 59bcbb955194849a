package wire

import (
	"eivfit/eiv"
	"eivfit/eiv/study"
)

// SingleLimitsOut is the limits of agreement for single measurements from
// replicates: for a true value constant within a sample (Bland & Altman
// 1999, §5.2) or, when runs pair the replicates, changing between runs
// (Bland & Altman 2007, §3).
type SingleLimitsOut struct {
	Design string `json:"design"` // "true_value_constant" or "true_value_varying"
	// DesignReason says why the limits take that design.
	DesignReason      string    `json:"design_reason"`
	Describes         string    `json:"describes"` // "single_measurements"
	Subjects          int       `json:"subjects"`
	MeanDifference    Interval  `json:"mean_difference"`
	SD                float64   `json:"sd"`
	Multiplier        float64   `json:"multiplier"`
	LimitsOfAgreement LimitsOut `json:"limits_of_agreement"`
	// Constant design: SDOfMeans is the SD of the samples' differences of
	// means; WithinXSD and WithinYSD the pooled within-sample SDs added
	// back; MeansLimits the limits the means alone give, for comparison.
	SDOfMeans   *float64 `json:"sd_of_means,omitempty"`
	WithinXSD   *float64 `json:"within_x_sd,omitempty"`
	WithinYSD   *float64 `json:"within_y_sd,omitempty"`
	MeansLimits *Bounds  `json:"means_limits,omitempty"`
	// Changing design: Pairs is the number of x–y pairs formed by equal
	// run labels, UnpairedSamples the samples without one (left out),
	// WithinSD the within-sample SD of the paired differences and
	// BetweenSD the between-sample SD of their true means.
	Pairs           *int     `json:"pairs,omitempty"`
	UnpairedSamples *int     `json:"unpaired_samples,omitempty"`
	WithinSD        *float64 `json:"within_sd,omitempty"`
	BetweenSD       *float64 `json:"between_sd,omitempty"`
}

// LimitsFormOut says which form of limits the data call for.
type LimitsFormOut struct {
	Form          string  `json:"form"` // constant, ratio or regression
	ProportionalP float64 `json:"proportional_p"`
	SpreadP       float64 `json:"spread_p"`
	// LogProportionalP and LogSpreadP are the same checks on the log
	// scale (present when every value is positive).
	LogProportionalP *float64 `json:"log_proportional_p,omitempty"`
	LogSpreadP       *float64 `json:"log_spread_p,omitempty"`
	Alpha            float64  `json:"alpha"`
	Reason           string   `json:"reason"`
}

// LineOut is a fitted line a + b·A with the p-value of b = 0.
type LineOut struct {
	Intercept Param   `json:"intercept"`
	Slope     Param   `json:"slope"`
	PValue    float64 `json:"slope_p_value"`
}

// RegressionLimitsOut is the regression-based limits (Bland & Altman 1999,
// §3.2): bias b0 + b1·A, limits bias ∓ multiplier·(c0 + c1·A), A the mean
// of x and y, for A from min_level to max_level.
type RegressionLimitsOut struct {
	Bias       LineOut `json:"bias"`
	Spread     LineOut `json:"spread"`
	Multiplier float64 `json:"multiplier"`
	MinLevel   float64 `json:"min_level"`
	MaxLevel   float64 `json:"max_level"`
}

// RatioLimitsOut is the limits as ratios y/x, back-transformed from the
// log scale.
type RatioLimitsOut struct {
	Ratio Interval `json:"ratio"`
	Lower Interval `json:"lower"`
	Upper Interval `json:"upper"`
}

// ConcordanceOut is Lin's concordance correlation coefficient.
type ConcordanceOut struct {
	CCC           Interval `json:"ccc"`
	Precision     float64  `json:"precision"` // Pearson's ρ
	Accuracy      float64  `json:"accuracy"`  // C_b
	LocationShift float64  `json:"location_shift"`
	ScaleShift    float64  `json:"scale_shift"`
}

// MethodRepeatabilityOut is one method's repeatability from its replicates.
type MethodRepeatabilityOut struct {
	Subjects    int      `json:"subjects"`
	DF          int      `json:"df"`
	WithinSD    Interval `json:"within_sd"`
	Coefficient Interval `json:"coefficient"`
	Multiplier  float64  `json:"multiplier"`
}

// RepeatabilityPair holds each method's repeatability.
type RepeatabilityPair struct {
	X *MethodRepeatabilityOut `json:"x,omitempty"`
	Y *MethodRepeatabilityOut `json:"y,omitempty"`
}

// OutcomeOut sums up the recommended fit's verdicts.
type OutcomeOut struct {
	Method       string `json:"method"`
	Levels       int    `json:"levels"`
	Within       int    `json:"within"`
	Exceeds      int    `json:"exceeds"`
	Inconclusive int    `json:"inconclusive"`
	Text         string `json:"text"`
}

// RobustnessOut says whether each level's verdict holds under every fit
// the data allow and without the flagged outliers.
type RobustnessOut struct {
	Fits            []string         `json:"fits"`
	WithoutOutliers []string         `json:"without_outliers"`
	Levels          []RobustLevelOut `json:"levels"`
	Reading         string           `json:"reading"`
}

// RobustLevelOut is the verdicts at one level.
type RobustLevelOut struct {
	Level    float64            `json:"level"`
	Verdicts []RobustVerdictOut `json:"verdicts"`
	Holds    bool               `json:"holds"`
	Reading  string             `json:"reading"`
}

// RobustVerdictOut is one fit's verdict, on all samples or without the outliers.
type RobustVerdictOut struct {
	Method          string `json:"method"`
	WithoutOutliers bool   `json:"without_outliers"`
	Verdict         string `json:"verdict"`
}

// agreementForms fills the parts of the agreement beyond the constant limits.
func agreementForms(out *AgreementOut, a *study.Agreement) {
	out.Describes = string(a.Describes)
	out.Reading = a.Reading
	if s := a.Single; s != nil {
		so := &SingleLimitsOut{Design: string(s.Design), DesignReason: a.DesignReason, Describes: string(s.Describes), Subjects: s.Subjects,
			MeanDifference: interval(s.MeanDifference), SD: s.SD, Multiplier: s.Multiplier,
			LimitsOfAgreement: LimitsOut{Lower: interval(s.Lower), Upper: interval(s.Upper)}}
		if s.Design == eiv.DesignVarying {
			so.Pairs, so.UnpairedSamples, so.WithinSD, so.BetweenSD = &a.Pairs, &a.Unpaired, ptr(s.WithinSD), ptr(s.BetweenSD)
		} else {
			so.SDOfMeans, so.WithinXSD, so.WithinYSD = ptr(s.SDOfMeans), ptr(s.WithinX), ptr(s.WithinY)
			so.MeansLimits = &Bounds{Lower: s.MeansLower, Upper: s.MeansUpper}
		}
		out.SingleMeasurements = so
	}
	if f := a.Form; f != nil {
		fo := &LimitsFormOut{Form: string(f.Form), ProportionalP: f.ProportionalP, SpreadP: f.SpreadP, Alpha: f.Alpha, Reason: f.Reason}
		if f.LogChecked {
			fo.LogProportionalP, fo.LogSpreadP = ptr(f.LogProportionalP), ptr(f.LogSpreadP)
		}
		out.LimitsForm = fo
	}
	if r := a.Regression; r != nil {
		out.RegressionLimits = &RegressionLimitsOut{
			Bias:       LineOut{Intercept: param(r.Bias.Intercept), Slope: param(r.Bias.Slope), PValue: r.BiasSlopeP},
			Spread:     LineOut{Intercept: param(r.Spread.Intercept), Slope: param(r.Spread.Slope), PValue: r.SpreadSlopeP},
			Multiplier: r.Multiplier, MinLevel: r.MinLevel, MaxLevel: r.MaxLevel}
	}
	if r := a.Ratio; r != nil {
		out.RatioLimits = &RatioLimitsOut{Ratio: interval(r.Ratio), Lower: interval(r.Lower), Upper: interval(r.Upper)}
	}
	if c := a.Concordance; c != nil {
		out.Concordance = &ConcordanceOut{CCC: interval(c.CCC), Precision: c.Precision, Accuracy: c.Accuracy,
			LocationShift: c.LocationShift, ScaleShift: c.ScaleShift}
	}
	if a.RepeatabilityX != nil || a.RepeatabilityY != nil {
		out.Repeatability = &RepeatabilityPair{X: methodRepeatability(a.RepeatabilityX), Y: methodRepeatability(a.RepeatabilityY)}
	}
}

func methodRepeatability(r *eiv.RepeatabilityResult) *MethodRepeatabilityOut {
	if r == nil {
		return nil
	}
	return &MethodRepeatabilityOut{Subjects: r.Subjects, DF: r.DF, WithinSD: interval(r.WithinSD),
		Coefficient: interval(r.Coefficient), Multiplier: r.Multiplier}
}

func outcomeOut(o *study.Outcome) *OutcomeOut {
	if o == nil {
		return nil
	}
	return &OutcomeOut{Method: o.Method, Levels: o.Levels, Within: o.Within, Exceeds: o.Exceeds, Inconclusive: o.Inconclusive, Text: o.Text}
}

func robustnessOut(r *study.Robustness) *RobustnessOut {
	if r == nil {
		return nil
	}
	out := &RobustnessOut{Fits: r.Fits, WithoutOutliers: r.WithoutOutliers, Levels: []RobustLevelOut{}, Reading: r.Reading}
	for _, l := range r.Levels {
		lo := RobustLevelOut{Level: l.Level, Holds: l.Holds, Reading: l.Reading, Verdicts: []RobustVerdictOut{}}
		for _, v := range l.Verdicts {
			lo.Verdicts = append(lo.Verdicts, RobustVerdictOut(v))
		}
		out.Levels = append(out.Levels, lo)
	}
	return out
}
