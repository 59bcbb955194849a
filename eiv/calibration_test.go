package eiv_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"eivfit/eiv"
)

// standardsFrom turns reference columns into standards with one reading each.
func standardsFrom(x, ux, y, uy []float64) []eiv.Standard {
	s := make([]eiv.Standard, len(x))
	for i := range x {
		s[i] = eiv.Standard{X: x[i], Y: []float64{y[i]}, UY: uy[i]}
		if ux != nil {
			s[i].UX = ux[i]
		}
	}
	return s
}

func mustCalibrate(t testing.TB, s []eiv.Standard, opt *eiv.CalibrationOptions) *eiv.Calibration {
	t.Helper()
	c, err := eiv.Calibrate(s, opt)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

func mustInverse(t testing.TB, c *eiv.Calibration, u eiv.Unknown, opt *eiv.InverseOptions) eiv.InverseResult {
	t.Helper()
	r, err := c.Inverse([]eiv.Unknown{u}, opt)
	if err != nil {
		t.Fatal(err)
	}
	return r[0]
}

// ISO/TS 28037:2010 worked examples (testdata/ref/iso28037-*.csv, each with
// its citation): the lines of §6.3 (WLS) and §7.4 (x and y uncertain), the
// inverse evaluations of §6.3, to half a unit in the last printed digit.
func TestCalibrationISO28037(t *testing.T) {
	type want struct{ a, ua, b, ub, cov, chi2, x0, ux0 string }
	cases := []struct {
		name  string
		file  string
		model eiv.CalibrationModel
		y0    float64
		uy0   float64
		want  want
	}{
		// §6.3, equal u(y): x(10.5 ± 0.5) = 4.913 ± 0.322.
		{"ex1 WLS equal u(y)", "ref/iso28037-ex1-wls-equal.csv", eiv.ModelWLS, 10.5, 0.5,
			want{"1.867", "0.465", "1.757", "0.120", "-0.050", "1.665", "4.913", "0.322"}},
		// §6.3, unequal u(y): x(10.5 ± 1.0) = 4.674 ± 0.533.
		{"ex2 WLS unequal u(y)", "ref/iso28037-ex2-wls-unequal.csv", eiv.ModelWLS, 10.5, 1.0,
			want{"0.885", "0.530", "2.057", "0.178", "-0.082", "4.131", "4.674", "0.533"}},
		// §7.4, u(x) and u(y): the line only (no inverse evaluation published).
		{"ex3 GDR", "ref/iso28037-ex3-wtls-xy.csv", eiv.ModelGDR, 0, 0,
			want{"0.5788", "0.4764", "2.1597", "0.1355", "-0.0577", "2.743", "", ""}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			d := readRef(t, tc.file)
			c := mustCalibrate(t, standardsFrom(d["x"], d["u_x"], d["y"], d["u_y"]), nil)
			if c.Model != tc.model {
				t.Errorf("model %q, want %q", c.Model, tc.model)
			}
			printed(t, "a", c.Intercept.Value, tc.want.a)
			printed(t, "u(a)", c.Intercept.U, tc.want.ua)
			printed(t, "b", c.Slope.Value, tc.want.b)
			printed(t, "u(b)", c.Slope.U, tc.want.ub)
			printed(t, "cov(a,b)", c.Cov, tc.want.cov)
			printed(t, "chi2", c.Validation.Chi2, tc.want.chi2)
			if c.Validation.DOF != 4 || !c.Validation.Consistent {
				t.Errorf("validation %+v: want ν = 4, consistent", c.Validation)
			}
			if tc.want.x0 == "" {
				return
			}
			r := mustInverse(t, c, eiv.Unknown{Y: []float64{tc.y0}, UY: tc.uy0}, nil)
			printed(t, "x0", r.X.Value, tc.want.x0)
			printed(t, "u(x0)", r.X.U, tc.want.ux0)
			if r.K != 2 || math.Abs(r.Expanded-2*r.X.U) > 1e-15 || !math.IsInf(r.DOF, 1) {
				t.Errorf("k = %g, U = %g, ν = %g: want the default k = 2 on infinite ν", r.K, r.Expanded, r.DOF)
			}
		})
	}
	// Forward evaluation of ex1 at x = 3.5 ± 0.2: 8.01666666666667 ±
	// 0.406409531732455, computed in the reference file's header by a
	// general-purpose library (not a published value); double precision
	// on six points: 1e-12.
	t.Run("ex1 forward", func(t *testing.T) {
		d := readRef(t, "ref/iso28037-ex1-wls-equal.csv")
		c := mustCalibrate(t, standardsFrom(d["x"], nil, d["y"], d["u_y"]), nil)
		f, err := c.Forward(3.5, 0.2)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "y", f.Y.Value, 8.01666666666667, 1e-12)
		near(t, "u(y)", f.Y.U, 0.406409531732455, 1e-12)
	})
}

