// Package wiretest holds request bodies shared by the benchmarks and the
// measurement tools, so that `go test -bench SmallFit`, `eivfit bench` and
// `eivfit load` send the same request and their figures compare.
package wiretest

import (
	"fmt"
	"math/rand/v2"
	"strings"
)

// SmallFit is the body of a small fit request (POST /v1/fit, JSON): 40
// points on y = 0.1 + 1.03·t with x in [5, 25], errors of SD 0.2 in x and
// 0.25 in y stated per point, fitted by OLS, Deming and York. The points
// come from a fixed seed, so the body is the same on every call.
func SmallFit() []byte {
	r := rand.New(rand.NewPCG(5, 5))
	pts := make([]string, 0, 40)
	for range 40 {
		t := 5 + 20*r.Float64()
		pts = append(pts, fmt.Sprintf(`{"x":%.4f,"y":%.4f,"sx":0.2,"sy":0.25}`, t+0.2*r.NormFloat64(), 0.1+1.03*t+0.25*r.NormFloat64()))
	}
	return []byte(`{"points":[` + strings.Join(pts, ",") + `],"methods":["ols","deming","york"]}`)
}
