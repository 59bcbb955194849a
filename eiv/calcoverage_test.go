package eiv_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"eivfit/eiv"
)

// calScenario simulates one calibration and one unknown with a known true x₀.
type calScenario struct {
	name string
	// draw returns the standards, the options, the unknown and its true x₀.
	draw func(r *rand.Rand) ([]eiv.Standard, *eiv.CalibrationOptions, eiv.Unknown, float64)
}

// True line y = 1 + 2·x, standards at x = 1..6, unknown at x₀ = 3.7.
const covA, covB, covX0 = 1.0, 2.0, 3.7

var calScenarios = []calScenario{
	{"gdr: u(x) 0.05, u(y) 0.3, one reading", func(r *rand.Rand) ([]eiv.Standard, *eiv.CalibrationOptions, eiv.Unknown, float64) {
		s := make([]eiv.Standard, 6)
		for i := range s {
			xt := float64(i + 1)
			s[i] = eiv.Standard{X: xt + 0.05*r.NormFloat64(), UX: 0.05, Y: []float64{covA + covB*xt + 0.3*r.NormFloat64()}, UY: 0.3}
		}
		return s, nil, eiv.Unknown{Y: []float64{covA + covB*covX0 + 0.3*r.NormFloat64()}, UY: 0.3}, covX0
	}},
	{"gmr: stock 2 % shared by all, u(x) 0.02, u(y) 0.2", func(r *rand.Rand) ([]eiv.Standard, *eiv.CalibrationOptions, eiv.Unknown, float64) {
		s := make([]eiv.Standard, 6)
		stock := 0.02 * r.NormFloat64() // one draw for all: the shared error
		for i := range s {
			xt := float64(i + 1)
			s[i] = eiv.Standard{X: xt*(1+stock) + 0.02*r.NormFloat64(), UX: 0.02, Y: []float64{covA + covB*xt + 0.2*r.NormFloat64()}, UY: 0.2}
		}
		opt := &eiv.CalibrationOptions{Shared: []eiv.SharedComponent{{Name: "stock", RelativeU: 0.02, Members: []int{0, 1, 2, 3, 4, 5}}}}
		return s, opt, eiv.Unknown{Y: []float64{covA + covB*covX0 + 0.2*r.NormFloat64()}, UY: 0.2}, covX0
	}},
	{"wls: 3 replicates per standard, pooled SD (ν = 12) for line and unknown", func(r *rand.Rand) ([]eiv.Standard, *eiv.CalibrationOptions, eiv.Unknown, float64) {
		s := replicateStandards(r)
		return s, nil, eiv.Unknown{Y: []float64{covA + covB*covX0 + 0.3*r.NormFloat64()}}, covX0
	}},
}

func replicateStandards(r *rand.Rand) []eiv.Standard {
	s := make([]eiv.Standard, 6)
	for i := range s {
		xt := float64(i + 1)
		y := covA + covB*xt
		s[i] = eiv.Standard{X: xt, Y: []float64{y + 0.3*r.NormFloat64(), y + 0.3*r.NormFloat64(), y + 0.3*r.NormFloat64()}}
	}
	return s
}

// fewReplicates is reported, not held to 0.94–0.96: the unknown's own SD
// from 3 readings (ν = 2) dominates u(x₀), and the Welch–Satterthwaite
// interval is then known to fall short of its level. An independent
// simulation of that procedure alone (numpy/scipy, 400,000 draws: a normal
// error of variance 0.169·σ²/3 known, plus the mean of 3 readings with s²
// on ν = 2, k = t_0.975(⌊ν_eff⌋)) covers 0.926 of the time. The study
// asserts the same shortfall within 4 binomial SEs of the 2,000 runs' figure
// (0.0059 each) of 0.93 (the pooled line adds a ν = 12 term: 0.930 at 20,000).
var fewReplicates = calScenario{"unknown: 3 replicates, own SD (ν = 2); standards pooled",
	func(r *rand.Rand) ([]eiv.Standard, *eiv.CalibrationOptions, eiv.Unknown, float64) {
		s := replicateStandards(r)
		y := covA + covB*covX0
		return s, nil, eiv.Unknown{Y: []float64{y + 0.3*r.NormFloat64(), y + 0.3*r.NormFloat64(), y + 0.3*r.NormFloat64()}}, covX0
	}}

// TestCalibrationCoverage is a Monte Carlo study of the 95 % coverage
// interval of x₀ (k from t at p = 0.95 with ν_eff): over 2,000 simulated
// calibrations per scenario (seeded), the interval must hold the true x₀
// 0.94–0.96 of the time (the bound: about ±2 binomial standard
// errors, 0.0049, at 2,000). EIVFIT_COVERAGE=long runs 20,000 per scenario
// (binomial SE 0.0015) for the README's figures, with the same bound.
func TestCalibrationCoverage(t *testing.T) {
	if raceEnabled || testing.Short() {
		t.Skip("Monte Carlo study: runs in the plain test pass")
	}
	reps := 2000
	if os.Getenv("EIVFIT_COVERAGE") == "long" {
		reps = 20000
	}
	var table strings.Builder
	fmt.Fprintf(&table, "| scenario | calibrations | coverage of the 95 %% interval of x₀ |\n|---|---|---|\n")
	for si, sc := range append(calScenarios, fewReplicates) {
		hit, n := 0, 0
		for k := range reps {
			r := rand.New(rand.NewPCG(1500+uint64(si), uint64(k)))
			s, opt, u, x0 := sc.draw(r)
			c, err := eiv.Calibrate(s, opt)
			if err != nil {
				t.Fatalf("%s, calibration %d: %v", sc.name, k, err)
			}
			res, err := c.Inverse([]eiv.Unknown{u}, &eiv.InverseOptions{CoverageProbability: 0.95})
			if err != nil {
				t.Fatal(err)
			}
			n++
			if res[0].Lower <= x0 && x0 <= res[0].Upper {
				hit++
			}
		}
		cov := float64(hit) / float64(n)
		fmt.Fprintf(&table, "| %s | %d | %.4f |\n", sc.name, n, cov)
		if si == len(calScenarios) {
			if math.Abs(cov-0.93) > 4*0.0059 {
				t.Errorf("%s: coverage %.4f, want the Welch–Satterthwaite shortfall 0.93 ± 0.024", sc.name, cov)
			}
			continue
		}
		if cov < 0.94 || cov > 0.96 {
			t.Errorf("%s: coverage %.4f outside 0.94–0.96", sc.name, cov)
		}
	}
	t.Logf("coverage of x₀ intervals:\n%s", table.String())
}
