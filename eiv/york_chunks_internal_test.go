package eiv

import (
	"errors"
	"math/rand/v2"
	"testing"
)

// chunkedSum reports the error of the first chunk that has one, with the
// point's index made absolute, whatever order the chunks finish in.
func TestChunkedSumFirstError(t *testing.T) {
	const n = 10*yorkChunk + 5
	bad := []int{7*yorkChunk + 3, 3*yorkChunk + 11, 9 * yorkChunk}
	for range 20 {
		_, err := chunkedSum(n, func(lo, hi int) (int, error) {
			for _, b := range bad {
				if b >= lo && b < hi {
					return 0, &PointError{Index: b - lo, Field: "sy", Err: ErrDegenerate}
				}
			}
			return hi - lo, nil
		}, func(a, b int) int { return a + b })
		var pe *PointError
		if !errors.As(err, &pe) || pe.Index != 3*yorkChunk+11 {
			t.Fatalf("got %v, want the point at %d", err, 3*yorkChunk+11)
		}
	}
	total, err := chunkedSum(n, func(lo, hi int) (int, error) { return hi - lo, nil }, func(a, b int) int { return a + b })
	if err != nil || total != n {
		t.Fatalf("chunks cover %d of %d points (%v)", total, n, err)
	}
}

// TestYorkCheckGathersStartSums: the start sums checkYork gathers while it
// validates are the start pass's (startAll) bit for bit, below and above
// the chunked size and on a size that leaves a short last chunk, so the
// fit starts exactly where it did with a pass of its own.
func TestYorkCheckGathersStartSums(t *testing.T) {
	for _, n := range []int{3, 100, yorkParallelMinN - 1, yorkParallelMinN, 3*yorkChunk + 17, 200_000} {
		r := rand.New(rand.NewPCG(uint64(n), 3))
		x, y, sx, sy := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range n {
			v := 1e3 + 50*r.Float64() // far from 0, so that the sums about the first point matter
			sx[i], sy[i] = 0.1+r.Float64(), 0.1+r.Float64()
			x[i], y[i] = v+sx[i]*r.NormFloat64(), 2-0.7*v+sy[i]*r.NormFloat64()
		}
		got, err := checkYork(x, y, sx, sy, nil)
		if err != nil {
			t.Fatalf("n = %d: %v", n, err)
		}
		if want := startAll(x, y, sx, sy, x[0], y[0]); got != want {
			t.Fatalf("n = %d: checkYork's start sums %+v, startAll's %+v", n, got, want)
		}
	}
}
