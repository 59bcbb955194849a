package eiv

import (
	"fmt"
	"math"
)

// Concordance is Lin's (1989, Biometrics 45:255; correction 2000, 56:324)
// concordance correlation coefficient of x and y, split into precision and
// accuracy: ρ_c = ρ·C_b.
type Concordance struct {
	N int
	// CCC is ρ_c = 2·s_xy/(s_x² + s_y² + (x̄ − ȳ)²), moments with divisor n,
	// with the interval tanh(z ± z_{(1+c)/2}·σ_z), z = atanh(ρ_c), σ_z² Lin's
	// asymptotic variance of z (below). SE is σ_z·(1 − ρ_c²), the delta-method
	// SE on the original scale, for tables.
	CCC Estimate
	// Precision is Pearson's ρ (how far the points lie from their own line).
	Precision float64
	// Accuracy is C_b = ρ_c/ρ = 2/(v + 1/v + u²), v = s_x/s_y,
	// u = (x̄ − ȳ)/√(s_x·s_y) (how far that line lies from identity).
	Accuracy float64
	// Location shift u and scale shift v.
	LocationShift, ScaleShift float64
}

// LinCCC computes Lin's concordance correlation coefficient. Lin's
// variance of z = atanh(ρ_c), with n − 2 in the denominator as in the
// 2000 correction:
//
//	σ_z² = 1/(n−2)·[ (1−ρ²)ρ_c²/((1−ρ_c²)ρ²) + 2ρ_c³(1−ρ_c)u²/(ρ(1−ρ_c²)²)
//	                − ρ_c⁴u⁴/(2ρ²(1−ρ_c²)²) ]
//
// It needs n ≥ 4, x and y not constant, and |ρ_c| < 1.
func LinCCC(x, y []float64, opt *Options) (*Concordance, error) {
	conf, err := opt.confidence()
	if err != nil {
		return nil, err
	}
	if err := checkXY(x, y); err != nil {
		return nil, err
	}
	n := len(x)
	if n < 4 {
		return nil, fmt.Errorf("%w: the concordance interval needs at least 4 points", ErrTooFewPoints)
	}
	m := centredMoments(x, y)
	fn := float64(n)
	sxx, syy, sxy := m.sxx/fn, m.syy/fn, m.sxy/fn
	if !(sxx > 0 && syy > 0) {
		return nil, fmt.Errorf("%w: x or y is constant, so the concordance is undefined", ErrDegenerate)
	}
	dm := m.mx - m.my
	rc := 2 * sxy / (sxx + syy + dm*dm)
	rho := sxy / math.Sqrt(sxx*syy)
	if !(math.Abs(rc) < 1) || rho == 0 {
		return nil, fmt.Errorf("%w: the concordance is exactly ±1 or the correlation is 0; no interval", ErrDegenerate)
	}
	u := dm / math.Sqrt(math.Sqrt(sxx*syy))
	v := math.Sqrt(sxx / syy)
	q := 1 - rc*rc
	vz := ((1-rho*rho)*rc*rc/(q*rho*rho) +
		2*rc*rc*rc*(1-rc)*u*u/(rho*q*q) -
		rc*rc*rc*rc*u*u*u*u/(2*rho*rho*q*q)) / float64(n-2)
	if !(vz > 0) {
		return nil, fmt.Errorf("%w: Lin's variance is not positive", ErrDegenerate)
	}
	sz := math.Sqrt(vz)
	z := math.Atanh(rc)
	h := zQuantile(conf) * sz
	c := &Concordance{
		N: n,
		CCC: Estimate{Value: rc, SE: sz * q, CI: Interval{Lower: math.Tanh(z - h), Upper: math.Tanh(z + h), Level: conf,
			Method: "Fisher z, Lin's asymptotic variance"}},
		Precision:     rho,
		Accuracy:      rc / rho,
		LocationShift: u,
		ScaleShift:    v,
	}
	return c, nil
}
