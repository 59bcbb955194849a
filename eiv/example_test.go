package eiv_test

import (
	"fmt"

	"eivfit/eiv"
)

// A Deming fit with λ = 1 is orthogonal regression, the "line of closest
// fit" of Pearson (1901), here on his ten points. The slope and intercept
// agree with total least squares by numpy's SVD (−0.5455611975,
// 5.7840437745, computed when this example was written) to every printed
// digit. The standard errors are Fuller's (1987) large-sample ones, checked
// against ODRPACK in TestAgainstSciPyODR.
func ExampleDeming() {
	x := []float64{0, 0.9, 1.8, 2.6, 3.3, 4.4, 5.2, 6.1, 6.5, 7.4}
	y := []float64{5.9, 5.4, 4.4, 4.6, 3.5, 3.7, 2.8, 2.8, 2.4, 1.5}
	f, err := eiv.Deming(x, y, &eiv.DemingOptions{Lambda: 1})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("slope     %.6f (SE %.4f)\n", f.Slope.Value, f.Slope.SE)
	fmt.Printf("intercept %.6f (SE %.4f)\n", f.Intercept.Value, f.Intercept.SE)
	fmt.Printf("λ = %g, n = %d, %g%% CI of the slope [%.4f, %.4f]\n",
		f.Lambda, f.N, 100*f.Confidence, f.Slope.CI.Lower, f.Slope.CI.Upper)
	// Output:
	// slope     -0.545561 (SE 0.0426)
	// intercept 5.784044 (SE 0.1911)
	// λ = 1, n = 10, 95% CI of the slope [-0.6438, -0.4473]
}

// York's fit takes each point's standard uncertainties in x and y and the
// correlation r of its two errors. The data are the ISO/TS 28037:2010
// §7.4 worked example; with r = 0 the fit reproduces the published a =
// 0.5788 (u 0.4764), b = 2.1597 (u 0.1355), χ² = 2.743. With r = ±0.5 the
// values agree with York et al. (2004)'s equations evaluated in numpy
// when this example was written (r = 0.5: a 0.550470, b 2.164243, u(a)
// 0.369695, u(b) 0.100986, χ² 5.025826).
func ExampleYork() {
	x := []float64{1.2, 1.9, 2.9, 4.0, 4.7, 5.9}
	y := []float64{3.4, 4.4, 7.2, 8.5, 10.8, 13.5}
	sx := []float64{0.2, 0.2, 0.2, 0.2, 0.2, 0.2}
	sy := []float64{0.2, 0.2, 0.2, 0.4, 0.4, 0.4}
	for _, rho := range []float64{0, 0.5, -0.5} {
		r := make([]float64, len(x))
		for i := range r {
			r[i] = rho
		}
		f, err := eiv.York(x, y, sx, sy, r, nil)
		if err != nil {
			fmt.Println(err)
			return
		}
		fmt.Printf("r = %+.1f: a = %.4f (u %.4f), b = %.4f (u %.4f), χ² = %.3f on %d df\n",
			rho, f.Intercept.Value, f.Intercept.SE, f.Slope.Value, f.Slope.SE, f.Chi2, f.DOF)
	}
	// Output:
	// r = +0.0: a = 0.5788 (u 0.4764), b = 2.1597 (u 0.1355), χ² = 2.743 on 4 df
	// r = +0.5: a = 0.5505 (u 0.3697), b = 2.1642 (u 0.1010), χ² = 5.026 on 4 df
	// r = -0.5: a = 0.5885 (u 0.5633), b = 2.1581 (u 0.1629), χ² = 1.895 on 4 df
}
