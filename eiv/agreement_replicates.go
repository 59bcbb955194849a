package eiv

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// LimitsOf says what a pair of limits of agreement describes.
type LimitsOf string

const (
	// LimitsSingle: limits for the difference between single measurements
	// by the two methods (what a laboratory reports).
	LimitsSingle LimitsOf = "single_measurements"
	// LimitsMeans: limits for the difference between the means of each
	// subject's replicates; narrower than LimitsSingle, and not the limits
	// for single measurements.
	LimitsMeans LimitsOf = "means_of_replicates"
)

// ReplicateDesign is the design of a study with several measurements per
// subject by each method.
type ReplicateDesign string

const (
	// DesignConstant: the true value is constant within a subject; the
	// replicates of the two methods need not be paired (Bland & Altman
	// 1999, §5.2; 2007, §2).
	DesignConstant ReplicateDesign = "true_value_constant"
	// DesignVarying: the true value changes within a subject; the
	// measurements come in pairs, one by each method at the same run or
	// time (Bland & Altman 1999, §5.3; 2007, §3).
	DesignVarying ReplicateDesign = "true_value_varying"
)

// Subject holds one subject's measurements by each method. In the varying
// design X[j] and Y[j] are a pair taken at the same run or time.
type Subject struct {
	X, Y []float64
}

// AgreementOptions are the settings of the replicate-aware, regression-based
// and ratio limits of agreement. A nil pointer means the defaults.
type AgreementOptions struct {
	// Confidence of the intervals. Zero means 0.95.
	Confidence float64
	// Multiplier is the z of the limits. Zero means 1.96 (95 % limits).
	Multiplier float64
}

func (o *AgreementOptions) resolve() (conf, z float64, err error) {
	if o == nil {
		o = &AgreementOptions{}
	}
	if conf, err = checkConfidence(o.Confidence); err != nil {
		return
	}
	z = o.Multiplier
	switch {
	case z == 0:
		z = 1.96
	case !(z > 0) || math.IsInf(z, 0):
		err = &OptionError{Option: "multiplier", Reason: "must be a finite number greater than 0"}
	}
	return
}

// ReplicateAgreement is the limits of agreement for the difference y − x
// between single measurements when each subject was measured several times.
type ReplicateAgreement struct {
	Design ReplicateDesign
	// Describes is always LimitsSingle: the within-subject variation that
	// averaging removes has been added back.
	Describes LimitsOf
	// Subjects is n; MeasuredX and MeasuredY are the numbers of
	// measurements (the number of pairs, twice, in the varying design).
	Subjects, MeasuredX, MeasuredY int
	// MeanDifference is the bias with a t interval on n−1 df: the mean of
	// the subjects' differences of means (constant design) or the mean of
	// all paired differences (varying design).
	MeanDifference Estimate
	// SD is the standard deviation of the difference between single
	// measurements; Lower and Upper are MeanDifference ∓ Multiplier·SD,
	// each with a MOVER interval (see ReplicateLimits).
	SD           float64
	Multiplier   float64
	Lower, Upper Estimate
	// Components of SD². Constant design: SDOfMeans is the SD of the
	// subjects' differences of means (the SD that limits on means would
	// use), WithinX and WithinY the pooled within-subject SDs of each
	// method. Varying design: WithinSD is the within-subject SD of the
	// paired differences, BetweenSD the between-subject SD of their true
	// means (zero when its estimate is negative, with a warning).
	SDOfMeans, WithinX, WithinY float64
	WithinSD, BetweenSD         float64
	// MeansLower and MeansUpper are the limits one would get from the
	// subjects' means alone (constant design): they describe LimitsMeans
	// and are given for comparison only.
	MeansLower, MeansUpper float64
	// Warnings are non-fatal diagnostics, each a *Warning.
	Warnings []error
}

