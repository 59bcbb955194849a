package eiv

import "math"

// yorkJackNodes is the number of slopes at which jackStarts gathers the
// full data's sums.
const yorkJackNodes = 6

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
func jackStarts(x, y, sx, sy, r []float64, cx, cy, b float64, starts []float64) bool {
	n := len(x)
	full, err := yorkPassAll(x, y, sx, sy, r, cx, cy, b)
	if err != nil {
		return false
	}
	// The plain step of each refit from b: how far the refits move.
	var reach float64
	for i := range n {
		p, ok := pointSums(x, y, sx, sy, r, i, cx, cy, b)
		if !ok {
			return false
		}
		g, _, _, _ := full.minus(p).step()
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
	var sums [yorkJackNodes]yorkSums
	for k := range yorkJackNodes {
		th := math.Pi * (float64(k) + 0.5) / yorkJackNodes
		nodes[k] = b + h*math.Cos(th)
		weights[k] = math.Sin(th)
		if k%2 == 1 {
			weights[k] = -weights[k]
		}
		sums[k], err = yorkPassAll(x, y, sx, sy, r, cx, cy, nodes[k])
		if err != nil {
			return false
		}
	}
	model := func(i int, t float64) (float64, bool) {
		// Barycentric interpolation of the full sums at t, less point i.
		var s yorkSums
		var den float64
		var c [yorkJackNodes]float64
		for k := range yorkJackNodes {
			if t == nodes[k] {
				s = sums[k]
				den = 0
				break
			}
			c[k] = weights[k] / (t - nodes[k])
			den += c[k]
		}
		if den != 0 {
			for k := range yorkJackNodes {
				s = s.plus(sums[k].scaled(c[k] / den))
			}
		}
		p, ok := pointSums(x, y, sx, sy, r, i, cx, cy, t)
		if !ok {
			return 0, false
		}
		g, _, _, _ := s.minus(p).step()
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
			if math.Abs(t2-t1) <= 1e-15*math.Abs(t2) {
				break
			}
			t0, f0, t1 = t1, f1, t2
		}
		starts[i] = start
	}
	return true
}

// pointSums are the sums of York's pass of point i alone.
func pointSums(x, y, sx, sy, r []float64, i int, cx, cy, b float64) (yorkSums, bool) {
	var s yorkSums
	var err error
	if r == nil {
		s, err = yorkPass(x[i:i+1], y[i:i+1], sx[i:i+1], sy[i:i+1], cx, cy, b)
	} else {
		s, err = yorkPassR(x[i:i+1], y[i:i+1], sx[i:i+1], sy[i:i+1], r[i:i+1], cx, cy, b)
	}
	return s, err == nil
}

// minus removes the sums of a part of the data.
func (s yorkSums) minus(o yorkSums) yorkSums {
	return yorkSums{s.w - o.w, s.wx - o.wx, s.wy - o.wy, s.num - o.num, s.den - o.den,
		s.a - o.a, s.aX - o.aX, s.aY - o.aY, s.g - o.g, s.gX - o.gX, s.gY - o.gY}
}

// scaled multiplies every sum by c.
func (s yorkSums) scaled(c float64) yorkSums {
	return yorkSums{s.w * c, s.wx * c, s.wy * c, s.num * c, s.den * c,
		s.a * c, s.aX * c, s.aY * c, s.g * c, s.gX * c, s.gY * c}
}
