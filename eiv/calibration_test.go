package eiv_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"eivfit/eiv"
	"eivfit/eiv/reftest"
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

// gmrCase is a calibration with shared components of the x uncertainty.
type gmrCase struct {
	name   string
	x, ux  []float64
	y, uy  []float64
	r      []float64
	shared []eiv.SharedComponent
	// want: the scipy reference (see TestGMRAgainstSciPy), written here so
	// that the check also runs where scipy is missing.
	a, b, ua, ub, cov, chi2 float64
}

func (c gmrCase) standards() []eiv.Standard {
	s := standardsFrom(c.x, c.ux, c.y, c.uy)
	for i := range s {
		if c.r != nil {
			s[i].R = c.r[i]
		}
	}
	return s
}

// xCov builds the covariance of x the way the doc comment of Calibrate
// states it, independently of the package: u²(x_i) = ux_i² + Σ u_rel²·x_i²,
// cov(x_i, x_j) = Σ u_rel²·x_i·x_j over the components holding both.
func (c gmrCase) xCov() [][]float64 {
	m := len(c.x)
	v := make([][]float64, m)
	for i := range m {
		v[i] = make([]float64, m)
		v[i][i] = c.ux[i] * c.ux[i]
	}
	for _, sc := range c.shared {
		for _, i := range sc.Members {
			for _, j := range sc.Members {
				v[i][j] += sc.RelativeU * sc.RelativeU * c.x[i] * c.x[j]
			}
		}
	}
	return v
}

var gmrCases = []gmrCase{
	{
		// Six standards from one stock solution (u_rel 1 %), the first three
		// also weighed on one balance (u_rel 0.5 %); values invented.
		name: "stock and balance",
		x:    []float64{2, 4, 6, 8, 10, 12}, ux: []float64{0.03, 0.04, 0.05, 0.06, 0.07, 0.08},
		y: []float64{13.9, 27.6, 42.4, 55.1, 70.6, 83.2}, uy: []float64{0.4, 0.4, 0.5, 0.5, 0.6, 0.6},
		shared: []eiv.SharedComponent{{Name: "stock", RelativeU: 0.01, Members: []int{0, 1, 2, 3, 4, 5}},
			{Name: "balance", RelativeU: 0.005, Members: []int{0, 1, 2}}},
		// testdata/ref_calibration.py (scipy 1.10 least_squares), printed to 17 digits.
		a: -0.12292082807171098, b: 6.9847089900130639, ua: 0.49717121444933299, ub: 0.10247641598264853,
		cov: -0.032038065948624662, chi2: 3.828497379188943,
	},
	{
		// Eight standards, a 2 % component shared by all and a 1 % one by the
		// upper four, with x–y error correlations; values invented.
		name: "two components, correlated errors",
		x:    []float64{0.5, 1, 2, 3, 5, 7, 9, 10}, ux: []float64{0.01, 0.01, 0.02, 0.03, 0.05, 0.06, 0.08, 0.1},
		y:  []float64{1.12, 2.05, 4.31, 6.02, 10.4, 14.2, 18.5, 20.3},
		uy: []float64{0.05, 0.05, 0.08, 0.1, 0.15, 0.2, 0.25, 0.3},
		r:  []float64{0.2, -0.1, 0.3, 0, 0.25, -0.2, 0.1, 0.3},
		shared: []eiv.SharedComponent{{Name: "stock", RelativeU: 0.02, Members: []int{0, 1, 2, 3, 4, 5, 6, 7}},
			{Name: "dilution", RelativeU: 0.01, Members: []int{4, 5, 6, 7}}},
		// testdata/ref_calibration.py (scipy 1.10 least_squares), printed to 17 digits.
		a: 0.085342043819714733, b: 2.0360797455326338, ua: 0.045256116860308254, ub: 0.047909802855848407,
		cov: -0.00080975484897586692, chi2: 9.0710461544282701,
	},
}

type glsCase struct {
	X   []float64   `json:"x"`
	Y   []float64   `json:"y"`
	VX  [][]float64 `json:"vx"`
	UY  []float64   `json:"uy"`
	Rho []float64   `json:"rho"`
}

type glsResult struct {
	A, B   float64
	Cov    [][]float64
	Chi2   float64
	XI     []float64
	Status int
}

