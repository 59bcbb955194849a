package api

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"strings"
	"testing"

	"eivfit/api/wire"
)

// pefrDuplicates is the Bland & Altman (1986) peak-flow data with both
// readings per meter (testdata/ref/bland-altman-1986-pefr.csv): x = meter
// B, y = meter A.
func pefrDuplicates(t *testing.T) (body string, x, y [][2]float64) {
	b, err := os.ReadFile("../testdata/ref/bland-altman-1986-pefr.csv")
	if err != nil {
		t.Fatal(err)
	}
	var samples []string
	for _, line := range strings.Split(string(b), "\n") {
		if line == "" || line[0] == '#' || strings.HasPrefix(line, "subject") {
			continue
		}
		f := strings.Split(strings.TrimSpace(line), ",")
		var v [4]float64
		for k := range 4 {
			fmt.Sscan(f[k+1], &v[k])
		}
		y, x = append(y, [2]float64{v[0], v[1]}), append(x, [2]float64{v[2], v[3]})
		samples = append(samples, fmt.Sprintf(`{"id":"P%s","x":[%s,%s],"y":[%s,%s]}`, f[0], f[3], f[4], f[1], f[2]))
	}
	return `{"samples":[` + strings.Join(samples, ",") + `],"unit":"l/min","decision_levels":[300,450,800],"allowable_bias":{"absolute":20}}`, x, y
}

// TestCompareAgreementWithReplicates runs the comparison with duplicates
// through the real router and checks the new agreement parts against a
// brute force written here from the papers:
//   - the limits for single measurements, Bland & Altman (1999, §5.2) for
//     duplicates on both methods: s²_D = s²_d̄ + ½s²_xw + ½s²_yw, s²_w the
//     pooled within-subject variance Σ(r1 − r2)²/(2n);
//   - Lin's (1989) CCC 2s_xy/(s²_x + s²_y + (x̄ − ȳ)²), divisor n, on the
//     subject means, with ρ_c = ρ·C_b;
//   - the repeatability coefficient 1.96·√2·s_w (Bland & Altman 1999, §4).
//
// Tolerance 1e-9 relative: the same sums in another order.
func TestCompareAgreementWithReplicates(t *testing.T) {
	h := newHarness(t, Config{})
	body, x, y := pefrDuplicates(t)
	rec := h.do("POST", "/v1/method-comparison", "application/json", body)
	if rec.Code != 200 {
		t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
	}
	var r wire.CompareResponse
	if err := json.Unmarshal(rec.Body.Bytes(), &r); err != nil {
		t.Fatal(err)
	}
	n := float64(len(x))
	var sd, sdd, swx, swy float64
	mx, my := make([]float64, len(x)), make([]float64, len(x))
	for i := range x {
		mx[i], my[i] = (x[i][0]+x[i][1])/2, (y[i][0]+y[i][1])/2
		d := my[i] - mx[i]
		sd += d
		sdd += d * d
		swx += (x[i][0] - x[i][1]) * (x[i][0] - x[i][1]) / 2
		swy += (y[i][0] - y[i][1]) * (y[i][0] - y[i][1]) / 2
	}
	dbar := sd / n
	s2dbar := (sdd - n*dbar*dbar) / (n - 1)
	s2x, s2y := swx/n, swy/n
	sD := math.Sqrt(s2dbar + s2x/2 + s2y/2)
	rel := func(name string, got, want float64) {
		t.Helper()
		if math.Abs(got-want) > 1e-9*math.Abs(want) {
			t.Errorf("%s = %.12g, want %.12g", name, got, want)
		}
	}
	a := r.Agreement
	if a.Describes != "means_of_replicates" || a.SingleMeasurements == nil {
		t.Fatalf("describes %q, single %v", a.Describes, a.SingleMeasurements)
	}
	s := a.SingleMeasurements
	rel("SD of single-measurement differences", s.SD, sD)
	rel("lower limit", s.LimitsOfAgreement.Lower.Estimate, dbar-1.96*sD)
	rel("upper limit", s.LimitsOfAgreement.Upper.Estimate, dbar+1.96*sD)
	if !(s.LimitsOfAgreement.Lower.Estimate < a.LimitsOfAgreement.Lower.Estimate && s.LimitsOfAgreement.Upper.Estimate > a.LimitsOfAgreement.Upper.Estimate) {
		t.Error("single-measurement limits are not wider than the limits of the means")
	}
	if !strings.Contains(a.Reading, "single measurements") {
		t.Errorf("reading %q", a.Reading)
	}
	// Lin's CCC on the means.
	var sx, sy, sxx, syy, sxy float64
	for i := range mx {
		sx, sy = sx+mx[i], sy+my[i]
	}
	ax, ay := sx/n, sy/n
	for i := range mx {
		sxx += (mx[i] - ax) * (mx[i] - ax) / n
		syy += (my[i] - ay) * (my[i] - ay) / n
		sxy += (mx[i] - ax) * (my[i] - ay) / n
	}
	c := a.Concordance
	rel("CCC", c.CCC.Estimate, 2*sxy/(sxx+syy+(ax-ay)*(ax-ay)))
	rel("precision", c.Precision, sxy/math.Sqrt(sxx*syy))
	rel("ρ·C_b", c.Precision*c.Accuracy, c.CCC.Estimate)
	if !(c.CCC.CI.Lower < c.CCC.Estimate && c.CCC.Estimate < c.CCC.CI.Upper && c.CCC.CI.Upper < 1) {
		t.Errorf("CCC interval %+v", c.CCC.CI)
	}
	rel("repeatability coefficient of x", a.Repeatability.X.Coefficient.Estimate, 1.96*math.Sqrt2*math.Sqrt(s2x))
	rel("repeatability coefficient of y", a.Repeatability.Y.Coefficient.Estimate, 1.96*math.Sqrt2*math.Sqrt(s2y))
	// Decision levels: 800 l/min lies above every meter-B mean (max 650).
	for _, l := range r.DecisionLevels {
		if want := l.Level == 800; l.Extrapolated != want {
			t.Errorf("level %g extrapolated %v", l.Level, l.Extrapolated)
		}
	}
	if r.Outcome == nil || !strings.Contains(r.Outcome.Text, "l/min") || r.Outcome.Levels != 3 {
		t.Errorf("outcome %+v", r.Outcome)
	}
	if r.Robustness == nil || len(r.Robustness.Levels) != 3 || r.Robustness.Reading == "" {
		t.Errorf("robustness %+v", r.Robustness)
	}
	if r.Fits.PassingBablok.CovSlopeIntercept != nil {
		t.Error("Passing–Bablok carries a slope–intercept covariance")
	}
}

