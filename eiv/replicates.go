package eiv

import (
	"fmt"
	"math"
)

// ErrorModel describes how a method's error SD behaves over the level.
type ErrorModel string

const (
	ErrorConstant     ErrorModel = "constant"
	ErrorProportional ErrorModel = "proportional"
)

// Repeatability is one method's within-sample (replicate) precision.
type Repeatability struct {
	// SD is the pooled within-sample SD, √(ΣΣ(v_ik − v̄_i)²/Σ(k_i − 1)),
	// with DF = Σ(k_i − 1) degrees of freedom.
	SD float64
	DF int
	// CV is the pooled within-sample coefficient of variation,
	// √(ΣΣ((v_ik − v̄_i)/v̄_i)²/Σ(k_i − 1)) (samples with v̄_i > 0 only).
	CV float64
	// Trend is Spearman's ρ of the per-sample SD with the sample mean: a
	// significant positive ρ says the SD grows with the level.
	Trend TestResult
	// Model is ErrorProportional when Trend is significantly positive
	// (p < 0.05), else ErrorConstant.
	Model ErrorModel
}

// ReplicatePrecision pools the within-sample variation of replicates:
// reps[i] holds the replicate values of sample i. Samples with one value
// add nothing. It needs at least 3 samples with replicates.
func ReplicatePrecision(reps [][]float64) (*Repeatability, error) {
	var ss, ssRel float64
	var df, dfRel int
	var sds, means []float64
	for _, r := range reps {
		k := len(r)
		if k < 2 {
			continue
		}
		var m float64
		for _, v := range r {
			m += v
		}
		m /= float64(k)
		var s float64
		for _, v := range r {
			s += (v - m) * (v - m)
		}
		ss += s
		df += k - 1
		if m > 0 {
			ssRel += s / (m * m)
			dfRel += k - 1
		}
		sds = append(sds, math.Sqrt(s/float64(k-1)))
		means = append(means, m)
	}
	if len(sds) < 3 {
		return nil, fmt.Errorf("%w: at least 3 samples need replicates to estimate precision", ErrTooFewPoints)
	}
	rep := &Repeatability{SD: math.Sqrt(ss / float64(df)), DF: df, Model: ErrorConstant}
	if dfRel > 0 {
		rep.CV = math.Sqrt(ssRel / float64(dfRel))
	}
	if tr, err := Spearman(means, sds); err == nil {
		rep.Trend = tr
		if tr.Statistic > 0 && tr.PValue < 0.05 {
			rep.Model = ErrorProportional
		}
	}
	return rep, nil
}

// LackOfFit tests a straight line against the replicate (pure) error, for
// errors in both methods: with d_i = ȳ_i − a − b·x̄_i the residual of the
// sample means and s²_x, s²_y the pooled replicate variances, the mean of
// k_i·d_i² estimates s²_y + b²·s²_x when the line fits, so
//
//	F = [Σ k_i·d_i²/(n−2)] / (s²_y + b²·s²_x)
//
// on (n−2, df) degrees of freedom, df the pure-error df (the classical
// lack-of-fit test, e.g. Draper & Smith 1998 §2.1, with the error variance
// of both methods; k_i is the harmonic mean of the replicate counts of x
// and y at sample i, a design of ours).
func LackOfFit(xbar, ybar []float64, kx, ky []int, a, b float64, rx, ry *Repeatability) (TestResult, error) {
	n := len(xbar)
	if n < 3 || rx == nil || ry == nil {
		return TestResult{}, ErrTooFewPoints
	}
	var num float64
	for i := range n {
		k := 2 / (1/float64(kx[i]) + 1/float64(ky[i]))
		d := ybar[i] - a - b*xbar[i]
		num += k * d * d
	}
	den := ry.SD*ry.SD + b*b*rx.SD*rx.SD
	if !(den > 0) {
		return TestResult{}, ErrDegenerate
	}
	df1, df2 := float64(n-2), float64(rx.DF+ry.DF)
	// Pure-error df: the two pooled variances combine with Satterthwaite's df.
	vy, vx := ry.SD*ry.SD, b*b*rx.SD*rx.SD
	df2 = (vy + vx) * (vy + vx) / (vy*vy/float64(ry.DF) + vx*vx/float64(rx.DF))
	f := (num / df1) / den
	p := fSurvival(f, df1, df2)
	return TestResult{Statistic: f, PValue: p, Detail: fmt.Sprintf("F on (%.0f, %.1f) df against replicate error", df1, df2)}, nil
}