// Gauss–Markov regression with shared components against an independent
// generalized least-squares solution: scipy.optimize.least_squares
// (MINPACK lm, Debian python3-scipy) on all 2m + 2 unknowns with the
// residuals whitened by the Cholesky factor of the 2m×2m covariance, the
// covariance of (a, b) from the Jacobian (testdata/ref_calibration.py).
// Both converge to ~1e-15; 1e-8 relative (the bound) covers
// MINPACK's stopping rule, which fixes the parameters only to about √ε of
// their uncertainty. The same values, printed by the script, are written in
// gmrCases and checked also without scipy.
func TestGMRAgainstSciPy(t *testing.T) {
	check := func(t *testing.T, c *eiv.Calibration, a, b, ua, ub, cov, chi2 float64) {
		t.Helper()
		near(t, "a", c.Intercept.Value, a, 1e-8)
		near(t, "b", c.Slope.Value, b, 1e-8)
		near(t, "u(a)", c.Intercept.U, ua, 1e-8)
		near(t, "u(b)", c.Slope.U, ub, 1e-8)
		near(t, "cov(a,b)", c.Cov, cov, 1e-8)
		near(t, "chi2", c.Validation.Chi2, chi2, 1e-8)
	}
	fits := make([]*eiv.Calibration, len(gmrCases))
	for i, gc := range gmrCases {
		fits[i] = mustCalibrate(t, gc.standards(), &eiv.CalibrationOptions{Shared: gc.shared})
		if fits[i].Model != eiv.ModelGMR {
			t.Fatalf("%s: model %s", gc.name, fits[i].Model)
		}
		t.Run(gc.name+"/written", func(t *testing.T) {
			check(t, fits[i], gc.a, gc.b, gc.ua, gc.ub, gc.cov, gc.chi2)
			if gc.r != nil {
				return // r multiplies ux, which an explicit matrix replaces
			}
			// The same covariance given as an explicit matrix.
			s := gc.standards()
			for j := range s {
				s[j].UX = 0
			}
			check(t, mustCalibrate(t, s, &eiv.CalibrationOptions{XCovariance: gc.xCov()}),
				gc.a, gc.b, gc.ua, gc.ub, gc.cov, gc.chi2)
		})
	}
	t.Run("scipy", func(t *testing.T) {
		py := reftest.Python(t, "scipy.optimize", "scipy.linalg", "numpy")
		var in struct {
			Cases []glsCase `json:"cases"`
		}
		for _, gc := range gmrCases {
			rho := make([]float64, len(gc.x))
			for i := range rho {
				if gc.r != nil {
					rho[i] = gc.r[i] * gc.ux[i] * gc.uy[i]
				}
			}
			in.Cases = append(in.Cases, glsCase{X: gc.x, Y: gc.y, VX: gc.xCov(), UY: gc.uy, Rho: rho})
		}
		var out struct{ Results []glsResult }
		reftest.Run(t, py, reftest.Script(t, "ref_calibration.py"), in, &out)
		for i, r := range out.Results {
			if r.Status <= 0 {
				t.Fatalf("%s: least_squares status %d", gmrCases[i].name, r.Status)
			}
			t.Logf("%s: a %.17g b %.17g u(a) %.17g u(b) %.17g cov %.17g chi2 %.17g", gmrCases[i].name,
				r.A, r.B, math.Sqrt(r.Cov[0][0]), math.Sqrt(r.Cov[1][1]), r.Cov[0][1], r.Chi2)
			check(t, fits[i], r.A, r.B, math.Sqrt(r.Cov[0][0]), math.Sqrt(r.Cov[1][1]), r.Cov[0][1], r.Chi2)
			for j, xi := range r.XI {
				near(t, "adjusted x", fits[i].Standards[j].XAdjusted, xi, 1e-8)
			}
		}
	})
}

