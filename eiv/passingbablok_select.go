package eiv

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
)

// Slope selection for Passing–Bablok: order statistics of the n(n−1)/2
// pairwise slopes without storing them.
//
// The slopes are those the plain computation gives, s = fl(fl(y_b − y_a) /
// fl(x_b − x_a)) for points a before b in (x, y) order, +∞ for equal x; the
// selected values are bit for bit those of sorting all of them.
//
// Counting. For a threshold t, the slope of a pair is ≤ t exactly when
// u_b ≤ u_a with u = y − t·x, so #{σ ≤ t} is a count of inversions of u in
// x order, O(n log n) by merge sort (the dual of slope selection; Cole,
// Salowe, Steiger & Szemerédi 1989; Matoušek 1991; Dillencourt, Mount &
// Netanyahu 1992 — from memory). The keys are computed as fl(y − t·x) with
// one rounding (fused multiply–add), and rounded slopes may sit on the
// other side of t than the exact ones; so every pair whose keys lie within
// a bound W of each other is "ambiguous": its computed slope is compared
// with t directly. W covers the key rounding and a band of 8 units in the
// last place of t around it, wider than the rounding of a slope (three
// roundings), so a pair outside W is on the same side of t whether judged
// by the keys, by its exact slope or by its computed slope.
//
// Selection. The rank r is bracketed, #{s ≤ lo} < r ≤ #{s ≤ hi}, starting
// from (−∞, +∞]. The pairs of a bracket are the inversions of the keys at
// hi in the order of the keys at lo; a seeded uniform sample of them
// (drawn during that merge sort) gives two sample quantiles that straddle
// the target fraction, and exact counts at both shrink the bracket by about
// √(sample size). Once the bracket holds few slopes they are enumerated
// (with the ambiguous pairs at both ends) and the rank is read off. A slope
// shared by very many pairs (ties) is recognised when #{s < c} < r ≤
// #{s ≤ c}, counted at c and its predecessor.

// pbSelectCap is the number of slopes in a bracket below which they are
// enumerated; a variable so that the internal tests can exercise the
// sampling steps on small data.
var pbSelectCap int64 = 1 << 16

// pbSampleSize is the number of slopes sampled from a bracket per step;
// the first step of every rank shares one sample of up to
// pbGlobalSampleSize slopes of all pairs.
const pbSampleSize, pbGlobalSampleSize = 1 << 14, 1 << 16

type pbItem struct {
	k    float64 // key
	i, w int32   // point index (x order) and its multiplicity
}

// pbSet holds the distinct points in (x, y) order with their multiplicities.
type pbSet struct {
	ctx        context.Context
	n          int // points, with duplicates
	x, y       []float64
	w          []int32
	ntot       int64   // Σ w_a·w_b over pairs of distinct points: the slopes before −1 are dropped
	xr, ymax   float64 // x range and max |y|
	k1, k2     []float64
	items, tmp []pbItem
	pre        []int64
	rng        *rand.Rand
	last       *pbBracket
	global     []float64
}

// pbBracket is the multiset of slopes in (lo, hi] with the counts at its
// ends; vals are its distinct slopes, sorted, with multiplicities.
type pbBracket struct {
	flo, fhi int64
	vals     []pbValue
}

type pbValue struct {
	v float64
	w int64
}

// at returns the r-th smallest slope overall, which lies in the bracket.
func (b *pbBracket) at(r int64) float64 {
	c := b.flo
	for _, v := range b.vals {
		c += v.w
		if r <= c {
			return v.v
		}
	}
	return math.Inf(1)
}

var errPBInternal = errors.New("eiv: Passing–Bablok slope selection lost count (internal error)")

func newPBSet(ctx context.Context, x, y []float64) *pbSet {
	n := len(x)
	idx := make([]int32, n)
	for i := range idx {
		idx[i] = int32(i)
	}
	slices.SortFunc(idx, func(a, b int32) int {
		if x[a] != x[b] {
			return cmpFloat(x[a], x[b])
		}
		return cmpFloat(y[a], y[b])
	})
	s := &pbSet{ctx: ctx, n: n, rng: rand.New(rand.NewPCG(0x5eb1, uint64(n)))}
	for p := 0; p < n; {
		q := p + 1
		for q < n && x[idx[q]] == x[idx[p]] && y[idx[q]] == y[idx[p]] {
			q++
		}
		s.x, s.y, s.w = append(s.x, x[idx[p]]), append(s.y, y[idx[p]]), append(s.w, int32(q-p))
		p = q
	}
	m := len(s.x)
	tot := int64(n) * int64(n-1) / 2
	for _, w := range s.w {
		tot -= int64(w) * int64(w-1) / 2
	}
	s.ntot = tot
	s.xr = s.x[m-1] - s.x[0]
	for _, v := range s.y {
		s.ymax = math.Max(s.ymax, math.Abs(v))
	}
	s.k1, s.k2 = make([]float64, m), make([]float64, m)
	s.items, s.tmp, s.pre = make([]pbItem, m), make([]pbItem, m), make([]int64, m+1)
	return s
}

