package eiv

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Gauss–Markov regression of a calibration line (ISO/TS 28037:2010 §8–9):
// the standards' x values x = ξ + e and mean readings ȳ = a + b·ξ + f, with
// the joint covariance of (e, f)
//
//	V = [ V_x   D  ]      V_x the full m×m covariance of x,
//	    [ D     V_y]      V_y = diag(u²(ȳ_i)), D = diag(r_i·u(x_i)·u(ȳ_i)).
//
// The estimates minimise the generalized distance (z − ẑ)ᵀ·V⁻¹·(z − ẑ) over
// (a, b, ξ), z = (x, ȳ). For fixed (a, b) the minimum over ξ is the
// smallest-norm error (e, f) with f − b·e = d, d = ȳ − a − b·x:
//
//	ê = (D − b·V_x)·M⁻¹·d,  ξ̂ = x − ê,  S(a, b) = dᵀ·M⁻¹·d,
//	M(b) = cov(f − b·e) = V_y + b²·V_x − 2·b·D,
//
// which needs only M positive definite (so V_x may be singular: exact x
// values, or a shared component without an independent part). Each
// Gauss–Newton step linearises b·ξ about (b_k, ξ_k); with ξ free it
// reduces to generalized least squares of t = ȳ − b_k·(x − ξ_k) on
// G = [1, ξ_k] with covariance M(b_k) (one Cholesky factorisation of M per
// step), after which ξ is re-optimised exactly. At the fixed point the
// gradient of S vanishes, and the covariance of (a, b) is the (a, b) block of
// the Gauss–Newton inverse, (GᵀM⁻¹G)⁻¹ at G = [1, ξ̂]: with a diagonal V
// this is York et al.'s (2004) and ISO/TS 28037 §7's.
//
// ErrNotSymmetric, ErrNotPSD and ErrMatrixSize are reported with the index
// of the offending row (and column) of an explicit x covariance.

// ErrBadMember: a shared component names a standard that does not exist, or one twice.
var ErrBadMember = errors.New("eiv: not the index of a standard, or named twice")

// xCovariance builds the covariance of the standards' x values (nil when
// diagonal) and sets d.vx; full says whether a covariance was given.
func xCovariance(d *calData, opt *CalibrationOptions) (vx [][]float64, full bool, err error) {
	m := len(d.x)
	if opt.XCovariance != nil {
		if len(opt.Shared) > 0 {
			return nil, false, &OptionError{Option: "x_covariance", Reason: "give either shared components or an x covariance, not both"}
		}
		if err := CheckCovariance(opt.XCovariance, m); err != nil {
			return nil, false, err
		}
		for i := range m {
			if d.ux[i] != 0 {
				return nil, false, inputErr("standards", i, "ux", fmt.Errorf(
					"%w: an x covariance is the whole covariance of x; leave ux out", ErrInvalidOption))
			}
		}
		vx = make([][]float64, m)
		for i := range m {
			vx[i] = append([]float64(nil), opt.XCovariance[i]...)
		}
		d.vx, d.explicit = vx, true
		return vx, true, nil
	}
	if len(opt.Shared) == 0 {
		return nil, false, nil
	}
	vx = make([][]float64, m)
	for i := range m {
		vx[i] = make([]float64, m)
		vx[i][i] = d.ux[i] * d.ux[i]
	}
	for c, sc := range opt.Shared {
		if !allFinite(sc.RelativeU) || sc.RelativeU < 0 {
			return nil, false, inputErr("shared_components", c, "relative_u", badU(sc.RelativeU))
		}
		if len(sc.Members) == 0 {
			return nil, false, inputErr("shared_components", c, "members", fmt.Errorf("%w: a shared component needs its standards", ErrInvalidOption))
		}
		seen := make(map[int]bool, len(sc.Members))
		for p, i := range sc.Members {
			if i < 0 || i >= m || seen[i] {
				return nil, false, &InputError{Part: "shared_components", Index: c, Col: p, Field: "members", Err: ErrBadMember}
			}
			seen[i] = true
		}
		u2 := sc.RelativeU * sc.RelativeU
		for _, i := range sc.Members {
			for _, j := range sc.Members {
				vx[i][j] += u2 * d.x[i] * d.x[j]
			}
		}
	}
	d.vx = vx
	return vx, true, nil
}