// u(x₀) against the law of propagation done by finite differences of
// x₀ = (ȳ₀ − a)/b in (a, b, ȳ₀) with the uncentred covariance of (a, b)
// (JCGM 100 §5.1.2, eq. 13): central differences with steps of 1e-5 of
// each input's uncertainty have truncation error ~1e-10 relative (x₀ is a
// ratio, smooth at b ≠ 0) and rounding ~ε·|x₀|/(1e-5·u); 1e-8 relative.
func TestInverseAgainstFiniteDifferences(t *testing.T) {
	d := readRef(t, "ref/iso28037-ex3-wtls-xy.csv")
	cals := []struct {
		name string
		c    *eiv.Calibration
	}{
		{"gdr ISO ex3", mustCalibrate(t, standardsFrom(d["x"], d["u_x"], d["y"], d["u_y"]), nil)},
		{"gmr shared", mustCalibrate(t, gmrCases[0].standards(), &eiv.CalibrationOptions{Shared: gmrCases[0].shared})},
	}
	unknowns := []eiv.Unknown{
		{Y: []float64{7.3}, UY: 0.3},
		{Y: []float64{12.1, 12.5, 11.9}}, // own replicate SD
		{Y: []float64{30}, UY: 0.2},      // far above the standards
		{Y: []float64{-4}, UY: 1},        // below them
		{Y: []float64{55, 55.4, 54.8, 55.3}, UY: 0.4},
	}
	for _, cc := range cals {
		c := cc.c
		res, err := c.Inverse(unknowns, nil)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range res {
			theta := []float64{c.Intercept.Value, c.Slope.Value, r.Y.Value}
			u := []float64{c.Intercept.U, c.Slope.U, r.Y.U}
			cov := [3][3]float64{{u[0] * u[0], c.Cov, 0}, {c.Cov, u[1] * u[1], 0}, {0, 0, u[2] * u[2]}}
			f := func(th []float64) float64 { return (th[2] - th[0]) / th[1] }
			var g [3]float64
			for j := range 3 {
				h := 1e-5 * u[j]
				p, m := append([]float64(nil), theta...), append([]float64(nil), theta...)
				p[j] += h
				m[j] -= h
				g[j] = (f(p) - f(m)) / (2 * h)
			}
			var v float64
			for j := range 3 {
				for k := range 3 {
					v += g[j] * cov[j][k] * g[k]
				}
			}
			near(t, cc.name+" x0", r.X.Value, f(theta), 1e-12)
			near(t, cc.name+" u(x0)", r.X.U, math.Sqrt(v), 1e-8)
			near(t, cc.name+" budget", math.Hypot(r.ULine, r.UReading), r.X.U, 1e-14)
		}
	}
}

// Equivariance as a check of the centred form: shifting every x by 10⁶
// shifts x₀ by 10⁶ and leaves u(x₀) unchanged. The uncentred formula
// u²(a) + x₀²·u²(b) + 2·x₀·cov(a, b) cancels about 12 digits there (u(a) ≈
// 10⁶·u(b)); the centred one keeps them: 1e-9 relative.
func TestInverseFarFromOrigin(t *testing.T) {
	d := readRef(t, "ref/iso28037-ex3-wtls-xy.csv")
	base := mustCalibrate(t, standardsFrom(d["x"], d["u_x"], d["y"], d["u_y"]), nil)
	const shift = 1e6
	xs := make([]float64, len(d["x"]))
	for i, x := range d["x"] {
		xs[i] = x + shift
	}
	far := mustCalibrate(t, standardsFrom(xs, d["u_x"], d["y"], d["u_y"]), nil)
	u := []eiv.Unknown{{Y: []float64{9.1}, UY: 0.3}}
	r0, _ := base.Inverse(u, nil)
	r1, err := far.Inverse(u, nil)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "x0 − shift", r1[0].X.Value-shift, r0[0].X.Value, 1e-9)
	near(t, "u(x0)", r1[0].X.U, r0[0].X.U, 1e-9)
	near(t, "u(slope)", far.Slope.U, base.Slope.U, 1e-9)
	near(t, "u(YRef)", far.YRef.U, base.YRef.U, 1e-9)
	f0, _ := base.Forward(3, 0.1)
	f1, _ := far.Forward(3+shift, 0.1)
	near(t, "forward u(y)", f1.Y.U, f0.Y.U, 1e-9)
}

