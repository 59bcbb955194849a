package study

import (
	"errors"
	"fmt"

	"eivfit/eiv"
)

// AgreementForms are the parts of a comparison's agreement that go beyond
// the constant limits: the limits for single measurements from the
// replicates, the form of limits the data call for, the concordance and
// each method's repeatability. A part that cannot be had on the data is
// nil (with a warning where the reason is not obvious).
type AgreementForms struct {
	// Single is the limits for single measurements when samples were
	// measured in replicate; nil without replicates. Its Design is the
	// true value constant within a sample (Bland & Altman 1999, §5.2) or,
	// when the replicates carry runs that pair them, changing between runs
	// (Bland & Altman 2007, §3; 1999, §5.3). DesignReason says why.
	Single       *eiv.ReplicateAgreement
	DesignReason string
	// Pairs is the number of x–y pairs formed by equal run labels and
	// Unpaired the number of samples left out of the changing-value limits
	// for want of a pair (both zero without runs).
	Pairs, Unpaired int
	// Form says which form of limits the data call for (constant, ratio
	// or regression-based) and why.
	Form *eiv.LimitsChoice
	// Regression is the regression-based limits (Bland & Altman 1999,
	// §3.2); Ratio the ratio limits (every value positive only).
	Regression *eiv.RegressionLimits
	Ratio      *eiv.RatioLimits
	// Concordance is Lin's concordance correlation coefficient of the
	// samples' values (n ≥ 4).
	Concordance *eiv.Concordance
	// RepeatabilityX and RepeatabilityY are each method's within-sample SD
	// with its χ² interval and repeatability coefficient (at least two
	// samples with replicates of that method).
	RepeatabilityX, RepeatabilityY *eiv.RepeatabilityResult
	// Reading says, in a sentence or two, which limits to use.
	Reading string
}

// forms adds the replicate-aware limits, the form of limits, the
// concordance and the repeatabilities to a.
func (a *Agreement) forms(st *reduced, conf float64, positive bool, unit string, warnings *[]Warning) {
	a.Describes = eiv.LimitsSingle
	ao := &eiv.AgreementOptions{Confidence: conf}
	note := func(what string, err error) {
		var w string
		switch {
		case errors.Is(err, eiv.ErrTooFewPoints):
			w = "too few samples"
		case errors.Is(err, eiv.ErrDegenerate), errors.Is(err, eiv.ErrConstantX):
			w = "the data are degenerate for it"
		default:
			w = "the data do not allow it"
		}
		*warnings = append(*warnings, Warning{Code: "agreement_part_skipped", Message: fmt.Sprintf("%s is not given: %s", what, w)})
	}
	if st.replicates {
		a.Describes = eiv.LimitsMeans
		r, err := a.pairedLimits(st, ao, warnings)
		if r == nil && err == nil {
			subj := make([]eiv.Subject, len(st.repX))
			for i := range subj {
				subj[i] = eiv.Subject{X: st.repX[i], Y: st.repY[i]}
			}
			r, err = eiv.ReplicateLimits(subj, ao)
		}
		if err == nil {
			a.Single = r
			for _, w := range r.Warnings {
				*warnings = append(*warnings, warning("agreement", w))
			}
		} else {
			a.DesignReason = ""
			note("the limits of agreement for single measurements", err)
		}
		if r, err := eiv.MethodRepeatability(st.repX, ao); err == nil {
			a.RepeatabilityX = r
		}
		if r, err := eiv.MethodRepeatability(st.repY, ao); err == nil {
			a.RepeatabilityY = r
		}
	}
	if c, err := eiv.ChooseLimits(st.X, st.Y); err == nil {
		a.Form = c
	}
	if r, err := eiv.RegressionBasedLimits(st.X, st.Y, ao); err == nil {
		a.Regression = r
		for _, w := range r.Warnings {
			*warnings = append(*warnings, warning("agreement", w))
		}
	}
	if positive {
		if r, err := eiv.RatioBasedLimits(st.X, st.Y, ao); err == nil {
			a.Ratio = r
		}
	}
	if c, err := eiv.LinCCC(st.X, st.Y, &eiv.Options{Confidence: conf}); err == nil {
		a.Concordance = c
	} else {
		note("Lin's concordance correlation coefficient", err)
	}
	a.Reading = a.reading(unit)
}

