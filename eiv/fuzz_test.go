package eiv_test

import (
	"encoding/binary"
	"math"
	"testing"

	"eivfit/eiv"
)

// floats reads little-endian float64s from data.
func floats(data []byte) []float64 {
	out := make([]float64, len(data)/8)
	for i := range out {
		out[i] = math.Float64frombits(binary.LittleEndian.Uint64(data[8*i:]))
	}
	return out
}

func finiteFit(t *testing.T, name string, f *eiv.Fit, err error) {
	t.Helper()
	if err != nil {
		return // a typed error is a valid answer to bad data
	}
	for _, v := range []float64{f.Slope.Value, f.Slope.SE, f.Slope.CI.Lower, f.Slope.CI.Upper, f.Intercept.Value,
		f.Intercept.SE, f.Intercept.CI.Lower, f.Intercept.CI.Upper, f.CovSlopeIntercept, f.ResidualSD, f.RSquared,
		f.Lambda, f.Chi2, f.MSWD, f.PValue} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Fatalf("%s returned a non-finite number without an error: %+v", name, f)
		}
	}
}

// FuzzEstimators feeds every estimator arbitrary numbers (five columns:
// x, y, σx, σy, r): each must return finite results or a typed error, never
// panic or hang.
func FuzzEstimators(f *testing.F) {
	seed := func(rows [][5]float64) []byte {
		var b []byte
		for _, r := range rows {
			for _, v := range r {
				b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
			}
		}
		return b
	}
	f.Add(seed([][5]float64{{1, 2, 0.1, 0.2, 0}, {2, 3.1, 0.1, 0.2, 0.1}, {3, 3.9, 0.2, 0.1, -0.2}, {4, 5.2, 0.1, 0.1, 0}}))
	f.Add(seed([][5]float64{{0, 5.9, 0.0316, 1, 0}, {0.9, 5.4, 0.0316, 0.745, 0}, {1.8, 4.4, 0.0447, 0.5, 0}, {2.6, 4.6, 0.0354, 0.354, 0}}))
	f.Add(seed([][5]float64{{1, 1, 0, 0, 0}, {1, 2, 0, 1, 0}, {1, 3, 1, 0, 0.99}}))
	f.Add(seed([][5]float64{{1e150, -1e150, 1e-150, 1e150, 0.5}, {-1e149, 1e149, 1, 1, -0.5}, {3, 4, 5, 6, 0}}))
	f.Add(seed([][5]float64{{math.NaN(), 1, 1, 1, 0}, {math.Inf(1), 2, 1, 1, 0}, {3, 3, 1, 1, 2}}))
	f.Fuzz(func(t *testing.T, data []byte) {
		v := floats(data)
		n := len(v) / 5
		if n > 200 {
			n = 200
		}
		x, y, sx, sy, r := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range n {
			x[i], y[i] = v[5*i], v[5*i+1]
			sx[i], sy[i] = math.Abs(v[5*i+2]), math.Abs(v[5*i+3])
			r[i] = math.Mod(v[5*i+4], 1)
		}
		fit, err := eiv.OLS(x, y, nil)
		finiteFit(t, "ols", fit, err)
		fit, err = eiv.Deming(x, y, &eiv.DemingOptions{Lambda: 1.7, Jackknife: true})
		finiteFit(t, "deming", fit, err)
		fit, err = eiv.WeightedDeming(x, y, &eiv.DemingOptions{Lambda: 0.8})
		finiteFit(t, "weighted_deming", fit, err)
		fit, err = eiv.York(x, y, sx, sy, r, &eiv.YorkOptions{Jackknife: true})
		finiteFit(t, "york", fit, err)
		if pb, err := eiv.PassingBablok(x, y, nil); err == nil {
			finiteFit(t, "passing_bablok", pb.Fit, nil)
		}
	})
}
