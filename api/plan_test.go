package api

import (
	"encoding/json"
	"math"
	"net/http"
	"strings"
	"testing"

	"eivfit/api/wire"
)

// TestPlanEndpoint runs POST /v1/plan through the real router (answers
// validated against the OpenAPI document and the answer walk).
func TestPlanEndpoint(t *testing.T) {
	h := newHarness(t, Config{})
	// Keys are given once: the decoder refuses a repeated key, so the
	// cases that change trials start from common, which has none.
	const common = `"low":3,"high":25,"error_x":{"sd":0.1,"cv_percent":2.5},"lambda":1,"replicates":{"x":2,"y":2},` +
		`"decision_levels":[7,11.1],"allowable_bias":{"percent":5},"seed":1,"unit":"mmol/L"`
	const base = common + `,"trials":200`
	cases := []struct {
		name    string
		body    string
		status  int
		pointer string // the problem's first field pointer
	}{
		{"sizes", `{` + base + `,"sizes":[20,60],"differences":[{"constant":0,"proportional_percent":2}],"no_difference":true}`, 200, ""},
		{"target power", `{` + base + `,"target_power":0.8,"differences":[{"constant":0,"proportional_percent":4}],"max_n":400}`, 200, ""},
		{"passing_bablok", `{` + common + `,"sizes":[30],"estimator":"passing_bablok","trials":50}`, 200, ""},
		{"repeated key", `{` + base + `,"sizes":[30],"trials":50}`, 400, "/trials"},
		{"too many sizes", `{` + base + `,"sizes":[` + strings.Repeat("40,", 50) + `40]}`, 400, "/sizes"},
		{"missing error_x", `{"low":3,"high":25,"sizes":[40],"lambda":1}`, 400, "/error_x"},
		{"bad size", `{` + base + `,"sizes":[40,2]}`, 400, "/sizes/1"},
		{"repeated size", `{` + base + `,"sizes":[40,40]}`, 400, "/sizes/1"},
		{"bad difference", `{` + base + `,"sizes":[40],"no_difference":true,"differences":[{"constant":0,"proportional_percent":-150}]}`, 400, "/differences/0"},
		{"unknown field", `{` + base + `,"sizes":[40],"n":5}`, 400, "/n"},
		{"bad estimator", `{` + base + `,"sizes":[40],"estimator":"york"}`, 400, "/estimator"},
		{"level without allowable", `{"low":3,"high":25,"error_x":{"sd":0.1},"lambda":1,"sizes":[40],"decision_levels":[7]}`, 400, "/decision_levels/0"},
		{"too much work", `{` + common + `,"sizes":[20000,19999,19998],"trials":100000}`, 413, "/trials"},
		{"not JSON", `{"low":3,`, 400, ""},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			rec := h.do("POST", "/v1/plan", "application/json", tc.body)
			if rec.Code != tc.status {
				t.Fatalf("status %d, want %d: %s", rec.Code, tc.status, wire.Truncate(rec.Body.String()))
			}
			if tc.status != 200 {
				p := decodeProblem(t, rec)
				if tc.pointer != "" && (len(p.Errors) == 0 || p.Errors[0].Pointer != tc.pointer) {
					t.Errorf("problem %+v, want pointer %s", p, tc.pointer)
				}
				return
			}
			var r wire.PlanResponse
			if err := json.Unmarshal(rec.Body.Bytes(), &r); err != nil {
				t.Fatal(err)
			}
			if r.Sentence == "" || len(r.Scenarios) == 0 {
				t.Fatalf("no sentence or scenarios: %s", wire.Truncate(rec.Body.String()))
			}
			for _, sc := range r.Scenarios {
				for _, s := range sc.Sizes {
					for _, l := range s.Levels {
						if sum := l.Within + l.Exceeds + l.Inconclusive; math.Abs(sum-1) > 1e-12 {
							t.Errorf("n = %d level %g: verdict shares sum to %v", s.N, l.Level, sum)
						}
						if l.Limit != 0.05*l.Level {
							t.Errorf("limit %v at %v, want 5 %%", l.Limit, l.Level)
						}
					}
				}
			}
		})
	}
}

// TestPlanDeterministic: the same request gives the same bytes, and a
// proportional difference of 2 % is shown "within" a 5 % limit more often
// with more samples (the power rises with n; 200 trials, common random
// numbers across sizes).
func TestPlanDeterministic(t *testing.T) {
	h := newHarness(t, Config{})
	body := `{"low":3,"high":25,"error_x":{"sd":0.1,"cv_percent":2.5},"lambda":1,"replicates":{"x":2,"y":2},"sizes":[20,100],` +
		`"differences":[{"constant":0,"proportional_percent":2}],"decision_levels":[7],"allowable_bias":{"percent":5},"trials":200,"seed":7}`
	a := h.do("POST", "/v1/plan", "application/json", body)
	b := h.do("POST", "/v1/plan", "application/json", body)
	if a.Code != http.StatusOK || a.Body.String() != b.Body.String() {
		t.Fatalf("status %d; answers differ: %v", a.Code, a.Body.String() != b.Body.String())
	}
	var r wire.PlanResponse
	if err := json.Unmarshal(a.Body.Bytes(), &r); err != nil {
		t.Fatal(err)
	}
	s := r.Scenarios[0].Sizes
	if !(s[1].Levels[0].Within > s[0].Levels[0].Within) || !(s[1].Levels[0].HalfWidth < s[0].Levels[0].HalfWidth) {
		t.Errorf("n = 20: within %.3f, half-width %.4g; n = 100: within %.3f, half-width %.4g",
			s[0].Levels[0].Within, s[0].Levels[0].HalfWidth, s[1].Levels[0].Within, s[1].Levels[0].HalfWidth)
	}
	if !strings.Contains(r.Sentence, "in duplicate") {
		t.Errorf("sentence %q", r.Sentence)
	}
}