// ReplicateLimits computes the limits of agreement for single measurements
// when the true value is constant within each subject (Bland & Altman
// 1999, Stat. Methods Med. Res. 8:135, §5.2; 2007, J. Biopharm. Stat.
// 17:571). With d_i = ȳ_i − x̄_i the difference of the subject means,
// s²_d̄ their variance (n−1 df), s²_xw and s²_yw the pooled within-subject
// variances (one-way analysis of variance, Σ(m_i − 1) df) and m_xi, m_yi
// the replicate counts,
//
//	var(x̄_i − ȳ_i) = σ²_D − (1 − 1/m_xi)·σ²_xw − (1 − 1/m_yi)·σ²_yw
//	s²_D = s²_d̄ + (1 − (1/n)Σ1/m_xi)·s²_xw + (1 − (1/n)Σ1/m_yi)·s²_yw
//
// (for equal counts the coefficients are 1 − 1/m_x and 1 − 1/m_y), and the
// limits are d̄ ∓ z·s_D. The bias interval is t on n−1 df. The paper gives
// no interval for these limits; this one is the method of variance
// estimates recovery (MOVER; Zou 2013, Stat. Methods Med. Res. 22:630),
// an approximation: χ² intervals of each variance are combined into one
// for s²_D, and that with the t interval of d̄ into one for each limit.
// Subjects need at least one measurement by each method, and at least 3
// subjects are needed.
func ReplicateLimits(subjects []Subject, opt *AgreementOptions) (*ReplicateAgreement, error) {
	conf, z, err := opt.resolve()
	if err != nil {
		return nil, err
	}
	n := len(subjects)
	if n < 3 {
		return nil, fmt.Errorf("%w: at least 3 subjects are needed", ErrTooFewPoints)
	}
	d := make([]float64, n)
	var ssx, ssy, invX, invY float64
	var dfx, dfy, nx, ny int
	for i, s := range subjects {
		if len(s.X) == 0 || len(s.Y) == 0 {
			return nil, &PointError{Index: i, Field: map[bool]string{true: "x", false: "y"}[len(s.X) == 0],
				Err: fmt.Errorf("%w: every subject needs a measurement by each method", ErrTooFewPoints)}
		}
		mx, sx, err := meanSS(s.X, i, "x")
		if err != nil {
			return nil, err
		}
		my, sy, err := meanSS(s.Y, i, "y")
		if err != nil {
			return nil, err
		}
		d[i] = my - mx
		ssx += sx
		ssy += sy
		dfx += len(s.X) - 1
		dfy += len(s.Y) - 1
		nx += len(s.X)
		ny += len(s.Y)
		invX += 1 / float64(len(s.X))
		invY += 1 / float64(len(s.Y))
	}
	var dbar, ssd float64
	dbar, ssd = meanSSOf(d)
	vd := ssd / float64(n-1)
	cx, cy := 1-invX/float64(n), 1-invY/float64(n)
	comps := []varComp{{c: 1, s2: vd, df: n - 1}}
	res := &ReplicateAgreement{Design: DesignConstant, Describes: LimitsSingle, Subjects: n, MeasuredX: nx, MeasuredY: ny,
		Multiplier: z, SDOfMeans: math.Sqrt(vd)}
	if dfx > 0 {
		res.WithinX = math.Sqrt(ssx / float64(dfx))
		comps = append(comps, varComp{c: cx, s2: ssx / float64(dfx), df: dfx})
	}
	if dfy > 0 {
		res.WithinY = math.Sqrt(ssy / float64(dfy))
		comps = append(comps, varComp{c: cy, s2: ssy / float64(dfy), df: dfy})
	}
	if dfx == 0 && dfy == 0 {
		res.Warnings = append(res.Warnings, &Warning{Code: WarnNoReplicates, Message: "no subject has replicates: these are the ordinary limits of agreement"})
	}
	seMean := math.Sqrt(vd / float64(n))
	t := tQuantile(conf, n-1)
	res.MeanDifference = Estimate{Value: dbar, SE: seMean, CI: symmetric(dbar, t*seMean, conf, "t")}
	res.MeansLower, res.MeansUpper = dbar-z*res.SDOfMeans, dbar+z*res.SDOfMeans
	if err := res.limits(comps, t*seMean, t*seMean, z, conf); err != nil {
		return nil, err
	}
	return res, nil
}

