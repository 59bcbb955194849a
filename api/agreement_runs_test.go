package api

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"eivfit/api/answertest"
	"eivfit/api/wire"
	"eivfit/eiv/reftest"
)

// runStudy is a comparison whose replicates carry the run of each
// measurement, the true value changing between runs (Bland & Altman 2007,
// §3): per sample 2 to 4 runs, x and y measured at each; sample 0 lists its
// y replicates in another order than its x (pairs are by label, not by
// position), and sample 1 has an x replicate whose run has no y (left out of
// the pairs). pairs holds what the paper pairs: per sample, (x, y) at equal runs.
type runStudy struct {
	json, csv string
	pairs     []pairs
}

type pairs struct {
	X []float64 `json:"x"`
	Y []float64 `json:"y"`
}

func newRunStudy(seed uint64, n int) runStudy {
	r := rand.New(rand.NewPCG(seed, 7))
	var st runStudy
	var samples []string
	csv := []string{"id,method,value,time"}
	for i := range n {
		base := 60 + 50*r.Float64()
		own := 2.5 * r.NormFloat64()
		m := 2 + r.IntN(3)
		var x, y []float64
		var runs []string
		for k := range m {
			tau := base + 8*r.NormFloat64()
			x = append(x, math.Round(10*(tau+1.5*r.NormFloat64()))/10)
			y = append(y, math.Round(10*(tau+1+own+2*r.NormFloat64()))/10)
			runs = append(runs, fmt.Sprintf("t%d", k+1))
		}
		st.pairs = append(st.pairs, pairs{x, y})
		xr, yr, xv, yv := runs, runs, x, y
		if i == 0 { // y in reverse order
			yr, yv = make([]string, m), make([]float64, m)
			for k := range m {
				yr[k], yv[k] = runs[m-1-k], y[m-1-k]
			}
		}
		if i == 1 { // an x replicate at a run without y
			xr, xv = append(append([]string{}, runs...), "extra"), append(append([]float64{}, x...), base)
		}
		id := fmt.Sprintf("R%02d", i+1)
		samples = append(samples, fmt.Sprintf(`{"id":%q,"x":%s,"y":%s,"x_runs":%s,"y_runs":%s}`, id, js(xv), js(yv), js(xr), js(yr)))
		for k := range xv {
			csv = append(csv, fmt.Sprintf("%s,ref,%g,%s", id, xv[k], xr[k]))
		}
		for k := range yv {
			csv = append(csv, fmt.Sprintf("%s,new,%g,%s", id, yv[k], yr[k]))
		}
	}
	st.json = `{"samples":[` + strings.Join(samples, ",") + `],"unit":"U/L","decision_levels":[80]}`
	st.csv = strings.Join(csv, "\n") + "\n"
	return st
}

func js(v any) string {
	b, _ := json.Marshal(v)
	return string(b)
}

