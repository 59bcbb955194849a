package eiv

import (
	"math"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestResult is the outcome of a hypothesis test.
type TestResult struct {
	Statistic float64
	PValue    float64
	// Detail names the variant (for example "two-sided, normal approximation").
	Detail string
}

// ShapiroWilk returns the Shapiro–Wilk W statistic and its p-value by
// Royston's (1995, Appl. Stat. 44:547, algorithm AS R94) approximations,
// for 3 ≤ n ≤ 5000:
//
//	m_i = Φ⁻¹((i − 3/8)/(n + 1/4)),  u = 1/√n
//	a_n = m_n/‖m‖ + 0.221157u − 0.147981u² − 2.071190u³ + 4.434685u⁴ − 2.706056u⁵
//	a_{n−1} = m_{n−1}/‖m‖ + 0.042981u − 0.293762u² − 1.752461u³ + 5.682633u⁴ − 3.582633u⁵
//	a_i = m_i/√φ otherwise, with φ normalising Σa² = 1 (a antisymmetric)
//	W = (Σ a_i x₍ᵢ₎)² / Σ(x_i − x̄)²
//
// The p-value uses the exact form for n = 3 and Royston's normalising
// transformations of log(1 − W) for n ≥ 4.
func ShapiroWilk(x []float64) (TestResult, error) {
	n := len(x)
	if n < 3 {
		return TestResult{}, ErrTooFewPoints
	}
	if n > 5000 {
		return TestResult{}, &OptionError{Option: "n", Reason: "Shapiro–Wilk's approximations hold for n ≤ 5000"}
	}
	s := slices.Clone(x)
	slices.Sort(s)
	if s[n-1]-s[0] <= 0 {
		return TestResult{}, ErrDegenerate
	}
	a := swCoefficients(n)
	var mean float64
	for _, v := range s {
		mean += v
	}
	mean /= float64(n)
	var num, ss float64
	for i, v := range s {
		num += a[i] * (v - mean)
		ss += (v - mean) * (v - mean)
	}
	w := num * num / ss
	w = math.Min(w, 1)
	return TestResult{Statistic: w, PValue: swPValue(w, n), Detail: "Royston (1995) AS R94"}, nil
}

func poly(c []float64, x float64) float64 {
	r := 0.0
	for i := len(c) - 1; i >= 0; i-- {
		r = r*x + c[i]
	}
	return r
}

// swCoefficients returns the antisymmetric coefficients a_1..a_n (a_1 < 0).
func swCoefficients(n int) []float64 {
	a := make([]float64, n)
	if n == 3 {
		a[0], a[2] = -math.Sqrt(0.5), math.Sqrt(0.5)
		return a
	}
	m := make([]float64, n)
	var mm float64
	an25 := float64(n) + 0.25
	for i := range n {
		m[i] = distuv.UnitNormal.Quantile((float64(i+1) - 0.375) / an25)
		mm += m[i] * m[i]
	}
	u := 1 / math.Sqrt(float64(n))
	rm := math.Sqrt(mm)
	an := m[n-1]/rm + poly([]float64{0, 0.221157, -0.147981, -2.071190, 4.434685, -2.706056}, u)
	var phi float64
	a[n-1], a[0] = an, -an
	first := 1
	if n > 5 {
		an1 := m[n-2]/rm + poly([]float64{0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633}, u)
		a[n-2], a[1] = an1, -an1
		phi = (mm - 2*m[n-1]*m[n-1] - 2*m[n-2]*m[n-2]) / (1 - 2*an*an - 2*an1*an1)
		first = 2
	} else {
		phi = (mm - 2*m[n-1]*m[n-1]) / (1 - 2*an*an)
	}
	rp := math.Sqrt(phi)
	for i := first; i < n-first; i++ {
		a[i] = m[i] / rp
	}
	return a
}

func swPValue(w float64, n int) float64 {
	if n == 3 {
		// Exact for n = 3 (Royston 1995): p = (6/π)(asin √W − asin √(3/4)).
		p := 6 / math.Pi * (math.Asin(math.Sqrt(w)) - math.Asin(math.Sqrt(0.75)))
		return math.Max(0, math.Min(1, p))
	}
	an := float64(n)
	y := math.Log1p(-w)
	var mu, sigma float64
	if n <= 11 {
		gamma := poly([]float64{-2.273, 0.459}, an)
		if y >= gamma {
			return 1e-99 // W so small that the transformation leaves its range
		}
		y = -math.Log(gamma - y)
		mu = poly([]float64{0.5440, -0.39978, 0.025054, -6.714e-4}, an)
		sigma = math.Exp(poly([]float64{1.3822, -0.77857, 0.062767, -0.0020322}, an))
	} else {
		ln := math.Log(an)
		mu = poly([]float64{-1.5861, -0.31082, -0.083751, 0.0038915}, ln)
		sigma = math.Exp(poly([]float64{-0.4803, -0.082676, 0.0030302}, ln))
	}
	return normalSF((y - mu) / sigma)
}

// QQPoint is one point of a normal Q-Q plot.
type QQPoint struct {
	Theoretical float64 // standard normal quantile at the plotting position
	Sample      float64 // the ordered standardized value
	Index       int     // index of the value in the input
}

// NormalQQ returns the standardized values (z = (v − mean)/SD) in order
// against the standard normal quantiles at Blom's plotting positions
// (i − 3/8)/(n + 1/4), with the reference line of slope 1 through 0.
func NormalQQ(v []float64) []QQPoint {
	n := len(v)
	if n < 2 {
		return nil
	}
	z := standardizer(v)
	// The points are sorted in place by value (ties in input order), with
	// no index array beside them.
	out := make([]QQPoint, n)
	for i, x := range v {
		out[i] = QQPoint{Sample: z(x), Index: i}
	}
	slices.SortStableFunc(out, func(a, b QQPoint) int { return cmpFloat(v[a.Index], v[b.Index]) })
	for r := range out {
		out[r].Theoretical = BlomQuantile(r, n)
	}
	return out
}

// NormalQQSample is the Sample of NormalQQ's points without their
// indices: the standardized values in ascending order, point r against
// BlomQuantile(r, n) (a third of NormalQQ's memory).
func NormalQQSample(v []float64) []float64 {
	if len(v) < 2 {
		return nil
	}
	z := standardizer(v)
	s := slices.Clone(v)
	slices.Sort(s) // z is increasing, so the order of v is the order of z
	for i, x := range s {
		s[i] = z(x)
	}
	return s
}

// BlomQuantile is the standard normal quantile at Blom's plotting
// position (r + 1 − 3/8)/(n + 1/4) of the r-th (from 0) of n ordered
// values.
func BlomQuantile(r, n int) float64 {
	return distuv.UnitNormal.Quantile((float64(r+1) - 0.375) / (float64(n) + 0.25))
}

// standardizer returns z(x) = (x − mean)/SD of v (0 when the SD is 0).
func standardizer(v []float64) func(float64) float64 {
	n := len(v)
	var mean float64
	for _, x := range v {
		mean += x
	}
	mean /= float64(n)
	var ss float64
	for _, x := range v {
		ss += (x - mean) * (x - mean)
	}
	sd := math.Sqrt(ss / float64(n-1))
	return func(x float64) float64 {
		if sd > 0 {
			return (x - mean) / sd
		}
		return 0
	}
}
