package eiv

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// intN draws the same numbers as math/rand/v2's Rand.IntN on the same PCG
// stream (the bootstrap's resamples must not depend on which of the two
// drew them), including bounds that are powers of two and bounds near
// 2⁶³ where the rejection step runs often.
func TestIntNMatchesRandIntN(t *testing.T) {
	for _, c := range []struct {
		name string
		n    int
	}{
		{"one", 1},
		{"small", 7},
		{"hundred", 100},
		{"power of two", 1 << 10},
		{"million", 1_000_000},
		{"near 2^63 (frequent rejection)", 1<<62 + 1<<61 + 12345},
	} {
		t.Run(c.name, func(t *testing.T) {
			var w bootWorker
			w.rng = rand.New(&w.pcg)
			ref := rand.New(rand.NewPCG(9, 4))
			w.pcg.Seed(9, 4)
			for i := range 20_000 {
				if got, want := w.intN(c.n), ref.IntN(c.n); got != want {
					t.Fatalf("draw %d: intN = %d, Rand.IntN = %d", i, got, want)
				}
			}
		})
	}
}

// orderStats gives the quantiles of sorting (Hyndman & Fan definition 7 on
// the sorted values), whatever the order in which they are asked for.
func TestOrderStatsMatchesSorting(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 8))
	random := func(n int, levels int) []float64 {
		v := make([]float64, n)
		for i := range v {
			if levels > 0 {
				v[i] = float64(r.IntN(levels))
			} else {
				v[i] = r.NormFloat64()
			}
		}
		return v
	}
	ascending := make([]float64, 5000)
	for i := range ascending {
		ascending[i] = float64(i)
	}
	descending := slices.Clone(ascending)
	slices.Reverse(descending)
	ps := []float64{0.975, 0.025, 0.5, 0.0231, 0.9712, 0, 1, 0.999999, 1e-9}
	for _, c := range []struct {
		name string
		v    []float64
	}{
		{"one value", []float64{2.5}},
		{"two values", []float64{3, 1}},
		{"short", random(11, 0)},
		{"normal 10⁴", random(10_000, 0)},
		{"heavy ties", random(10_000, 7)},
		{"all equal", random(3000, 1)},
		{"ascending", ascending},
		{"descending", descending},
	} {
		t.Run(c.name, func(t *testing.T) {
			sorted := slices.Clone(c.v)
			slices.Sort(sorted)
			o := orderStats{v: slices.Clone(c.v)}
			for _, p := range ps {
				if got, want := o.quantile7(p), quantile7(sorted, p); math.Float64bits(got) != math.Float64bits(want) {
					t.Errorf("p = %v: selection %v, sorting %v", p, got, want)
				}
			}
		})
	}
}
