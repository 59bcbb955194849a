package report

import (
	"context"
	"fmt"
	"math/rand/v2"
	"net/url"
	"strconv"
	"strings"
	"testing"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// BenchmarkFitReport builds the HTML report of a line fit of n CSV rows
// with stated uncertainties (the fit outside the timing): its time and its
// allocation per report (B/op), which bounds the service's peak memory on
// the largest CSV (TestPeakMemoryPerBody).
func BenchmarkFitReport(b *testing.B) {
	for _, n := range []int{10_000, 100_000} {
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			r := rand.New(rand.NewPCG(13, 2))
			var csv strings.Builder
			csv.WriteString("x,y,sx,sy\n")
			for range n {
				t := 10 + 90*r.Float64()
				csv.WriteString(strconv.FormatFloat(t+0.5*r.NormFloat64(), 'f', 4, 64) + "," +
					strconv.FormatFloat(2+1.1*t+0.7*r.NormFloat64(), 'f', 4, 64) + ",0.5,0.7\n")
			}
			req, err := wire.FitFromCSV(strings.NewReader(csv.String()), url.Values{})
			if err != nil {
				b.Fatal(err)
			}
			ctx := context.Background()
			res, err := study.Fit(ctx, req.Points.Data, req.Options(study.Settings{}))
			if err != nil {
				b.Fatal(err)
			}
			resp := req.Response(res)
			b.ReportAllocs()
			b.ResetTimer()
			for range b.N {
				if _, err := FitReport(ctx, req, resp, res, Made{Version: "bench"}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