// pairedLimits computes the limits for a true value changing between runs
// when the samples' replicates carry runs that pair them (Bland & Altman
// 2007, §3) and sets DesignReason; without usable pairs it returns nil and
// no error, with the reason the constant design is used instead.
func (a *Agreement) pairedLimits(st *reduced, ao *eiv.AgreementOptions, warnings *[]Warning) (*eiv.ReplicateAgreement, error) {
	const constant = "the true value is taken as constant within a sample (Bland & Altman 1999, §5.2)"
	if st.pairs == nil {
		a.DesignReason = "the replicates carry no run or time: " + constant
		return nil, nil
	}
	var subj []eiv.Subject
	multi := false
	for _, p := range st.pairs {
		a.Pairs += len(p.X)
		if len(p.X) == 0 {
			a.Unpaired++
			continue
		}
		multi = multi || len(p.X) > 1
		subj = append(subj, p)
	}
	if !multi {
		a.DesignReason = "the runs pair no sample's replicates more than once, so a change of the true value between runs cannot be told from error: " + constant
		return nil, nil
	}
	a.DesignReason = fmt.Sprintf("the replicates carry runs that pair them (%d pairs), so the true value may change between runs: the limits follow Bland & Altman (2007, §3; 1999, §5.3)", a.Pairs)
	if a.Unpaired > 0 {
		*warnings = append(*warnings, Warning{Code: "samples_without_pair",
			Message: fmt.Sprintf("%d samples have no x and y replicate with the same run and are left out of the limits for single measurements", a.Unpaired)})
	}
	return eiv.PairedReplicateLimits(subj, ao)
}

// reading says which limits describe what and which form the data call for.
func (a *Agreement) reading(unit string) string {
	u := ""
	if unit != "" {
		u = " " + unit
	}
	var s string
	switch {
	case a.Single != nil && a.Single.Design == eiv.DesignVarying:
		s = fmt.Sprintf("For single measurements the limits of agreement are %.4g to %.4g%s (the true value changing between runs: the replicates are paired by run, Bland & Altman 2007 §3); limits on the means of the replicates (%.4g to %.4g) describe means only.",
			a.Single.Lower.Value, a.Single.Upper.Value, u, a.Lower.Value, a.Upper.Value)
	case a.Single != nil:
		s = fmt.Sprintf("For single measurements the limits of agreement are %.4g to %.4g%s (the within-sample variation added back, Bland & Altman 1999 §5.2); limits on the means of the replicates (%.4g to %.4g) describe means only.",
			a.Single.Lower.Value, a.Single.Upper.Value, u, a.Lower.Value, a.Upper.Value)
	case a.Describes == eiv.LimitsMeans:
		s = fmt.Sprintf("The limits of agreement (%.4g to %.4g%s) describe the means of the replicates, not single measurements.", a.Lower.Value, a.Upper.Value, u)
	default:
		s = fmt.Sprintf("The limits of agreement (%.4g to %.4g%s) describe single measurements.", a.Lower.Value, a.Upper.Value, u)
	}
	if f := a.Form; f != nil {
		s += " Form of the limits: " + f.Reason + "."
		switch {
		case f.Form == eiv.FormRatio && a.Ratio != nil:
			s += fmt.Sprintf(" y/x = %.4g, limits %.4g to %.4g.", a.Ratio.Ratio.Value, a.Ratio.Lower.Value, a.Ratio.Upper.Value)
		case f.Form == eiv.FormRegression && a.Regression != nil:
			r := a.Regression
			s += fmt.Sprintf(" Bias %.4g %+.4g·A, limits ± %.3g·(%.4g %+.4g·A), A the mean of x and y, for A in %.4g to %.4g.",
				r.Bias.Intercept.Value, r.Bias.Slope.Value, r.Multiplier, r.Spread.Intercept.Value, r.Spread.Slope.Value, r.MinLevel, r.MaxLevel)
		}
	}
	return s
}
