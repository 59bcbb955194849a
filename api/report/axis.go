package report

import (
	"iter"
	"math"
	"slices"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
)

// An axis maps data values onto the unit interval, in which the plot
// library draws: the library only ever sees coordinates near [0, 1] and a
// fixed range, so no data (equal values, a range below one ulp, magnitudes
// near the float64 limits, subnormals) can reach its range handling or its
// tick search, which panic or loop on such ranges.
//
// Values are first scaled by the power of two 2^−e that brings the largest
// magnitude into [0.5, 1): scaling by a power of two is exact, so nothing
// overflows and subnormals keep their digits. The view is the scaled data
// range padded by 6 % each side (so that no marker or line drawn over
// the data's range touches the frame); equal values get a view of ±1/16 of their
// magnitude (±1 around zero).
type axis struct {
	e      int     // scale exponent: s(v) = v·2^−e
	lo, w  float64 // view start and width, scaled; w > 0
	ticks  []plot.Tick
	offset string // when set, tick labels show v − offset (see label)
}

// maxTicks bounds the ticks of one axis whatever the range.
const maxTicks = 12

// newAxis returns the axis that shows every finite value of vals.
func newAxis(vals ...[]float64) axis {
	seqs := make([]iter.Seq[float64], len(vals))
	for i, v := range vals {
		seqs[i] = slices.Values(v)
	}
	return axisOf(seqs...)
}

// axisOf is newAxis for values read in place (a plot's points, see pts).
func axisOf(vals ...iter.Seq[float64]) axis {
	maxAbs := 0.0
	for _, s := range vals {
		for v := range s {
			if a := math.Abs(v); a > maxAbs && !math.IsInf(a, 0) {
				maxAbs = a
			}
		}
	}
	var a axis
	if maxAbs > 0 {
		_, a.e = math.Frexp(maxAbs)
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, s := range vals {
		for v := range s {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				continue
			}
			sv := math.Ldexp(v, -a.e)
			lo, hi = math.Min(lo, sv), math.Max(hi, sv)
		}
	}
	switch {
	case lo > hi: // no values
		lo, hi = -1, 1
	case lo == hi && lo == 0:
		lo, hi = -1, 1
	case lo == hi:
		h := math.Abs(lo) / 16
		lo, hi = lo-h, hi+h
	}
	pad := 0.06 * (hi - lo)
	a.lo, a.w = lo-pad, (hi-lo)+2*pad
	a.ticks = a.makeTicks()
	return a
}

// u maps v to its coordinate: 0 and 1 at the ends of the view. The result
// is clamped to ±1e9 (far off the view, where clipping takes over), so it
// is finite for every non-NaN v.
func (a *axis) u(v float64) float64 {
	if math.IsNaN(v) {
		return math.NaN()
	}
	x := (math.Ldexp(v, -a.e) - a.lo) / a.w
	return clampFar(x)
}

func clampFar(x float64) float64 {
	const far = 1e9
	switch {
	case math.IsNaN(x):
		return x
	case x > far:
		return far
	case x < -far:
		return -far
	}
	return x
}

// label returns name with the offset the tick labels leave out, if any.
func (a *axis) label(name string) string {
	if a.offset == "" {
		return name
	}
	if rest, ok := strings.CutPrefix(a.offset, "-"); ok {
		return name + " + " + rest
	}
	return name + " − " + a.offset
}

// Ticks implements plot.Ticker: the ticks were placed by makeTicks, in the
// unit coordinates the plot library draws in.
func (a *axis) Ticks(_, _ float64) []plot.Tick { return a.ticks }

// makeTicks places about four labelled ticks at multiples of a step of
// 1, 2 or 5 × 10^k in data units. Each tick's label is written from its
// integer multiple and the exponent k, never from a rounded float, so
// neighbours never print alike. When the values would need more than seven
// significant digits, the labels show the distance from an offset near the
// middle of the view, and the axis label names the offset. At most
// maxTicks ticks are made, by a loop over a bounded count.
func (a *axis) makeTicks() []plot.Tick {
	// log10 of the view width in data units, without forming it (it may
	// exceed MaxFloat64).
	lw := math.Log10(a.w) + float64(a.e)*math.Log10(2)
	target := lw - math.Log10(4)
	k := math.Floor(target)
	f := math.Pow(10, target-k)
	var m int64
	switch {
	case f < 1.5:
		m = 1
	case f < 3.5:
		m = 2
	case f < 7.5:
		m = 5
	default:
		m, k = 1, k+1
	}
	// The step in scaled units: m·10^k·2^−e, formed in log space.
	step := float64(m) * math.Exp2(k*math.Log2(10)-float64(a.e))
	if !(step > 0) || math.IsInf(step, 0) {
		return nil
	}
	hi := a.lo + a.w
	base := 0.0 // scaled position of the offset
	if math.Max(math.Abs(a.lo), math.Abs(hi))/step > 1e6 {
		base = a.lo + a.w/2
		a.offset = strconv.FormatFloat(math.Ldexp(base, a.e), 'g', -1, 64)
	}
	j0 := math.Ceil((a.lo - base) / step)
	j1 := math.Floor((hi - base) / step)
	if j1-j0 > maxTicks || math.IsNaN(j0) || math.IsNaN(j1) {
		return nil
	}
	var out []plot.Tick
	for j := j0; j <= j1 && len(out) < maxTicks; j++ {
		pos := (base - a.lo + j*step) / a.w
		out = append(out, plot.Tick{Value: pos, Label: decimal(int64(j)*m, int(k))})
	}
	return out
}

// decimal writes M·10^k exactly: plain for magnitudes from 1e−4 to below
// 1e7, otherwise in scientific notation.
func decimal(m int64, k int) string {
	if m == 0 {
		return "0"
	}
	for m%10 == 0 {
		m /= 10
		k++
	}
	sign := ""
	if m < 0 {
		sign, m = "-", -m
	}
	s := strconv.FormatInt(m, 10)
	n := len(s)
	lead := n - 1 + k // exponent of the leading digit
	if lead < -4 || lead >= 7 {
		frac := ""
		if n > 1 {
			frac = "." + s[1:]
		}
		return sign + s[:1] + frac + "e" + strconv.Itoa(lead)
	}
	switch {
	case k >= 0:
		return sign + s + strings.Repeat("0", k)
	case n+k > 0:
		return sign + s[:n+k] + "." + s[n+k:]
	}
	return sign + "0." + strings.Repeat("0", -(n+k)) + s
}