// TestCompareVerdictPanel: the demo study with duplicates (proportional
// error, one flagged outlier) through the router, without and with
// resamples. The levels' outcome counts add up, the robustness panel
// judges every fit also without the outlier, Passing–Bablok's verdict
// interval is the jackknife's with a warning without resamples and the
// bootstrap's with them, and the limits form is regression-based (the
// differences grow with the level, also on the log scale).
func TestCompareVerdictPanel(t *testing.T) {
	h := newHarness(t, Config{})
	csv, err := os.ReadFile("../testdata/demo-glucose-duplicates.csv")
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name, query, pbMethod string
		warn                  bool
	}{
		{"jackknife", "", "jackknife", true},
		{"bootstrap", "&resamples=300&seed=5", "bootstrap", false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			rec := h.do("POST", "/v1/method-comparison?decision_levels=2,7,11.1&allowable_percent=5&unit=mmol/L"+tc.query, "text/csv", string(csv))
			if rec.Code != 200 {
				t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
			}
			var r wire.CompareResponse
			if err := json.Unmarshal(rec.Body.Bytes(), &r); err != nil {
				t.Fatal(err)
			}
			o := r.Outcome
			if o == nil || o.Within+o.Exceeds+o.Inconclusive != o.Levels || o.Levels != 3 || o.Method != r.Recommendation.Method {
				t.Fatalf("outcome %+v", o)
			}
			if !r.DecisionLevels[0].Extrapolated || r.DecisionLevels[1].Extrapolated {
				t.Errorf("extrapolated: %v %v (x from about 2.7)", r.DecisionLevels[0].Extrapolated, r.DecisionLevels[1].Extrapolated)
			}
			rb := r.Robustness
			if len(rb.WithoutOutliers) == 0 || len(rb.Fits) != 3 {
				t.Fatalf("robustness %+v", rb)
			}
			for _, l := range rb.Levels {
				if len(l.Verdicts) != 6 {
					t.Errorf("level %g: %d verdicts, want 3 fits × with/without the outlier", l.Level, len(l.Verdicts))
				}
			}
			pb := r.DecisionLevels[1].Fits["passing_bablok"].Bias.CI.Method
			if !strings.HasPrefix(pb, tc.pbMethod) {
				t.Errorf("Passing–Bablok verdict interval %q, want %s", pb, tc.pbMethod)
			}
			var warned bool
			for _, w := range r.Warnings {
				warned = warned || w.Code == "passing_bablok_jackknife_interval"
			}
			if warned != tc.warn {
				t.Errorf("jackknife warning %v, want %v", warned, tc.warn)
			}
			if f := r.Agreement.LimitsForm; f == nil || f.Form != "regression" || r.Agreement.RegressionLimits == nil {
				t.Errorf("limits form %+v", f)
			}
		})
	}
}