// CheckCovariance checks that v is an m×m symmetric positive
// semi-definite matrix of finite numbers, and returns an *InputError (part
// "x_covariance") naming the row, and column, at fault: the size
// (ErrMatrixSize), a non-finite entry (ErrNonFinite), a negative variance
// (ErrInvalidUncertainty), asymmetry beyond 1e-12 of √(v_ii·v_jj)
// (ErrNotSymmetric), or the first row at which the matrix stops being
// positive semi-definite (ErrNotPSD; found by a Cholesky factorisation
// without pivoting, a pivot below −1e-10·max v_ii counting as negative).
func CheckCovariance(v [][]float64, m int) error {
	const part = "x_covariance"
	if len(v) != m {
		return &InputError{Part: part, Index: -1, Col: -1, Err: fmt.Errorf("%w: %d rows for %d standards", ErrMatrixSize, len(v), m)}
	}
	var maxd float64
	for i, row := range v {
		if len(row) != m {
			return &InputError{Part: part, Index: i, Col: -1, Err: fmt.Errorf("%w: %d columns for %d standards", ErrMatrixSize, len(row), m)}
		}
		for j, e := range row {
			if !allFinite(e) {
				return &InputError{Part: part, Index: i, Col: j, Err: ErrNonFinite}
			}
		}
		if row[i] < 0 {
			return &InputError{Part: part, Index: i, Col: i, Err: fmt.Errorf("%w: negative variance", ErrInvalidUncertainty)}
		}
		maxd = math.Max(maxd, row[i])
	}
	for i := range m {
		for j := range i {
			if math.Abs(v[i][j]-v[j][i]) > 1e-12*math.Sqrt(v[i][i]*v[j][j]) {
				return &InputError{Part: part, Index: i, Col: j, Err: ErrNotSymmetric}
			}
		}
	}
	// Cholesky without pivoting, semi-definite: a zero pivot needs a zero
	// remaining column below it.
	tol := 1e-10 * maxd
	l := make([][]float64, m)
	for i := range m {
		l[i] = make([]float64, i+1)
	}
	for k := range m {
		s := v[k][k]
		for j := range k {
			s -= l[k][j] * l[k][j]
		}
		if s < -tol {
			return &InputError{Part: part, Index: k, Col: k, Err: fmt.Errorf(
				"%w: with the rows before it, row %d leaves a negative variance", ErrNotPSD, k)}
		}
		zero := s <= tol
		if !zero {
			l[k][k] = math.Sqrt(s)
		}
		for i := k + 1; i < m; i++ {
			t := v[i][k]
			for j := range k {
				t -= l[i][j] * l[k][j]
			}
			if zero {
				if math.Abs(t) > 1e-8*math.Sqrt(math.Max(v[i][i], tol)*math.Max(v[k][k], tol)) {
					return &InputError{Part: part, Index: i, Col: k, Err: fmt.Errorf(
						"%w: row %d has no variance left for its covariance with row %d", ErrNotPSD, k, i)}
				}
				continue
			}
			l[i][k] = t / l[k][k]
		}
	}
	return nil
}

