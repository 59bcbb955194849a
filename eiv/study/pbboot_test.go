package study_test

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"

	"eivfit/eiv"
	"eivfit/eiv/study"
)

// TestPassingBablokBootstrapSE: when a Passing–Bablok verdict is judged on
// the bootstrap interval, the SE beside it is the bootstrap SE — the SD of
// the bootstrap replicates of a + b·x₀ with divisor B − 1 (Efron &
// Tibshirani 1993, eq. 6.6), computed here from the replicates — and not
// the jackknife SE of the prediction. Data: Bland & Altman (1986) peak
// flow, both readings averaged (as in ExampleCompare). Tolerance 1e-12
// relative: the same sum in another order.
func TestPassingBablokBootstrapSE(t *testing.T) {
	a := [][]float64{{494, 490}, {395, 397}, {516, 512}, {434, 401}, {476, 470}, {557, 611}, {413, 415}, {442, 431},
		{650, 638}, {433, 429}, {417, 420}, {656, 633}, {267, 275}, {478, 492}, {178, 165}, {423, 372}, {427, 421}}
	b := [][]float64{{512, 525}, {430, 415}, {520, 508}, {428, 444}, {500, 500}, {600, 625}, {364, 460}, {380, 390},
		{658, 642}, {445, 432}, {432, 420}, {626, 605}, {260, 227}, {477, 467}, {259, 268}, {350, 370}, {451, 443}}
	var samples study.Samples
	for i := range a {
		samples = append(samples, study.Sample{ID: fmt.Sprint("P", i+1), X: b[i], Y: a[i]})
	}
	seed, limit, level := uint64(3), 20.0, 400.0
	c, err := study.Compare(context.Background(), samples, &study.CompareOptions{
		DecisionLevels: []study.DecisionLevel{{Level: level}}, Allowable: &study.Allowable{Absolute: &limit},
		Bootstrap: &study.BootstrapOptions{Resamples: 400, Seed: &seed}})
	if err != nil {
		t.Fatal(err)
	}
	for _, lf := range c.DecisionLevels[0].Fits {
		if lf.Method.Name != "passing_bablok" {
			continue
		}
		if !strings.HasPrefix(lf.Bias.CI.Method, "bootstrap") {
			t.Fatalf("verdict interval %q, want the bootstrap's", lf.Bias.CI.Method)
		}
		var f *study.MethodResult
		for _, m := range c.Fits {
			if m.Method.Name == "passing_bablok" {
				f = m
			}
		}
		reps := f.Bootstrap.Result.Replicates(func(l []eiv.Line) float64 { return l[0].Intercept + l[0].Slope*level })
		var m, ss float64
		for _, v := range reps {
			m += v
		}
		m /= float64(len(reps))
		for _, v := range reps {
			ss += (v - m) * (v - m)
		}
		want := math.Sqrt(ss / float64(len(reps)-1))
		if math.Abs(lf.Bias.SE-want) > 1e-12*want {
			t.Errorf("SE beside the bootstrap interval %.12g, bootstrap SD %.12g (jackknife SE %.6g)", lf.Bias.SE, want, lf.At.Bias.SE)
		}
		if lf.Bias.SE == lf.At.Bias.SE {
			t.Error("the SE is still the jackknife's")
		}
		return
	}
	t.Fatal("no Passing–Bablok verdict")
}