// TestCompareRunsChangingTrueValue sends a study whose replicates carry
// runs through the real router, as JSON (x_runs, y_runs) and as CSV (id,
// method, value, time), and checks the limits for single measurements
// against testdata/ref_agreement.py's "paired" reference (Bland & Altman
// 2007, §3; 1999, §5.3: one-way analysis of variance of the paired
// differences by subject with statsmodels' anova_lm, λ for unequal pairs,
// MOVER intervals with scipy's quantiles), given the pairs formed here by
// run label. Tolerances as in eiv/agreement_replicates_test.go: 1e-9
// relative for the estimates (the same formulas, another summation order),
// 2e-8 for interval ends (gonum's t quantile against scipy's, 4e-9 relative
// measured there).
func TestCompareRunsChangingTrueValue(t *testing.T) {
	py := reftest.Python(t, "scipy.stats", "statsmodels.api", "pandas")
	st := newRunStudy(11, 24)
	var raw struct {
		Results []map[string]map[string]any `json:"results"`
	}
	reftest.Run(t, py, reftest.Script(t, "ref_agreement.py"), map[string]any{"cases": []any{map[string]any{"subjects": st.pairs, "conf": 0.95, "z": 1.96}}}, &raw)
	ref := raw.Results[0]["paired"]
	num := func(k string) float64 { return ref[k].(float64) }
	pair := func(k string) (float64, float64) {
		v := ref[k].([]any)
		return v[0].(float64), v[1].(float64)
	}
	h := newHarness(t, Config{})
	bodies := map[string]string{}
	for _, c := range []struct{ name, target, ctype, body string }{
		{"json", "/v1/method-comparison", "application/json", st.json},
		{"csv", "/v1/method-comparison?x_method=ref&y_method=new&unit=U/L&decision_levels=80", "text/csv", st.csv},
	} {
		t.Run(c.name, func(t *testing.T) {
			rec := h.do("POST", c.target, c.ctype, c.body)
			if rec.Code != 200 {
				t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
			}
			answertest.Check(t, rec.Body.Bytes())
			var r wire.CompareResponse
			if err := json.Unmarshal(rec.Body.Bytes(), &r); err != nil {
				t.Fatal(err)
			}
			s := r.Agreement.SingleMeasurements
			if s == nil {
				t.Fatal("no limits for single measurements")
			}
			if s.Design != "true_value_varying" || !strings.Contains(s.DesignReason, "runs") || !strings.Contains(r.Agreement.Reading, "changing between runs") {
				t.Errorf("design %q, reason %q, reading %q", s.Design, s.DesignReason, r.Agreement.Reading)
			}
			if s.Pairs == nil || *s.Pairs != countPairs(st.pairs) || s.MeansLimits != nil {
				t.Errorf("pairs %v (want %d), means limits %v", s.Pairs, countPairs(st.pairs), s.MeansLimits)
			}
			rel := func(name string, got, want, tol float64) {
				t.Helper()
				if math.Abs(got-want) > tol*math.Abs(want) {
					t.Errorf("%s = %.12g, reference %.12g", name, got, want)
				}
			}
			rel("mean difference", s.MeanDifference.Estimate, num("mean"), 1e-9)
			rel("sd", s.SD, num("sd"), 1e-9)
			rel("within-sample SD (anova_lm)", *s.WithinSD, num("within"), 1e-9)
			rel("between-sample SD (anova_lm)", *s.BetweenSD, num("between"), 1e-9)
			rel("lower", s.LimitsOfAgreement.Lower.Estimate, num("lower"), 1e-9)
			rel("upper", s.LimitsOfAgreement.Upper.Estimate, num("upper"), 1e-9)
			for _, iv := range []struct {
				name string
				ci   wire.CI
			}{{"lower_ci", s.LimitsOfAgreement.Lower.CI}, {"upper_ci", s.LimitsOfAgreement.Upper.CI}} {
				lo, hi := pair(iv.name)
				rel(iv.name+" lower end", iv.ci.Lower, lo, 2e-8)
				rel(iv.name+" upper end", iv.ci.Upper, hi, 2e-8)
			}
			b, err := json.Marshal(r.Agreement)
			if err != nil {
				t.Fatal(err)
			}
			bodies[c.name] = string(b)
		})
	}
	if bodies["json"] != bodies["csv"] {
		t.Error("the agreement from JSON and from CSV differ")
	}
	// The HTML report says which design the limits describe and why.
	rec := h.do("POST", "/v1/method-comparison", "application/json", st.json, "Accept", "text/html")
	page := rec.Body.String()
	for _, w := range []string{"true value changing between runs", "Design of the limits for single measurements: the replicates carry runs that pair them"} {
		if rec.Code != 200 || !strings.Contains(page, w) {
			t.Errorf("status %d; the report lacks %q", rec.Code, w)
		}
	}
}

func countPairs(p []pairs) int {
	n := 0
	for _, s := range p {
		n += len(s.X)
	}
	return n
}

