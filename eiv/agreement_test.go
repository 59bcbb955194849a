package eiv_test

import (
	"math"
	"testing"

	"eivfit/eiv"
)

// Bland & Altman (1986), Table 1 (testdata/ref/bland-altman-1986-pefr.csv):
// first readings of the standard (A) and mini (B) peak-flow meters. The
// paper's differences are A − B; eivfit's are y − x, so y = A and x = B.
func TestBlandAltman1986(t *testing.T) {
	d := readRef(t, "ref/bland-altman-1986-pefr.csv")
	a, b := d["a_1"], d["b_1"]
	// Limits at ±2 SD, as the 1986 paper draws them.
	ag, err := eiv.BlandAltman(b, a, 2, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Published (Bland & Altman 1986, via the file's secondary sources):
	// mean −2.1, SD 38.8, limits −79.7 to 75.5 l/min.
	printed(t, "mean difference", ag.MeanDifference.Value, "-2.1")
	printed(t, "SD", ag.SDDifference, "38.8")
	// The paper forms its limits from the rounded mean and SD:
	// −2.1 ∓ 2 × 38.8 = −79.7 / 75.5; unrounded they are −79.6479 / 75.4126
	// (the file's re-computation).
	r1 := func(v float64) float64 { return math.Round(v*10) / 10 }
	printed(t, "lower limit (rounded inputs)", r1(ag.MeanDifference.Value)-2*r1(ag.SDDifference), "-79.7")
	printed(t, "upper limit (rounded inputs)", r1(ag.MeanDifference.Value)+2*r1(ag.SDDifference), "75.5")
	printed(t, "lower limit", ag.Lower.Value, "-79.6479")
	printed(t, "upper limit", ag.Upper.Value, "75.4126")
	// The file's re-computation with a general-purpose statistics
	// environment: mean −2.11764705882, SD 38.7651302, 95 % CI of the mean
	// −22.0488 to 17.8135, SE of a limit 16.284612, CIs of the limits
	// −114.1697 to −45.1261 and 40.8908 to 109.9344.
	printed(t, "mean (unrounded)", ag.MeanDifference.Value, "-2.11764705882")
	// The file prints the SD as 38.7651302; numpy (Debian python3-numpy,
	// d.std(ddof=1), run here) gives 38.76512987360738, which also matches
	// the file's own SE of a limit, 16.284612 = √(3s²/17). The file's eighth
	// digit is off; the numpy value is asserted.
	near(t, "SD (numpy)", ag.SDDifference, 38.76512987360738, 1e-13)
	printed(t, "mean CI lower", ag.MeanDifference.CI.Lower, "-22.0488")
	printed(t, "mean CI upper", ag.MeanDifference.CI.Upper, "17.8135")
	printed(t, "SE of a limit", ag.Lower.SE, "16.284612")
	printed(t, "lower limit CI", ag.Lower.CI.Lower, "-114.1697")
	printed(t, "lower limit CI", ag.Lower.CI.Upper, "-45.1261")
	printed(t, "upper limit CI", ag.Upper.CI.Lower, "40.8908")
	printed(t, "upper limit CI", ag.Upper.CI.Upper, "109.9344")
	// With 1.96 SD (Bland & Altman 1999's convention), the file's values
	// −78.0973 / 73.8620.
	ag196, _ := eiv.BlandAltman(b, a, 0, nil)
	printed(t, "lower 1.96", ag196.Lower.Value, "-78.0973")
	printed(t, "upper 1.96", ag196.Upper.Value, "73.8620")
}

// Repeatability from the second readings: the file gives the mean and SD
// of first-minus-second differences (A: 4.9412, 21.7240; B: −2.8824,
// 28.8723). With two replicates, Σ(v − v̄)² = d²/2 per subject, so the
// pooled within-subject SD is √(Σd²/(2n)) with Σd² = (n−1)·SD² + n·mean².
func TestReplicatePrecisionPEFR(t *testing.T) {
	d := readRef(t, "ref/bland-altman-1986-pefr.csv")
	for _, c := range []struct {
		name     string
		r1, r2   []float64
		mean, sd float64
	}{
		{"meter A", d["a_1"], d["a_2"], 4.9412, 21.7240},
		{"meter B", d["b_1"], d["b_2"], -2.8824, 28.8723},
	} {
		var reps [][]float64
		for i := range c.r1 {
			reps = append(reps, []float64{c.r1[i], c.r2[i]})
		}
		rep, err := eiv.ReplicatePrecision(reps)
		if err != nil {
			t.Fatal(err)
		}
		n := float64(len(c.r1))
		want := math.Sqrt(((n-1)*c.sd*c.sd + n*c.mean*c.mean) / (2 * n))
		// The file's mean and SD carry 5–6 significant digits.
		near(t, c.name+" repeatability SD", rep.SD, want, 1e-4)
		if rep.DF != len(c.r1) {
			t.Errorf("df %d", rep.DF)
		}
	}
}