// Replicate readings: ȳ per standard, u(ȳ) from the pooled replicate SD
// √(ΣΣ(y − ȳ)²/Σ(k − 1)) over √k (computed here by hand), its ν carried to
// the line and, by Welch–Satterthwaite (JCGM 100 G.4.1), to x₀; k from t at
// 95 % with ν_eff truncated.
func TestCalibrationReplicates(t *testing.T) {
	stds := []eiv.Standard{
		{X: 1, Y: []float64{2.9, 3.1, 3.05}},
		{X: 2, Y: []float64{5.0, 5.2}},
		{X: 3, Y: []float64{7.1, 6.9, 7.0, 7.2}},
		{X: 4, Y: []float64{9.0}},
		{X: 5, Y: []float64{10.8, 11.1, 11.0}},
	}
	var ss float64
	var df int
	for _, s := range stds {
		var m float64
		for _, v := range s.Y {
			m += v
		}
		m /= float64(len(s.Y))
		for _, v := range s.Y {
			ss += (v - m) * (v - m)
		}
		df += len(s.Y) - 1
	}
	sp := math.Sqrt(ss / float64(df))
	c := mustCalibrate(t, stds, nil)
	if c.Model != eiv.ModelWLS || c.PooledDOF != df || c.LineDOF != float64(df) {
		t.Fatalf("model %s, pooled ν %d, line ν %g; want wls, %d, %d", c.Model, c.PooledDOF, c.LineDOF, df, df)
	}
	near(t, "pooled SD", c.PooledSD, sp, 1e-14)
	for i, s := range c.Standards {
		near(t, "u(ȳ)", s.Y.U, sp/math.Sqrt(float64(len(stds[i].Y))), 1e-14)
		if s.Basis != eiv.BasisPooled {
			t.Errorf("standard %d basis %s", i, s.Basis)
		}
	}
	unk := []eiv.Unknown{
		{Y: []float64{6.1}},                // pooled
		{Y: []float64{8.2, 8.5, 8.3}},      // own replicates, ν = 2
		{Y: []float64{4.4, 4.6}, UY: 0.15}, // stated
	}
	res, err := c.Inverse(unk, &eiv.InverseOptions{CoverageProbability: 0.95})
	if err != nil {
		t.Fatal(err)
	}
	wantBasis := []eiv.ReadingBasis{eiv.BasisPooled, eiv.BasisReplicates, eiv.BasisStated}
	wantYDOF := []float64{float64(df), 2, math.Inf(1)}
	for i, r := range res {
		if r.Basis != wantBasis[i] || r.YDOF != wantYDOF[i] {
			t.Errorf("unknown %d: basis %s ν %g, want %s %g", i, r.Basis, r.YDOF, wantBasis[i], wantYDOF[i])
		}
		// Welch–Satterthwaite by hand from the budget: the line's two lines
		// (one pooled variance estimate, ν = 9) as one term, the reading's.
		ql := r.Budget[0].Contribution*r.Budget[0].Contribution + r.Budget[1].Contribution*r.Budget[1].Contribution
		qr := r.Budget[2].Contribution * r.Budget[2].Contribution
		ws := ql * ql / float64(df)
		if !math.IsInf(wantYDOF[i], 1) {
			ws += qr * qr / wantYDOF[i]
		}
		nu := (ql + qr) * (ql + qr) / ws
		if wantBasis[i] == eiv.BasisPooled {
			nu = float64(df) // one pooled variance estimate behind line and reading
		}
		near(t, "ν_eff", r.DOF, nu, 1e-12)
		k := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: math.Floor(nu)}.Quantile(0.975)
		near(t, "k", r.K, k, 1e-12)
		near(t, "U", r.Expanded, k*r.X.U, 1e-12)
	}
	// Unknown 1 by hand: ȳ₀ = 8.333…, s = SD/√3.
	near(t, "ȳ0", res[1].Y.Value, (8.2+8.5+8.3)/3, 1e-14)
	near(t, "u(ȳ0)", res[1].Y.U, 0.152752523165195/math.Sqrt(3), 1e-12) // SD of {8.2, 8.5, 8.3}: numpy.std(ddof=1)
	near(t, "u(ȳ0) stated", res[2].Y.U, 0.15/math.Sqrt(2), 1e-14)
}

