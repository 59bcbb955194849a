package study_test

import (
	"context"
	"fmt"

	"eivfit/eiv/study"
)

// A method comparison of two peak-flow meters on 17 subjects, each read
// twice on each meter (Bland & Altman 1986, Table 1; the candidate y is
// meter A, the comparative x is meter B). The replicates give each
// meter's repeatability and so Deming's λ. Differences are y − x. The
// published first-reading figures (mean difference −2.1, SD 38.8) are
// checked in TestComparePEFR; here both readings are averaged per subject.
// The repeatability SDs, √(Σd²/2n) of first − second readings, agree with
// the mean and SD of those differences that the reference file records
// (meter B: −2.8824, 28.8723 → 19.91; meter A: 4.9412, 21.7240 → 15.31).
func ExampleCompare() {
	a := [][2]float64{{494, 490}, {395, 397}, {516, 512}, {434, 401}, {476, 470}, {557, 611}, {413, 415}, {442, 431},
		{650, 638}, {433, 429}, {417, 420}, {656, 633}, {267, 275}, {478, 492}, {178, 165}, {423, 372}, {427, 421}}
	b := [][2]float64{{512, 525}, {430, 415}, {520, 508}, {428, 444}, {500, 500}, {600, 625}, {364, 460}, {380, 390},
		{658, 642}, {445, 432}, {432, 420}, {626, 605}, {260, 227}, {477, 467}, {259, 268}, {350, 370}, {451, 443}}
	var samples study.Samples
	for i := range a {
		samples = append(samples, study.Sample{ID: fmt.Sprint("P", i+1), X: b[i][:], Y: a[i][:]})
	}
	level := 400.0
	limit := 20.0
	c, err := study.Compare(context.Background(), samples, &study.CompareOptions{
		DecisionLevels: []study.DecisionLevel{{Level: level}},
		Allowable:      &study.Allowable{Absolute: &limit},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	em := c.ErrorModel
	fmt.Printf("n = %d; repeatability SD x %.2f, y %.2f; λ = %.3f (%s)\n", c.N, em.X.SD, em.Y.SD, em.Lambda, em.LambdaSource)
	ag := c.Agreement
	fmt.Printf("mean difference %.2f, limits of agreement %.1f to %.1f\n", ag.MeanDifference.Value, ag.Lower.Value, ag.Upper.Value)
	for _, f := range c.Fits {
		fmt.Printf("%-15s slope %.4f, intercept %7.2f\n", f.Method.Name, f.Fit.Slope.Value, f.Fit.Intercept.Value)
	}
	for _, lf := range c.DecisionLevels[0].Fits {
		fmt.Printf("bias at %g by %s: %.1f [%.1f, %.1f], %s ±%g\n", level, lf.Method.Name,
			lf.At.Bias.Value, lf.At.Bias.CI.Lower, lf.At.Bias.CI.Upper, lf.Verdict, limit)
	}
	fmt.Println("report:", c.Recommendation.Method)
	// Output:
	// n = 17; repeatability SD x 19.91, y 15.31; λ = 0.591 (replicates)
	// mean difference -6.03, limits of agreement -71.1 to 59.1
	// ols             slope 1.0126, intercept  -11.74
	// deming          slope 1.0694, intercept  -37.51
	// weighted_deming slope 1.2102, intercept  -99.19
	// passing_bablok  slope 0.9667, intercept    7.08
	// bias at 400 by ols: -6.7 [-26.5, 13.1], inconclusive ±20
	// bias at 400 by deming: -9.8 [-30.1, 10.5], inconclusive ±20
	// bias at 400 by weighted_deming: -15.1 [-66.7, 36.4], inconclusive ±20
	// bias at 400 by passing_bablok: -6.2 [-25.1, 12.6], inconclusive ±20
	// report: deming
}