// TestCompareRunsDesign: which design the limits describe, and why. Runs
// that pair each sample once cannot tell a changing true value from error:
// the constant design (1999, §5.2) with that reason; no runs: the constant
// design, as before.
func TestCompareRunsDesign(t *testing.T) {
	h := newHarness(t, Config{})
	cases := []struct {
		name, body, design, reason string
	}{
		{"no runs", `{"samples":[{"x":[1,1.2],"y":[1.1,1.3]},{"x":[2,2.1],"y":[2.3,2.2]},{"x":[3,3.3],"y":[3.1,3.2]},{"x":[4,4.1],"y":[4.4,4.2]}]}`,
			"true_value_constant", "carry no run"},
		{"runs pair once each", `{"samples":[{"x":[1,1.2],"y":[1.1,1.3],"x_runs":["a","b"],"y_runs":["a","c"]},{"x":[2,2.1],"y":[2.3,2.2],"x_runs":["a","b"],"y_runs":["b","c"]},{"x":[3,3.3],"y":[3.1,3.2],"x_runs":["a","b"],"y_runs":["b","d"]},{"x":[4,4.1],"y":[4.4,4.2],"x_runs":["a","b"],"y_runs":["c","a"]}]}`,
			"true_value_constant", "pair no sample"},
		{"runs pair twice", `{"samples":[{"x":[1,1.2],"y":[1.1,1.3],"runs":["a","b"]},{"x":[2,2.1],"y":[2.3,2.2],"runs":[1,2]},{"x":[3,3.3],"y":[3.1,3.2],"runs":["a","b"]},{"x":[4,4.1],"y":[4.4,4.2],"runs":["a","b"]}]}`,
			"true_value_varying", "8 pairs"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rec := h.do("POST", "/v1/method-comparison", "application/json", c.body)
			if rec.Code != 200 {
				t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
			}
			var r wire.CompareResponse
			if err := json.Unmarshal(rec.Body.Bytes(), &r); err != nil {
				t.Fatal(err)
			}
			s := r.Agreement.SingleMeasurements
			if s == nil || s.Design != c.design || !strings.Contains(s.DesignReason, c.reason) {
				t.Fatalf("single %+v", s)
			}
		})
	}
}

// TestCompareRunsErrors: every bad run input is a 400 naming its place.
func TestCompareRunsErrors(t *testing.T) {
	h := newHarness(t, Config{})
	ok := `{"x":[2,2.1],"y":[2.3,2.2],"runs":["a","b"]},{"x":[3,3.3],"y":[3.1,3.2],"runs":["a","b"]}`
	cases := []struct{ name, ctype, target, body, where string }{
		{"runs of another length", "application/json", "", `{"samples":[{"x":[1,1.2],"y":[1.1,1.3],"runs":["a"]},` + ok + `]}`, "/samples/0/runs"},
		{"runs and x_runs", "application/json", "", `{"samples":[{"x":[1,1.2],"y":[1.1,1.3],"runs":["a","b"],"x_runs":["a","b"]},` + ok + `]}`, "/samples/0/runs"},
		{"x_runs without y_runs", "application/json", "", `{"samples":[{"x":[1,1.2],"y":[1.1,1.3],"x_runs":["a","b"]},` + ok + `]}`, "/samples/0/y_runs"},
		{"a run twice", "application/json", "", `{"samples":[` + ok + `,{"x":[1,1.2],"y":[1.1,1.3],"x_runs":["a","a"],"y_runs":["a","b"]}]}`, "/samples/2/x_runs/1"},
		{"an empty run", "application/json", "", `{"samples":[` + ok + `,{"x":[1,1.2],"y":[1.1,1.3],"runs":["a",""]}]}`, "/samples/2/runs/1"},
		{"a run not a label", "application/json", "", `{"samples":[` + ok + `,{"x":[1,1.2],"y":[1.1,1.3],"runs":["a",true]}]}`, "/samples/2/runs/1"},
		{"runs on some samples", "application/json", "", `{"samples":[` + ok + `,{"x":[1,1.2],"y":[1.1,1.3]}]}`, "/samples/2/runs"},
		{"csv run twice", "text/csv", "", "id,x,y,run\nA,1,1.1,r1\nA,1.2,1.3,r1\nB,2,2.1,r1\nC,3,3.2,r1\n", "row 3, column run"},
		{"csv blank run", "text/csv", "?columns=run:Zeit", "id,x,y,Zeit\nA,1,1.1,r1\nA,1.2,1.3,\nB,2,2.1,r1\nC,3,3.2,r1\n", "row 3, column Zeit"},
		{"csv run beside wide replicates", "text/csv", "", "id,x1,x2,y1,y2,run\nA,1,1.1,1.2,1.3,r1\n", "row 1, column run"},
		{"csv time mapped twice", "text/csv", "?columns=run:Zeit", "id,x,y,Zeit,time\nA,1,1.1,r1,r1\n", "row 1, column time"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rec := h.do("POST", "/v1/method-comparison"+c.target, c.ctype, c.body)
			if rec.Code != 400 || !strings.Contains(rec.Body.String(), c.where) {
				t.Errorf("status %d, want 400 naming %q: %s", rec.Code, c.where, wire.Truncate(rec.Body.String()))
			}
		})
	}
}