// solveGMR minimises the generalized distance with the full covariance.
func solveGMR(d *calData, vx [][]float64) (*lineSolution, error) {
	m := len(d.x)
	if vx == nil {
		vx = make([][]float64, m)
		for i := range m {
			vx[i] = make([]float64, m)
			vx[i][i] = d.ux[i] * d.ux[i]
		}
	}
	rho := make([]float64, m)
	sx := make([]float64, m)
	rs := make([]float64, m)
	for i := range m {
		sx[i] = math.Sqrt(vx[i][i])
		rho[i] = d.r[i] * d.xSD(i) * d.uy[i]
		if sx[i] > 0 && d.uy[i] > 0 {
			rs[i] = rho[i] / (sx[i] * d.uy[i])
		}
	}
	// Start: York's line with the diagonal of the covariance.
	f, err := York(d.x, d.y, sx, d.uy, rs, nil)
	if err != nil {
		var pe *PointError
		if errors.As(err, &pe) {
			return nil, inputErr("standards", pe.Index, map[string]string{"sx": "ux", "sy": "uy"}[pe.Field], pe.Err)
		}
		return nil, err
	}
	xc, yc := origin(d.x, d.y)
	X := make([]float64, m)
	Y := make([]float64, m)
	for i := range m {
		X[i], Y[i] = d.x[i]-xc, d.y[i]-yc
	}
	g := &gmr{m: m, X: X, Y: Y, vx: vx, uy: d.uy, rho: rho,
		msym: mat.NewSymDense(m, nil), rhs: mat.NewDense(m, 3, nil), sol: mat.NewDense(m, 3, nil),
		dv: mat.NewVecDense(m, nil), wd: mat.NewVecDense(m, nil)}
	b := f.Slope.Value
	ac := f.Intercept.Value + b*xc - yc
	xi := make([]float64, m)
	s, err := g.profile(ac, b, xi)
	if err != nil {
		return nil, err
	}
	const maxIter = 500
	prevChange := math.Inf(1)
	iter := 0
	for iter = 1; iter <= maxIter; iter++ {
		na, nb, err := g.step(b, xi)
		if err != nil {
			return nil, err
		}
		// Step halving keeps S from rising (Gauss–Newton safeguard).
		nxi := make([]float64, m)
		ns, err := g.profile(na, nb, nxi)
		for h := 0; (err != nil || ns > s*(1+1e-13)+1e-300) && h < 40; h++ {
			na, nb = ac+(na-ac)/2, b+(nb-b)/2
			ns, err = g.profile(na, nb, nxi)
		}
		if err != nil {
			return nil, err
		}
		change := math.Abs(nb - b)
		if nb != 0 {
			change /= math.Abs(nb)
		}
		ac, b, s, xi = na, nb, ns, nxi
		if change <= 1e-15 || (change < 1e-12 && change >= prevChange) {
			break
		}
		prevChange = change
	}
	if iter > maxIter {
		return nil, &ConvergenceError{Method: Method(ModelGMR), Iterations: maxIter, Change: prevChange}
	}
	// Closing pass: M at the solution, GᵀM⁻¹G at the adjusted points.
	if err := g.factor(b); err != nil {
		return nil, err
	}
	ln := &lineSolution{xc: xc, yc: yc, ac: ac, b: b, xi: xi, mdiag: make([]float64, m), chi2: s, iter: f.Iterations + iter}
	for i := range m {
		ln.mdiag[i] = g.msym.At(i, i)
	}
	ones := mat.NewVecDense(m, nil)
	for i := range m {
		ones.SetVec(i, 1)
	}
	w1 := mat.NewVecDense(m, nil)
	if err := g.chol.SolveVecTo(w1, ones); err != nil {
		return nil, fmt.Errorf("%w: %v", ErrDegenerate, err)
	}
	for i := range m {
		ln.s0 += w1.AtVec(i)
		ln.s1 += w1.AtVec(i) * xi[i]
	}
	xbar := ln.s1 / ln.s0
	e := mat.NewVecDense(m, nil)
	for i := range m {
		e.SetVec(i, xi[i]-xbar)
	}
	we := mat.NewVecDense(m, nil)
	if err := g.chol.SolveVecTo(we, e); err != nil {
		return nil, fmt.Errorf("%w: %v", ErrDegenerate, err)
	}
	ln.s2 = mat.Dot(e, we)
	return ln, nil
}

// xSD is the standard deviation of x_i that the correlation r multiplies:
// the independent part ux, or √V_x,ii for an explicit covariance.
func (d *calData) xSD(i int) float64 {
	if d.explicit {
		return math.Sqrt(d.vx[i][i])
	}
	return d.ux[i]
}