// The validation and the three policies for an inconsistent calibration.
// χ²_0.95(4) = 9.48772903678115 (scipy.stats.chi2.ppf(0.95, 4)).
func TestCalibrationInconsistent(t *testing.T) {
	d := readRef(t, "ref/iso28037-ex2-wls-unequal.csv")
	uy := make([]float64, len(d["u_y"]))
	for i, u := range d["u_y"] {
		uy[i] = u / 2 // χ² grows fourfold: 16.5 > 9.49
	}
	s := standardsFrom(d["x"], nil, d["y"], uy)
	rep := mustCalibrate(t, s, nil)
	near(t, "quantile", rep.Validation.Quantile, 9.48772903678115, 1e-10)
	near(t, "chi2", rep.Validation.Chi2, 4*4.13080168776, 1e-10) // four times ex2's (reference file)
	if rep.Validation.Consistent || rep.Validation.Scale != 1 || !hasCode(rep.Warnings, eiv.WarnInconsistent) {
		t.Errorf("report: %+v, warnings %v", rep.Validation, rep.Warnings)
	}
	inf := mustCalibrate(t, s, &eiv.CalibrationOptions{OnInconsistent: eiv.OnInconsistentInflate})
	scale := math.Sqrt(rep.Validation.Chi2 / 4)
	near(t, "inflated u(b)", inf.Slope.U, scale*rep.Slope.U, 1e-14)
	near(t, "inflated u(a)", inf.Intercept.U, scale*rep.Intercept.U, 1e-14)
	near(t, "inflated cov", inf.Cov, scale*scale*rep.Cov, 1e-14)
	if inf.LineDOF != 4 || !hasCode(inf.Warnings, eiv.WarnInflated) {
		t.Errorf("inflate: line ν %g, warnings %v", inf.LineDOF, inf.Warnings)
	}
	_, err := eiv.Calibrate(s, &eiv.CalibrationOptions{OnInconsistent: eiv.OnInconsistentRefuse})
	var ie *eiv.InconsistentError
	if !errors.As(err, &ie) || !errors.Is(err, eiv.ErrInconsistent) || ie.DOF != 4 {
		t.Errorf("refuse: %v", err)
	}
	// A consistent calibration is untouched by every policy.
	ok := mustCalibrate(t, standardsFrom(d["x"], nil, d["y"], d["u_y"]), &eiv.CalibrationOptions{OnInconsistent: eiv.OnInconsistentRefuse})
	if !ok.Validation.Consistent || ok.Validation.Scale != 1 {
		t.Errorf("consistent: %+v", ok.Validation)
	}
}

func hasCode(ws []error, code string) bool {
	for _, w := range ws {
		var x *eiv.Warning
		if errors.As(w, &x) && x.Code == code {
			return true
		}
	}
	return false
}

