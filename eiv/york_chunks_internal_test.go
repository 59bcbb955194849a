package eiv

import (
	"errors"
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