// slope is the pair's slope as the plain computation gives it (a before b).
func (s *pbSet) slope(a, b int32) float64 {
	dx := s.x[b] - s.x[a]
	if dx == 0 {
		return math.Inf(1)
	}
	return (s.y[b] - s.y[a]) / dx
}

// keys fills k with the keys at threshold t and returns the ambiguity bound
// W (negative when no pair is ambiguous). At t = −∞ the key order is the x
// order, at t = +∞ its reverse.
func (s *pbSet) keys(t float64, k []float64) float64 {
	switch {
	case math.IsInf(t, -1):
		for i := range k {
			k[i] = float64(i)
		}
		return -1
	case math.IsInf(t, 1):
		for i := range k {
			k[i] = -float64(i)
		}
		return -1
	}
	const u = 0x1p-53
	// Above 1e100 in magnitude the keys are (y − t·x)/|t|, so that t·x
	// cannot overflow; y/|t| adds one rounding.
	scale, tt, yerr := 1.0, t, 0.0
	if math.Abs(t) > 1e100 {
		scale, tt, yerr = math.Abs(t), math.Copysign(1, t), s.ymax/math.Abs(t)
	}
	var vmax float64
	for i := range k {
		yi := s.y[i]
		if scale != 1 {
			yi /= scale
		}
		v := math.FMA(-tt, s.x[i], yi)
		k[i] = v
		vmax = math.Max(vmax, math.Abs(v))
	}
	w := 2.25*u*(vmax+yerr) + (8*u*math.Abs(t)+0x1p-1060)*(s.xr/scale) + 0x1p-1060
	return w * (1 + 0x1p-20)
}

func (s *pbSet) fill(k []float64) []pbItem {
	it := s.items
	for i := range it {
		it[i] = pbItem{k: k[i], i: int32(i), w: s.w[i]}
	}
	return it
}

// mergeSort sorts a by key (stably) and returns Σ w_p·w_q over the pairs p
// before q with key_q ≤ key_p. visit, when set, gets each such q with the
// left-run elements it pairs with and their weight prefix sums.
func (s *pbSet) mergeSort(a []pbItem, visit func(q pbItem, left []pbItem, pre []int64) error) (int64, error) {
	n := len(a)
	src, dst := a, s.tmp[:n]
	pre := s.pre
	var c int64
	for width := 1; width < n; width *= 2 {
		if err := s.ctx.Err(); err != nil {
			return 0, err
		}
		if visit != nil {
			for i := range src {
				pre[i+1] = pre[i] + int64(src[i].w)
			}
		}
		for lo := 0; lo < n; lo += 2 * width {
			mid, hi := min(lo+width, n), min(lo+2*width, n)
			var rem int64
			for _, it := range src[lo:mid] {
				rem += int64(it.w)
			}
			i, j, o := lo, mid, lo
			for i < mid && j < hi {
				if src[j].k <= src[i].k {
					q := src[j]
					c += int64(q.w) * rem
					if visit != nil {
						if err := visit(q, src[i:mid], pre[i:mid+1]); err != nil {
							return 0, err
						}
					}
					dst[o] = q
					j++
				} else {
					rem -= int64(src[i].w)
					dst[o] = src[i]
					i++
				}
				o++
			}
			o += copy(dst[o:], src[i:mid])
			copy(dst[o:], src[j:hi])
		}
		src, dst = dst, src
	}
	if n > 0 && &src[0] != &a[0] {
		copy(a, src)
	}
	return c, nil
}

// ambiguous calls fn for every pair whose keys (sorted in it) differ by at
// most W, with a before b in x order.
func (s *pbSet) ambiguous(it []pbItem, W float64, fn func(a, b int32)) error {
	if W < 0 {
		return nil
	}
	for p := range it {
		if p&0xfff == 0 && s.ctx.Err() != nil {
			return s.ctx.Err()
		}
		for q := p + 1; q < len(it) && it[q].k-it[p].k <= W; q++ {
			a, b := it[p].i, it[q].i
			if a > b {
				a, b = b, a
			}
			fn(a, b)
		}
	}
	return nil
}

