package eiv

import "math"

// yorkJackNodes is the number of slopes at which jackStarts gathers the
// full data's sums; yorkJackModelTol the relative secant step at which it
// takes a start: a start that close lets the refit stop after one pass
// (its slope changes by less than the jackknife's tolerance, 1e-12).
const (
	yorkJackNodes    = 6
	yorkJackModelTol = 1e-14
)

// jackStarts writes its interpolation out for six nodes; this fails to
// compile for any other number.
const _ = uint(yorkJackNodes-6) + uint(6-yorkJackNodes)

// jackStarts predicts the slope of every leave-one-out York fit, writing
// it to starts, from passes over the full data alone: York's map without
// point i is that of the full sums less point i's own terms, which cost
// O(1). The full sums are gathered about the full fit's centroid (cx, cy)
// at its slope b and at yorkJackNodes Chebyshev nodes of the slope on an
// interval that holds every refit's slope; between the nodes they are
// interpolated (barycentric form; each sum is a smooth function of the
// slope, analytic far beyond the interval, so the error falls like the
// interval's width to the power of the nodes: about 1e-12 of the slope
// when the refits move it by 1 %). A secant on each refit's map then
// finds its fixed point. The refits still iterate from these starts on
// their own data to the same tolerance, so a start costs passes, never
// accuracy: a start that is not finite or lies outside the interval is
// replaced by b. It returns false (starts untouched) when a pass fails.
func jackStarts(x, y, sx, sy, r []float64, p *jackFirst, b float64, starts []float64) bool {
	n := len(x)
	full, ok := p.all(x, y, sx, sy, r, b)
	if !ok {
		return false
	}
	// The plain step of each refit from b: how far the refits move.
	var reach float64
	for i := range n {
		pi, ok := p.point(i, b)
		if !ok {
			return false
		}
		g, _, _, _ := full.minus(pi).step()
		if !allFinite(g) {
			return false
		}
		starts[i] = g
		reach = max(reach, math.Abs(g-b))
	}
	if reach == 0 {
		for i := range starts[:n] {
			starts[i] = b
		}
		return true
	}
	h := 3 * reach
	var nodes, weights [yorkJackNodes]float64
	// sums[f][k] is field f of the full sums at node k.
	var sums [yorkSumFields][yorkJackNodes]float64
	for k := range yorkJackNodes {
		th := math.Pi * (float64(k) + 0.5) / yorkJackNodes
		nodes[k] = b + h*math.Cos(th)
		weights[k] = math.Sin(th)
		if k%2 == 1 {
			weights[k] = -weights[k]
		}
		s, ok := p.all(x, y, sx, sy, r, nodes[k])
		if !ok {
			return false
		}
		for f, v := range s.fields() {
			sums[f][k] = v
		}
	}
	model := func(i int, t float64) (float64, bool) {
		// Barycentric interpolation of the full sums at t, less point i.
		var c [yorkJackNodes]float64
		var den float64
		for k := range yorkJackNodes {
			if t == nodes[k] {
				c = [yorkJackNodes]float64{}
				c[k], den = 1, 1
				break
			}
			c[k] = weights[k] / (t - nodes[k])
			den += c[k]
		}
		inv := 1 / den
		for k := range c {
			c[k] *= inv
		}
		var v [yorkSumFields]float64
		for f := range v {
			row := &sums[f] // written out: a loop over the nodes runs 1.2× slower
			v[f] = c[0]*row[0] + c[1]*row[1] + c[2]*row[2] + c[3]*row[3] + c[4]*row[4] + c[5]*row[5]
		}
		s := sumsOf(v)
		pi, ok := p.point(i, t)
		if !ok {
			return 0, false
		}
		g, _, _, _ := s.minus(pi).step()
		return g - t, allFinite(g)
	}
	for i := range n {
		// Secant on f(t) = g_i(t) − t from t = b, where f is known exactly,
		// and the plain step's slope.
		t0, f0 := b, starts[i]-b
		t1 := starts[i]
		start := b
		for range 12 {
			f1, ok := model(i, t1)
			if !ok || f1 == f0 {
				break
			}
			t2 := t1 - f1*(t1-t0)/(f1-f0)
			if !allFinite(t2) || math.Abs(t2-b) > 2*h {
				break
			}
			start = t2
			if math.Abs(t2-t1) <= yorkJackModelTol*math.Abs(t2) {
				break
			}
			t0, f0, t1 = t1, f1, t2
		}
		starts[i] = start
	}
	return true
}

// point is the sums of York's pass of point i alone at slope b.
func (p *jackFirst) point(i int, b float64) (s yorkSums, ok bool) {
	w, al, ga, ok := p.terms(i, b, b*b)
	if ok {
		s.add(w, al, ga, p.xp[i], p.yp[i])
	}
	return s, ok
}

