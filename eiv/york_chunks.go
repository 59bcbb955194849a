package eiv

import (
	"runtime"
	"sync"
	"sync/atomic"
)

// Large York fits split every pass over the points into chunks of
// yorkChunk points, gather each chunk's sums on whichever core is free,
// and add the chunks' sums in chunk order. The chunks depend on n alone,
// never on the number of cores, so a fit gives the same bits on one core
// or many and from run to run; below yorkParallelMinN a pass is one plain
// loop, as the sums of one chunk.
const (
	yorkChunk = 1 << 14
	// yorkParallelMinN is the n from which passes are chunked and run on
	// every core. Below it, starting the goroutines costs more than the
	// second core saves: BenchmarkYork with the chunks from 2¹² points, old
	// and new binaries interleaved 10 times on the shared 2-core machine,
	// was slower at n = 10⁴ and 1.9× faster at 3·10⁴.
	yorkParallelMinN = 1 << 15
)

// chunkedSum returns the sums part(lo, hi) over [0, n): for n below
// yorkParallelMinN part(0, n); above, the sums of the chunks
// [k·yorkChunk, (k+1)·yorkChunk) added in the order of k, the chunks
// gathered by up to GOMAXPROCS goroutines. An error is that of the
// first chunk that has one (part's *PointError indices are relative to
// lo; chunkedSum makes them absolute), so it is the error a single loop
// would stop at.
func chunkedSum[S any](n int, part func(lo, hi int) (S, error), plus func(S, S) S) (S, error) {
	if n < yorkParallelMinN {
		return part(0, n)
	}
	m := (n + yorkChunk - 1) / yorkChunk
	sums := make([]S, m)
	errs := make([]error, m)
	run := func(k int) {
		lo := k * yorkChunk
		s, err := part(lo, min(lo+yorkChunk, n))
		if pe, ok := err.(*PointError); ok {
			pe.Index += lo
		}
		sums[k], errs[k] = s, err
	}
	workers := min(runtime.GOMAXPROCS(0), m)
	if workers <= 1 {
		for k := range m {
			run(k)
		}
	} else {
		var next atomic.Int64
		var wg sync.WaitGroup
		for range workers {
			wg.Go(func() {
				for {
					k := int(next.Add(1)) - 1
					if k >= m {
						return
					}
					run(k)
				}
			})
		}
		wg.Wait()
	}
	total := sums[0]
	for k := range m {
		if errs[k] != nil {
			return total, errs[k]
		}
		if k > 0 {
			total = plus(total, sums[k])
		}
	}
	return total, nil
}

// lineSums runs a pass over every point that evaluates sums at the line of
// slope b through (cx, cy): part over all points below yorkParallelMinN,
// else chunkedSum.
func lineSums[S any](x, y, sx, sy, r []float64, b, cx, cy float64,
	part func(x, y, sx, sy, r []float64, b, cx, cy float64) S, plus func(S, S) S) S {
	if len(x) < yorkParallelMinN {
		return part(x, y, sx, sy, r, b, cx, cy)
	}
	s, _ := chunkedSum(len(x), func(lo, hi int) (S, error) {
		return part(x[lo:hi], y[lo:hi], sx[lo:hi], sy[lo:hi], rPart(r, lo, hi), b, cx, cy), nil
	}, plus)
	return s
}