// gmr holds the data (centred) and scratch of the Gauss–Markov iteration.
type gmr struct {
	m          int
	X, Y       []float64
	vx         [][]float64
	uy, rho    []float64
	msym       *mat.SymDense
	chol       mat.Cholesky
	rhs, sol   *mat.Dense
	dv, wd     *mat.VecDense
	factoredAt float64
	factored   bool
}

// factor sets M(b) and its Cholesky factor.
func (g *gmr) factor(b float64) error {
	if g.factored && g.factoredAt == b {
		return nil
	}
	for i := range g.m {
		for j := i; j < g.m; j++ {
			v := b * b * g.vx[i][j]
			if i == j {
				v += g.uy[i]*g.uy[i] - 2*b*g.rho[i]
			}
			g.msym.SetSym(i, j, v)
		}
	}
	if ok := g.chol.Factorize(g.msym); !ok {
		g.factored = false
		return fmt.Errorf("%w: the covariance of the residuals about the line, u²(y) + b²·V_x − 2b·cov(x, y), is not positive definite at b = %.6g", ErrDegenerate, b)
	}
	g.factored, g.factoredAt = true, b
	return nil
}

// profile evaluates S(a, b) = dᵀM⁻¹d and writes the optimal ξ into xi.
func (g *gmr) profile(a, b float64, xi []float64) (float64, error) {
	if err := g.factor(b); err != nil {
		return 0, err
	}
	for i := range g.m {
		g.dv.SetVec(i, g.Y[i]-a-b*g.X[i])
	}
	if err := g.chol.SolveVecTo(g.wd, g.dv); err != nil {
		return 0, fmt.Errorf("%w: %v", ErrDegenerate, err)
	}
	s := mat.Dot(g.dv, g.wd)
	// ê = (D − b·V_x)·w, w = M⁻¹d.
	for i := range g.m {
		e := g.rho[i] * g.wd.AtVec(i)
		row := g.vx[i]
		var t float64
		for j := range g.m {
			t += row[j] * g.wd.AtVec(j)
		}
		e -= b * t
		xi[i] = g.X[i] - e
	}
	if !allFinite(s) {
		return 0, fmt.Errorf("%w: the generalized distance overflows", ErrDegenerate)
	}
	return s, nil
}

// step is one Gauss–Newton step: GLS of t = Y − b·(X − ξ) on [1, ξ] with
// covariance M(b), in coordinates centred at the weighted mean of ξ.
func (g *gmr) step(b float64, xi []float64) (a, nb float64, err error) {
	if err := g.factor(b); err != nil {
		return 0, 0, err
	}
	for i := range g.m {
		g.rhs.Set(i, 0, 1)
		g.rhs.Set(i, 1, xi[i])
		g.rhs.Set(i, 2, g.Y[i]-b*(g.X[i]-xi[i]))
	}
	if err := g.chol.SolveTo(g.sol, g.rhs); err != nil {
		return 0, 0, fmt.Errorf("%w: %v", ErrDegenerate, err)
	}
	var s0, s1, st float64
	for i := range g.m {
		s0 += g.sol.At(i, 0)
		s1 += g.sol.At(i, 1)
		st += g.sol.At(i, 2)
	}
	xb, tb := s1/s0, st/s0
	// With u = ξ − x̄ξ: slope = uᵀM⁻¹(t − t̄)/uᵀM⁻¹u, using M⁻¹u = M⁻¹ξ − x̄ξ·M⁻¹1.
	var num, den float64
	for i := range g.m {
		wu := g.sol.At(i, 1) - xb*g.sol.At(i, 0)
		num += wu * (g.rhs.At(i, 2) - tb)
		den += wu * (xi[i] - xb)
	}
	nb = num / den
	a = tb - nb*xb
	if !allFinite(a, nb) {
		return 0, 0, fmt.Errorf("%w: the Gauss–Markov iteration left the finite range", ErrDegenerate)
	}
	return a, nb, nil
}