// Bad input gives typed errors naming the standard, unknown, component or
// matrix entry.
func TestCalibrationErrors(t *testing.T) {
	good := func() []eiv.Standard {
		return []eiv.Standard{{X: 1, Y: []float64{3}, UY: 0.2}, {X: 2, Y: []float64{5.1}, UY: 0.2},
			{X: 3, Y: []float64{6.9}, UY: 0.2}, {X: 4, Y: []float64{9.05}, UY: 0.2}}
	}
	with := func(f func(s []eiv.Standard)) []eiv.Standard { s := good(); f(s); return s }
	eye := func(m int) [][]float64 {
		v := make([][]float64, m)
		for i := range v {
			v[i] = make([]float64, m)
			v[i][i] = 0.01
		}
		return v
	}
	cases := []struct {
		name      string
		stds      []eiv.Standard
		opt       *eiv.CalibrationOptions
		is        error
		part      string
		index     int
		col       int
		field     string
		isOptions bool
	}{
		{name: "two standards", stds: good()[:2], is: eiv.ErrTooFewPoints},
		{name: "no readings", stds: with(func(s []eiv.Standard) { s[1].Y = nil }), is: eiv.ErrNoReadings, part: "standards", index: 1, col: -1, field: "y"},
		{name: "NaN reading", stds: with(func(s []eiv.Standard) { s[2].Y = []float64{1, math.NaN()} }), is: eiv.ErrNonFinite, part: "standards", index: 2, col: -1, field: "y"},
		{name: "infinite x", stds: with(func(s []eiv.Standard) { s[3].X = math.Inf(1) }), is: eiv.ErrNonFinite, part: "standards", index: 3, col: -1, field: "x"},
		{name: "negative uy", stds: with(func(s []eiv.Standard) { s[0].UY = -1 }), is: eiv.ErrInvalidUncertainty, part: "standards", index: 0, col: -1, field: "uy"},
		{name: "negative ux", stds: with(func(s []eiv.Standard) { s[2].UX = -0.1 }), is: eiv.ErrInvalidUncertainty, part: "standards", index: 2, col: -1, field: "ux"},
		{name: "r = 1", stds: with(func(s []eiv.Standard) { s[1].R = 1 }), is: eiv.ErrInvalidCorrelation, part: "standards", index: 1, col: -1, field: "r"},
		{name: "no uy, no replicates", stds: with(func(s []eiv.Standard) { s[2].UY = 0 }), is: eiv.ErrNoUncertainty, part: "standards", index: 2, col: -1, field: "uy"},
		{name: "constant x", stds: with(func(s []eiv.Standard) {
			for i := range s {
				s[i].X = 1
			}
		}), is: eiv.ErrConstantX},
		{name: "zero slope", stds: with(func(s []eiv.Standard) {
			for i := range s {
				s[i].Y = []float64{5 + 0.1*float64(i%2)}
			}
		}), is: eiv.ErrZeroSlope},
		{name: "covariance size", stds: good(), opt: &eiv.CalibrationOptions{XCovariance: eye(3)}, is: eiv.ErrMatrixSize, part: "x_covariance", index: -1, col: -1},
		{name: "covariance row size", stds: good(), opt: &eiv.CalibrationOptions{XCovariance: func() [][]float64 { v := eye(4); v[2] = v[2][:3]; return v }()},
			is: eiv.ErrMatrixSize, part: "x_covariance", index: 2, col: -1},
		{name: "covariance asymmetric", stds: good(), opt: &eiv.CalibrationOptions{XCovariance: func() [][]float64 { v := eye(4); v[3][1] = 0.001; return v }()},
			is: eiv.ErrNotSymmetric, part: "x_covariance", index: 3, col: 1},
		{name: "covariance not PSD", stds: good(), opt: &eiv.CalibrationOptions{XCovariance: func() [][]float64 {
			v := eye(4)
			v[1][2], v[2][1] = 0.02, 0.02 // correlation 2
			return v
		}()}, is: eiv.ErrNotPSD, part: "x_covariance", index: 2, col: 2},
		{name: "covariance zero variance, nonzero covariance", stds: good(), opt: &eiv.CalibrationOptions{XCovariance: func() [][]float64 {
			v := eye(4)
			v[0][0] = 0
			v[0][3], v[3][0] = 0.001, 0.001
			return v
		}()}, is: eiv.ErrNotPSD, part: "x_covariance", index: 3, col: 0},
		{name: "covariance and ux", stds: with(func(s []eiv.Standard) { s[1].UX = 0.1 }), opt: &eiv.CalibrationOptions{XCovariance: eye(4)},
			is: eiv.ErrInvalidOption, part: "standards", index: 1, col: -1, field: "ux"},
		{name: "covariance and shared", stds: good(), opt: &eiv.CalibrationOptions{XCovariance: eye(4),
			Shared: []eiv.SharedComponent{{RelativeU: 0.01, Members: []int{0, 1}}}}, isOptions: true},
		{name: "shared member out of range", stds: good(), opt: &eiv.CalibrationOptions{
			Shared: []eiv.SharedComponent{{RelativeU: 0.01, Members: []int{0, 4}}}}, is: eiv.ErrBadMember, part: "shared_components", index: 0, col: 1, field: "members"},
		{name: "shared member twice", stds: good(), opt: &eiv.CalibrationOptions{
			Shared: []eiv.SharedComponent{{RelativeU: 0.01, Members: []int{0, 1}}, {RelativeU: 0.01, Members: []int{2, 3, 2}}}},
			is: eiv.ErrBadMember, part: "shared_components", index: 1, col: 2, field: "members"},
		{name: "shared negative", stds: good(), opt: &eiv.CalibrationOptions{
			Shared: []eiv.SharedComponent{{RelativeU: -0.01, Members: []int{0, 1}}}}, is: eiv.ErrInvalidUncertainty, part: "shared_components", index: 0, col: -1, field: "relative_u"},
		{name: "wls forced with ux", stds: with(func(s []eiv.Standard) { s[1].UX = 0.1 }), opt: &eiv.CalibrationOptions{Model: eiv.ModelWLS}, isOptions: true},
		{name: "unknown model", stds: good(), opt: &eiv.CalibrationOptions{Model: "ols"}, isOptions: true},
		{name: "unknown policy", stds: good(), opt: &eiv.CalibrationOptions{OnInconsistent: "ignore"}, isOptions: true},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := eiv.Calibrate(tc.stds, tc.opt)
			if err == nil {
				t.Fatal("no error")
			}
			if tc.isOptions {
				var oe *eiv.OptionError
				if !errors.As(err, &oe) {
					t.Errorf("%v: want an *OptionError", err)
				}
				return
			}
			if !errors.Is(err, tc.is) {
				t.Errorf("%v: want %v", err, tc.is)
			}
			if tc.part == "" {
				return
			}
			var ie *eiv.InputError
			if !errors.As(err, &ie) {
				t.Fatalf("%v: want an *InputError", err)
			}
			if ie.Part != tc.part || ie.Index != tc.index || ie.Col != tc.col || ie.Field != tc.field {
				t.Errorf("%v: at %s[%d][%d].%s, want %s[%d][%d].%s", err, ie.Part, ie.Index, ie.Col, ie.Field, tc.part, tc.index, tc.col, tc.field)
			}
		})
	}
	c := mustCalibrate(t, good(), nil)
	unk := []struct {
		name  string
		u     []eiv.Unknown
		opt   *eiv.InverseOptions
		is    error
		index int
		field string
	}{
		{"no readings", []eiv.Unknown{{Y: []float64{5}, UY: 0.1}, {}}, nil, eiv.ErrNoReadings, 1, "y"},
		{"one reading, no uy", []eiv.Unknown{{Y: []float64{5}}}, nil, eiv.ErrNoUncertainty, 0, "uy"},
		{"negative uy", []eiv.Unknown{{Y: []float64{5}, UY: -1}}, nil, eiv.ErrInvalidUncertainty, 0, "uy"},
		{"k and p", []eiv.Unknown{{Y: []float64{5}, UY: 0.1}}, &eiv.InverseOptions{CoverageFactor: 2, CoverageProbability: 0.95}, eiv.ErrInvalidOption, -1, ""},
		{"p = 1", []eiv.Unknown{{Y: []float64{5}, UY: 0.1}}, &eiv.InverseOptions{CoverageProbability: 1}, eiv.ErrInvalidOption, -1, ""},
	}
	for _, tc := range unk {
		t.Run("unknown "+tc.name, func(t *testing.T) {
			_, err := c.Inverse(tc.u, tc.opt)
			if !errors.Is(err, tc.is) {
				t.Fatalf("%v: want %v", err, tc.is)
			}
			var ie *eiv.InputError
			if tc.index >= 0 && (!errors.As(err, &ie) || ie.Part != "unknowns" || ie.Index != tc.index || ie.Field != tc.field) {
				t.Errorf("%v: want unknowns[%d].%s", err, tc.index, tc.field)
			}
		})
	}
}