// PairedReplicateLimits computes the limits of agreement for single
// measurements when the true value changes within a subject and the two
// methods measure in pairs (Bland & Altman 1999, §5.3; 2007, §3): X[j] and
// Y[j] of a subject are one pair. With d_ij = y_ij − x_ij, m_i pairs for
// subject i, N = Σm_i, the one-way analysis of variance of d by subject gives
// MS_w (N − n df) and MS_b (n − 1 df), and with
//
//	λ = (N² − Σm_i²)/((n − 1)·N)
//	σ²_b = (MS_b − MS_w)/λ,   σ²_D = σ²_b + MS_w = MS_b/λ + (1 − 1/λ)·MS_w
//
// the limits are d̄ ∓ z·σ_D, d̄ the mean of all N differences. The bias SE
// is √((σ²_b·Σm_i² + MS_w·N)/N²) with t on n−1 df (an approximation of
// ours for unequal m_i); the limits' intervals are MOVER (Zou 2013), as in
// ReplicateLimits. A negative σ²_b is set to zero (σ²_D = MS_w), with a
// warning.
func PairedReplicateLimits(subjects []Subject, opt *AgreementOptions) (*ReplicateAgreement, error) {
	conf, z, err := opt.resolve()
	if err != nil {
		return nil, err
	}
	n := len(subjects)
	if n < 3 {
		return nil, fmt.Errorf("%w: at least 3 subjects are needed", ErrTooFewPoints)
	}
	means := make([]float64, n)
	var N int
	var sum, ssw, sumM2 float64
	for i, s := range subjects {
		if len(s.X) != len(s.Y) {
			return nil, &PointError{Index: i, Field: "y", Err: fmt.Errorf("%w: paired replicates need as many y as x per subject", ErrLengthMismatch)}
		}
		if len(s.X) == 0 {
			return nil, &PointError{Index: i, Field: "x", Err: fmt.Errorf("%w: every subject needs a pair", ErrTooFewPoints)}
		}
		d := make([]float64, len(s.X))
		for j := range s.X {
			if !allFinite(s.X[j], s.Y[j]) {
				return nil, &PointError{Index: i, Field: "x", Err: ErrNonFinite}
			}
			d[j] = s.Y[j] - s.X[j]
		}
		m, ss := meanSSOf(d)
		means[i] = m
		ssw += ss
		k := float64(len(d))
		sum += m * k
		sumM2 += k * k
		N += len(d)
	}
	if N == n {
		return nil, fmt.Errorf("%w: no subject has more than one pair; use the ordinary limits of agreement", ErrTooFewPoints)
	}
	fN := float64(N)
	dbar := sum / fN
	var ssb float64
	for i, s := range subjects {
		dd := means[i] - dbar
		ssb += float64(len(s.X)) * dd * dd
	}
	msw := ssw / float64(N-n)
	msb := ssb / float64(n-1)
	lam := (fN*fN - sumM2) / (float64(n-1) * fN)
	vb := (msb - msw) / lam
	res := &ReplicateAgreement{Design: DesignVarying, Describes: LimitsSingle, Subjects: n, MeasuredX: N, MeasuredY: N, Multiplier: z}
	comps := []varComp{{c: 1 / lam, s2: msb, df: n - 1}, {c: 1 - 1/lam, s2: msw, df: N - n}}
	if vb < 0 {
		vb = 0
		comps = comps[1:2]
		comps[0].c = 1
		res.Warnings = append(res.Warnings, &Warning{Code: WarnNegativeVariance, Message: "the between-subject variance of the differences is estimated below zero and set to zero: the limits use the within-subject variance alone"})
	}
	res.WithinSD, res.BetweenSD = math.Sqrt(msw), math.Sqrt(vb)
	seMean := math.Sqrt((vb*sumM2 + msw*fN) / (fN * fN))
	t := tQuantile(conf, n-1)
	res.MeanDifference = Estimate{Value: dbar, SE: seMean, CI: symmetric(dbar, t*seMean, conf, "t")}
	if err := res.limits(comps, t*seMean, t*seMean, z, conf); err != nil {
		return nil, err
	}
	return res, nil
}

// varComp is one term c·s² of a sum of variance estimates, s² on df degrees
// of freedom.
type varComp struct {
	c, s2 float64
	df    int
}

// moverVariance returns the estimate Σc_k·s²_k and its MOVER interval
// (Zou 2013): with l_k, u_k the χ² limits of each s²_k,
//
//	L = V − √(Σ c_k²·(s²_k − l_k)²)  (u_k for c_k < 0)
//	U = V + √(Σ c_k²·(u_k − s²_k)²)  (l_k for c_k < 0)
//
// L is clamped at zero.
func moverVariance(comps []varComp, conf float64) (v, lo, hi float64) {
	var dl, du float64
	for _, k := range comps {
		v += k.c * k.s2
		l, u := chi2VarianceCI(k.s2, k.df, conf)
		a, b := k.s2-l, u-k.s2
		if k.c < 0 {
			a, b = b, a
		}
		dl += k.c * k.c * a * a
		du += k.c * k.c * b * b
	}
	return v, math.Max(0, v-math.Sqrt(dl)), v + math.Sqrt(du)
}

// chi2VarianceCI is the interval of a variance s² on df degrees of freedom:
// [df·s²/χ²_{df,(1+c)/2}, df·s²/χ²_{df,(1−c)/2}].
func chi2VarianceCI(s2 float64, df int, conf float64) (lo, hi float64) {
	c := distuv.ChiSquared{K: float64(df)}
	return float64(df) * s2 / c.Quantile((1+conf)/2), float64(df) * s2 / c.Quantile((1-conf)/2)
}

// limits sets SD, Lower and Upper from the variance components and the
// bias interval's half-widths below (hl) and above (hu) the bias.
func (r *ReplicateAgreement) limits(comps []varComp, hl, hu, z, conf float64) error {
	v, vlo, vhi := moverVariance(comps, conf)
	if !(v >= 0) || !allFinite(v, vlo, vhi) {
		return fmt.Errorf("%w: the variance of the differences is not a finite non-negative number", ErrDegenerate)
	}
	sd, slo, shi := math.Sqrt(v), math.Sqrt(vlo), math.Sqrt(vhi)
	r.SD = sd
	r.Lower, r.Upper = moverLimits(r.MeanDifference.Value, hl, hu, sd, slo, shi, z, conf)
	return nil
}

