package wire

import (
	"bytes"
	"fmt"
	"runtime"
	"testing"

	"eivfit/api/wire/wiretest"
)

// BenchmarkDecodeJSON reads a fit request of n points (x, y, sx, sy) as
// the server does (a *Body it read: no copy) and through an io.Reader (a
// copy first), on every core and on one. Besides the wall time it reports
// the CPU time of an operation (cpu-ns/op, all threads, GC included): on
// a shared machine the wall time counts other programs' turns, the CPU
// time less so.
func BenchmarkDecodeJSON(b *testing.B) {
	for _, n := range []int{1000, 1_000_000} {
		_, j := payloads(n)
		for _, procs := range []int{runtime.GOMAXPROCS(0), 1} {
			for _, via := range []string{"body", "reader"} {
				b.Run(fmt.Sprintf("n=%d/procs=%d/%s", n, procs, via), func(b *testing.B) {
					defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
					b.ReportAllocs()
					b.SetBytes(int64(len(j)))
					cpu := wiretest.CPUTime()
					for b.Loop() {
						var req *FitRequest
						var err error
						if via == "body" {
							req, err = DecodeFitJSON(NewBody(j, nil))
						} else {
							req, err = DecodeFitJSON(bytes.NewReader(j))
						}
						if err != nil || req.Points.Len() != n {
							b.Fatal(err)
						}
					}
					wiretest.ReportCPU(b, cpu)
				})
			}
		}
	}
}