// Warnings of the inverse evaluation: extrapolation outside the standards'
// x range, and a slope too uncertain for linear propagation.
func TestInverseWarnings(t *testing.T) {
	d := readRef(t, "ref/iso28037-ex1-wls-equal.csv")
	c := mustCalibrate(t, standardsFrom(d["x"], nil, d["y"], d["u_y"]), nil)
	res, err := c.Inverse([]eiv.Unknown{{Y: []float64{8}, UY: 0.5}, {Y: []float64{20}, UY: 0.5}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res[0].Warnings) != 0 || !hasCode(res[1].Warnings, eiv.WarnExtrapolation) {
		t.Errorf("warnings %v / %v", res[0].Warnings, res[1].Warnings)
	}
	// ISO ex1 has u(b)/b = 0.068; with u(y) ×2 it is 0.136 > 0.1.
	uy := []float64{1, 1, 1, 1, 1, 1}
	c2 := mustCalibrate(t, standardsFrom(d["x"], nil, d["y"], uy), nil)
	r2, _ := c2.Inverse([]eiv.Unknown{{Y: []float64{8}, UY: 0.5}}, nil)
	if !hasCode(r2[0].Warnings, eiv.WarnSlopeUncertain) {
		t.Errorf("u(b)/b = %.3g: warnings %v", c2.Slope.U/c2.Slope.Value, r2[0].Warnings)
	}
}
