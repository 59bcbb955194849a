package study_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"eivfit/eiv"
	"eivfit/eiv/study"
)

// A line fit's checks read the residuals in run order through a
// permutation, with no copies: given a shuffled order column they equal
// the checks of the same points listed in run order with no order column
// (the same line, so the same residuals). Durbin–Watson's d and the runs
// test are the same sums in the same order (equal to the bit); the p-values
// of Durbin–Watson, Breusch–Pagan and Spearman sum the levels or ranks in
// another order, which rounding alone moves: 1e-12 relative. The Q-Q points
// a fit keeps without indices are NormalQQ's of its residuals to the bit.
func TestDiagnoseFitRunOrder(t *testing.T) {
	for _, c := range []struct {
		name string
		n    int
		seed uint64
	}{
		{"30 points", 30, 1},
		{"700 points", 700, 2},
	} {
		t.Run(c.name, func(t *testing.T) {
			r := rand.New(rand.NewPCG(c.seed, 7))
			perm := r.Perm(c.n)
			a := study.Data{X: make([]float64, c.n), Y: make([]float64, c.n), Order: make([]float64, c.n)}
			b := study.Data{X: make([]float64, c.n), Y: make([]float64, c.n)}
			for i := range c.n {
				t0 := 5 + 100*r.Float64()
				a.X[i], a.Y[i] = t0+r.NormFloat64(), 1+1.05*t0+r.NormFloat64()*(1+t0/50)
				a.Order[i] = float64(perm[i] + 1)
			}
			for i, p := range perm { // b lists a's points in run order
				b.X[p], b.Y[p] = a.X[i], a.Y[i]
			}
			res, err := study.Fit(context.Background(), a, &study.FitOptions{Methods: []string{"ols", "deming"}})
			if err != nil {
				t.Fatal(err)
			}
			m := res.Primary()
			da, db := study.DiagnoseFit(&a, m), study.DiagnoseFit(&b, m)
			if da.OrderSource != "order" || db.OrderSource != "input" || db.Order != nil {
				t.Errorf("order sources %q, %q; input order kept as %v", da.OrderSource, db.OrderSource, db.Order)
			}
			for _, tc := range []struct {
				name      string
				got, ref  *eiv.TestResult
				exactStat bool // the statistic's sums in the same order
			}{
				{"Durbin–Watson", da.DurbinWatson, db.DurbinWatson, true},
				{"runs", da.Runs, db.Runs, true},
				{"Breusch–Pagan", da.BreuschPagan, db.BreuschPagan, false},
				{"Spearman", da.Spearman, db.Spearman, false},
			} {
				if tc.got == nil || tc.ref == nil {
					t.Fatalf("%s: %v, %v", tc.name, tc.got, tc.ref)
				}
				if tc.exactStat {
					if tc.got.Statistic != tc.ref.Statistic {
						t.Errorf("%s statistic %.17g, in run order %.17g", tc.name, tc.got.Statistic, tc.ref.Statistic)
					}
				}
				for _, v := range [][2]float64{{tc.got.Statistic, tc.ref.Statistic}, {tc.got.PValue, tc.ref.PValue}} {
					if d := math.Abs(v[0] - v[1]); d > 1e-12*math.Max(math.Abs(v[0]), math.Abs(v[1])) {
						t.Errorf("%s: %.17g, in run order %.17g", tc.name, v[0], v[1])
					}
				}
			}
			qq := eiv.NormalQQ(da.Residual)
			if da.QQ != nil || da.QQLen() != len(qq) {
				t.Fatalf("a fit keeps %d indexed Q-Q points and %d in all, want 0 and %d", len(da.QQ), da.QQLen(), len(qq))
			}
			for k, p := range qq {
				if th, s := da.QQAt(k); th != p.Theoretical || s != p.Sample {
					t.Fatalf("Q-Q point %d: (%v, %v), NormalQQ (%v, %v)", k, th, s, p.Theoretical, p.Sample)
				}
			}
		})
	}
}