// heteroData draws m standards on y = 3 + 0.8·x with per-standard u(x),
// u(y) and optional error correlations.
func heteroData(seed uint64, m int, withR bool) []eiv.Standard {
	r := rand.New(rand.NewPCG(seed, 15))
	s := make([]eiv.Standard, m)
	for i := range m {
		xt := 1 + 9*float64(i)/float64(m-1)
		ux, uy := 0.05+0.2*r.Float64(), 0.1+0.3*r.Float64()
		s[i] = eiv.Standard{X: xt + ux*r.NormFloat64(), UX: ux, Y: []float64{3 + 0.8*xt + uy*r.NormFloat64()}, UY: uy}
		if withR {
			s[i].R = 0.6*r.Float64() - 0.3
		}
	}
	return s
}

// Gauss–Markov regression with a diagonal covariance minimises the same
// generalized distance as York's method (ISO/TS 28037 §7 is §9 with V
// diagonal), so the two lines and covariances must agree. Both iterate to
// 1e-15 relative change of b; 1e-10 relative leaves room for the different
// rounding of an m×m Cholesky solve and York's sums.
func TestGMRDiagonalEqualsGDR(t *testing.T) {
	for _, tc := range []struct {
		name  string
		seed  uint64
		m     int
		withR bool
	}{
		{"m=5", 1, 5, false},
		{"m=12 with r", 2, 12, true},
		{"m=40", 3, 40, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := heteroData(tc.seed, tc.m, tc.withR)
			gdr := mustCalibrate(t, s, nil)
			gmr := mustCalibrate(t, s, &eiv.CalibrationOptions{Model: eiv.ModelGMR})
			if gdr.Model != eiv.ModelGDR || gmr.Model != eiv.ModelGMR {
				t.Fatalf("models %s, %s", gdr.Model, gmr.Model)
			}
			for _, p := range []struct {
				what      string
				got, want float64
			}{
				{"a", gmr.Intercept.Value, gdr.Intercept.Value},
				{"b", gmr.Slope.Value, gdr.Slope.Value},
				{"u(a)", gmr.Intercept.U, gdr.Intercept.U},
				{"u(b)", gmr.Slope.U, gdr.Slope.U},
				{"cov", gmr.Cov, gdr.Cov},
				{"chi2", gmr.Validation.Chi2, gdr.Validation.Chi2},
				{"XRef", gmr.XRef, gdr.XRef},
			} {
				near(t, p.what, p.got, p.want, 1e-10)
			}
			for i := range s {
				near(t, "adjusted x", gmr.Standards[i].XAdjusted, gdr.Standards[i].XAdjusted, 1e-10)
			}
		})
	}
}

// The GDR line and covariance also equal York's (york.go), which the
// reference tests hold to ISO/TS 28037 and scipy.odr.
func TestGDREqualsYork(t *testing.T) {
	s := heteroData(4, 9, true)
	c := mustCalibrate(t, s, nil)
	x, y, ux, uy, r := columns(s)
	f, err := eiv.York(x, y, ux, uy, r, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Same slope from York's iteration; a, u, cov through the centred
	// closing pass: agreement to 1e-12 (rounding of m = 9 sums).
	near(t, "a", c.Intercept.Value, f.Intercept.Value, 1e-12)
	near(t, "b", c.Slope.Value, f.Slope.Value, 1e-12)
	near(t, "u(a)", c.Intercept.U, f.Intercept.SE, 1e-12)
	near(t, "u(b)", c.Slope.U, f.Slope.SE, 1e-12)
	near(t, "cov", c.Cov, f.CovSlopeIntercept, 1e-12)
	near(t, "chi2", c.Validation.Chi2, f.Chi2, 1e-12)
}

func columns(s []eiv.Standard) (x, y, ux, uy, r []float64) {
	for _, st := range s {
		x = append(x, st.X)
		y = append(y, st.Y[0])
		ux = append(ux, st.UX)
		uy = append(uy, st.UY)
		r = append(r, st.R)
	}
	return
}