// moverLimits forms the intervals of the limits θ = d̄ ∓ z·s by MOVER from
// the bias interval (d̄ − hl, d̄ + hu) and the SD interval (slo, shi).
func moverLimits(dbar, hl, hu, sd, slo, shi, z float64, conf float64) (lower, upper Estimate) {
	const method = "MOVER (Zou 2013): t for the bias, χ² for each variance"
	lo := dbar - z*sd
	lower = Estimate{Value: lo, CI: Interval{
		Lower: lo - math.Hypot(hl, z*(shi-sd)),
		Upper: lo + math.Hypot(hu, z*(sd-slo)),
		Level: conf, Method: method}}
	hi := dbar + z*sd
	upper = Estimate{Value: hi, CI: Interval{
		Lower: hi - math.Hypot(hl, z*(sd-slo)),
		Upper: hi + math.Hypot(hu, z*(shi-sd)),
		Level: conf, Method: method}}
	// SE: the half-width over the normal quantile, for tables (the interval is asymmetric).
	zc := zQuantile(conf)
	lower.SE = (lower.CI.Upper - lower.CI.Lower) / (2 * zc)
	upper.SE = (upper.CI.Upper - upper.CI.Lower) / (2 * zc)
	return
}

func meanSS(v []float64, i int, field string) (float64, float64, error) {
	for _, x := range v {
		if !allFinite(x) {
			return 0, 0, &PointError{Index: i, Field: field, Err: ErrNonFinite}
		}
	}
	m, ss := meanSSOf(v)
	return m, ss, nil
}

// meanSSOf returns the mean and the sum of squared deviations from it
// (two passes).
func meanSSOf(v []float64) (m, ss float64) {
	for _, x := range v {
		m += x
	}
	m /= float64(len(v))
	for _, x := range v {
		ss += (x - m) * (x - m)
	}
	return
}

// Warning codes of the agreement analyses.
const (
	WarnNoReplicates     = "no_replicates"
	WarnNegativeVariance = "negative_variance_component"
	WarnNegativeSpread   = "negative_spread"
)

// RepeatabilityResult is one method's repeatability from its replicates.
type RepeatabilityResult struct {
	// Subjects with replicates, and DF = Σ(m_i − 1).
	Subjects, DF int
	// WithinSD is the pooled within-subject SD s_w (one-way analysis of
	// variance) with its χ² interval on DF degrees of freedom:
	// [s_w·√(DF/χ²_{DF,(1+c)/2}), s_w·√(DF/χ²_{DF,(1−c)/2})].
	WithinSD Estimate
	// Coefficient is the repeatability coefficient z·√2·s_w (2.77·s_w for
	// z = 1.96; common practice, Bland & Altman 1999 §4): 95 % of the
	// differences between two measurements of one subject lie within ±it.
	// Its interval is the SD's, scaled.
	Coefficient Estimate
	Multiplier  float64
}

// MethodRepeatability pools the replicates of one method, reps[i] holding
// subject i's measurements; subjects with one measurement add nothing.
// At least 2 subjects with replicates are needed.
func MethodRepeatability(reps [][]float64, opt *AgreementOptions) (*RepeatabilityResult, error) {
	conf, z, err := opt.resolve()
	if err != nil {
		return nil, err
	}
	var ss float64
	var df, subj int
	for i, r := range reps {
		if len(r) < 2 {
			continue
		}
		_, s, err := meanSS(r, i, "value")
		if err != nil {
			return nil, err
		}
		ss += s
		df += len(r) - 1
		subj++
	}
	if subj < 2 {
		return nil, fmt.Errorf("%w: at least 2 subjects need replicates for a repeatability", ErrTooFewPoints)
	}
	sw := math.Sqrt(ss / float64(df))
	lo, hi := chi2VarianceCI(sw*sw, df, conf)
	const method = "χ² on the within-subject df"
	k := z * math.Sqrt2
	se := sw / math.Sqrt(2*float64(df)) // large-sample SE of an SD, for tables
	return &RepeatabilityResult{
		Subjects:    subj,
		DF:          df,
		WithinSD:    Estimate{Value: sw, SE: se, CI: Interval{Lower: math.Sqrt(lo), Upper: math.Sqrt(hi), Level: conf, Method: method}},
		Coefficient: Estimate{Value: k * sw, SE: k * se, CI: Interval{Lower: k * math.Sqrt(lo), Upper: k * math.Sqrt(hi), Level: conf, Method: method}},
		Multiplier:  z,
	}, nil
}