// count returns #{s ≤ t}, each slope counted with the multiplicities of its
// two points.
func (s *pbSet) count(t float64) (int64, error) {
	k := s.k1
	W := s.keys(t, k)
	it := s.fill(k)
	c, err := s.mergeSort(it, nil)
	if err != nil {
		return 0, err
	}
	err = s.ambiguous(it, W, func(a, b int32) {
		ww := int64(s.w[a]) * int64(s.w[b])
		if k[b] <= k[a] {
			c -= ww
		}
		if s.slope(a, b) <= t {
			c += ww
		}
	})
	return c, err
}

// enumerate lists the slopes in (lo, hi] and checks their number.
func (s *pbSet) enumerate(lo, hi float64, flo, fhi int64) (*pbBracket, error) {
	var vals []pbValue
	in := func(v float64) bool { return lo < v && v <= hi }
	klo, khi := s.k1, s.k2
	amb := func(k []float64, W float64, a, b int32) bool { return W >= 0 && math.Abs(k[a]-k[b]) <= W }
	wlo, whi := s.keys(lo, klo), s.keys(hi, khi)
	var cnt int
	err := s.mergeBracket(func(q pbItem, left []pbItem, _ []int64) error {
		for _, p := range left {
			a, b := p.i, q.i
			if a > b {
				a, b = b, a
			}
			if !amb(klo, wlo, a, b) && !amb(khi, whi, a, b) {
				vals = append(vals, pbValue{s.slope(a, b), int64(p.w) * int64(q.w)})
			}
		}
		if cnt += len(left); cnt > 1<<14 {
			cnt = 0
			return s.ctx.Err()
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	add := func(a, b int32) {
		if v := s.slope(a, b); in(v) {
			vals = append(vals, pbValue{v, int64(s.w[a]) * int64(s.w[b])})
		}
	}
	if err := s.ambiguous(s.sorted(klo), wlo, add); err != nil {
		return nil, err
	}
	err = s.ambiguous(s.sorted(khi), whi, func(a, b int32) {
		if !(wlo >= 0 && math.Abs(klo[a]-klo[b]) <= wlo) {
			add(a, b)
		}
	})
	if err != nil {
		return nil, err
	}
	slices.SortFunc(vals, func(p, q pbValue) int { return cmpFloat(p.v, q.v) })
	var tot int64
	out := vals[:0]
	for _, v := range vals {
		tot += v.w
		if len(out) > 0 && out[len(out)-1].v == v.v {
			out[len(out)-1].w += v.w
			continue
		}
		out = append(out, v)
	}
	if tot != fhi-flo {
		return nil, errPBInternal
	}
	return &pbBracket{flo: flo, fhi: fhi, vals: out}, nil
}

func (s *pbSet) sorted(k []float64) []pbItem {
	it := s.fill(k)
	slices.SortFunc(it, func(p, q pbItem) int { return cmpFloat(p.k, q.k) })
	return it
}

// sample draws about m slopes uniformly (by weight) from the tot pairs in
// (lo, hi].
func (s *pbSet) sample(lo, hi float64, tot int64, m int) ([]float64, error) {
	m = int(min(int64(m), 4*tot+64))
	draws := make([]int64, m)
	for i := range draws {
		draws[i] = s.rng.Int64N(tot)
	}
	slices.Sort(draws)
	out := make([]float64, 0, m)
	var run int64
	d := 0
	s.keys(lo, s.k1)
	s.keys(hi, s.k2)
	err := s.mergeBracket(func(q pbItem, left []pbItem, pre []int64) error {
		if d >= len(draws) {
			return nil
		}
		bw := int64(q.w) * (pre[len(pre)-1] - pre[0])
		for d < len(draws) && draws[d] < run+bw {
			off := (draws[d] - run) / int64(q.w)
			j, _ := slices.BinarySearchFunc(pre[1:], off, func(p, t int64) int {
				if p-pre[0] > t {
					return 1
				}
				return -1
			})
			a, b := left[j].i, q.i
			if a > b {
				a, b = b, a
			}
			if v := s.slope(a, b); lo < v && v <= hi {
				out = append(out, v)
			}
			d++
		}
		run += bw
		return nil
	})
	slices.Sort(out)
	return out, err
}

// globalSample draws, once, a sorted sample of the slopes of all pairs of
// distinct points (uniform by weight).
func (s *pbSet) globalSample() []float64 {
	if s.global != nil {
		return s.global
	}
	// A point drawn uniformly from all n (duplicates by their multiplicity).
	rep := make([]int32, 0, s.n)
	for i, w := range s.w {
		for range w {
			rep = append(rep, int32(i))
		}
	}
	pick := func() int32 { return rep[s.rng.IntN(len(rep))] }
	m := int(min(int64(pbGlobalSampleSize), int64(max(1024, 4*s.n)), 4*s.ntot+64))
	out := make([]float64, 0, m)
	for len(out) < m {
		a, b := pick(), pick()
		if a == b {
			continue
		}
		out = append(out, s.slope(min(a, b), max(a, b)))
	}
	slices.Sort(out)
	s.global = out
	return out
}

// mergeBracket runs, for the keys at lo and hi already in k1 and k2, the
// merge sort whose inversions are the pairs with slopes in (lo, hi],
// handing over blocks (a right-run element with the left-run elements it
// pairs with).
func (s *pbSet) mergeBracket(visit func(q pbItem, left []pbItem, pre []int64) error) error {
	it := s.fill(s.k1)
	if _, err := s.mergeSort(it, nil); err != nil {
		return err
	}
	for i := range it {
		it[i].k = s.k2[it[i].i]
	}
	_, err := s.mergeSort(it, visit)
	return err
}

// minusOne returns K, the number of slopes below −1, and E, the number of
// slopes of exactly −1 (which Passing–Bablok leaves out).
func (s *pbSet) minusOne() (k, e int64, err error) {
	if k, err = s.count(math.Nextafter(-1, math.Inf(-1))); err != nil {
		return 0, 0, err
	}
	le, err := s.count(-1)
	return k, le - k, err
}

// nth returns the r-th (1-based) of the slopes other than −1, given K and E.
func (s *pbSet) nth(r, k, e int64) (float64, error) {
	if r > k {
		r += e
	}
	return s.orderStat(r)
}

// orderStat returns the r-th smallest slope (1-based, all slopes of
// distinct points, −1 included).
func (s *pbSet) orderStat(r int64) (float64, error) {
	if b := s.last; b != nil && b.flo < r && r <= b.fhi {
		return b.at(r), nil
	}
	lo, hi := math.Inf(-1), math.Inf(1)
	flo, fhi := int64(0), s.ntot
	var err error
	for iter := 0; ; iter++ {
		if fhi-flo <= max(pbSelectCap, 2*int64(len(s.x))) || iter >= 64 {
			b, err := s.enumerate(lo, hi, flo, fhi)
			if err != nil {
				return 0, err
			}
			s.last = b
			return b.at(r), nil
		}
		var smp []float64
		if iter == 0 {
			smp = s.globalSample()
		} else if smp, err = s.sample(lo, hi, fhi-flo, pbSampleSize); err != nil {
			return 0, err
		}
		m := float64(len(smp))
		f := float64(r-flo) / float64(fhi-flo)
		d := 3*math.Sqrt(m*f*(1-f)) + 2
		cands := []float64{}
		if i := int(math.Floor(f*m - d)); i >= 0 {
			cands = append(cands, smp[i])
		}
		if i := int(math.Ceil(f*m + d)); i < len(smp) {
			cands = append(cands, smp[i])
		}
		for i, c := range cands {
			if i == 1 && c == cands[0] {
				continue
			}
			fc, err := s.count(c)
			if err != nil {
				return 0, err
			}
			switch {
			case fc >= r && c < hi:
				hi, fhi = c, fc
			case fc < r && c > lo:
				lo, flo = c, fc
			}
		}
		// A slope shared by many pairs at the top of the bracket: either it
		// is the answer or the bracket ends below it.
		ties := 0
		for _, v := range smp {
			if v == hi {
				ties++
			}
		}
		if 4*ties > len(smp) || len(smp) == 0 {
			p := math.Nextafter(hi, math.Inf(-1))
			fp, err := s.count(p)
			if err != nil {
				return 0, err
			}
			if fp < r {
				s.last = &pbBracket{flo: fp, fhi: fhi, vals: []pbValue{{hi, fhi - fp}}}
				return hi, nil
			}
			hi, fhi = p, fp
		}
	}
}