// all is yorkPassAll's sums at slope b about (cx, cy); the data in
// chunks on every core from yorkParallelMinN points, as yorkPassAll
// gathers them.
func (p *jackFirst) all(x, y, sx, sy, r []float64, b float64) (yorkSums, bool) {
	if len(x) < yorkParallelMinN {
		return p.part(0, len(x), b)
	}
	s, err := yorkPassAll(x, y, sx, sy, r, p.cx, p.cy, b)
	return s, err == nil
}

// minus removes the sums of a part of the data.
func (s yorkSums) minus(o yorkSums) yorkSums {
	return yorkSums{s.w - o.w, s.wx - o.wx, s.wy - o.wy, s.num - o.num, s.den - o.den,
		s.a - o.a, s.aX - o.aX, s.aY - o.aY, s.g - o.g, s.gX - o.gX, s.gY - o.gY}
}

// yorkSumFields is the number of sums in yorkSums.
const yorkSumFields = 11

// fields and sumsOf convert yorkSums to and from an array.
func (s yorkSums) fields() [yorkSumFields]float64 {
	return [...]float64{s.w, s.wx, s.wy, s.num, s.den, s.a, s.aX, s.aY, s.g, s.gX, s.gY}
}

func sumsOf(v [yorkSumFields]float64) yorkSums {
	return yorkSums{v[0], v[1], v[2], v[3], v[4], v[5], v[6], v[7], v[8], v[9], v[10]}
}

// jackFirst is what every refit's first pass shares: the refits all start
// about the full fit's centroid (cx, cy), so each point's coordinates
// about it and its variances are the same in every refit and are worked
// out once. same says every point has the same σx, σy (and ρ): a point's
// weight then depends on the slope alone and is worked out once a pass.
// The arithmetic is yorkPass's and yorkPassR's, so the sums are theirs
// bit for bit.
type jackFirst struct {
	cx, cy         float64
	xp, yp, vx, vy []float64
	rho            []float64 // nil without correlations
	same           bool
}

// newJackFirst works out the shared terms about (cx, cy).
func newJackFirst(x, y, sx, sy, r []float64, cx, cy float64) *jackFirst {
	n := len(x)
	k := 4
	if r != nil {
		k = 5
	}
	buf := make([]float64, k*n)
	p := &jackFirst{cx: cx, cy: cy, xp: buf[:n], yp: buf[n : 2*n], vx: buf[2*n : 3*n], vy: buf[3*n : 4*n], same: true}
	if r != nil {
		p.rho = buf[4*n:]
	}
	for i := range n {
		p.xp[i], p.yp[i] = x[i]-cx, y[i]-cy
		p.vx[i], p.vy[i] = sx[i]*sx[i], sy[i]*sy[i]
		p.same = p.same && p.vx[i] == p.vx[0] && p.vy[i] == p.vy[0]
		if r != nil {
			p.rho[i] = r[i] * sx[i] * sy[i]
			p.same = p.same && p.rho[i] == p.rho[0]
		}
	}
	return p
}

// skipping is passSkipping's sums at slope b about (cx, cy): the points
// before skip, then those after it. It returns false when a point's
// combined variance is not positive (passSkipping then says which).
func (p *jackFirst) skipping(skip int, b float64) (yorkSums, bool) {
	s1, ok1 := p.part(0, skip, b)
	s2, ok2 := p.part(skip+1, len(p.xp), b)
	return s1.plus(s2), ok1 && ok2
}

func (p *jackFirst) part(lo, hi int, b float64) (s yorkSums, ok bool) {
	b2 := b * b
	if p.same && lo < hi {
		w, al, ga, ok := p.terms(lo, b, b2)
		if !ok {
			return s, false
		}
		for i := lo; i < hi; i++ {
			s.add(w, al, ga, p.xp[i], p.yp[i])
		}
		return s, true
	}
	for i := lo; i < hi; i++ {
		w, al, ga, ok := p.terms(i, b, b2)
		if !ok {
			return s, false
		}
		s.add(w, al, ga, p.xp[i], p.yp[i])
	}
	return s, true
}

// terms are point i's weight W and α·W², γ·W² at slope b (b2 = b²).
func (p *jackFirst) terms(i int, b, b2 float64) (w, al, ga float64, ok bool) {
	vx, vy := p.vx[i], p.vy[i]
	if p.rho == nil {
		d := vy + b2*vx
		if !(d > 0) {
			return 0, 0, 0, false
		}
		w = 1 / d
		w2 := w * w
		return w, w2 * vy, w2 * b * vx, true
	}
	rho := p.rho[i]
	d := vy + b2*vx - 2*b*rho
	if !(d > 0) {
		return 0, 0, 0, false
	}
	w = 1 / d
	w2 := w * w
	return w, w2 * (vy - b*rho), w2 * (b*vx - rho), true
}
