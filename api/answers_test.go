package api

import (
	"eivfit/eiv/study"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"

	"eivfit/api/wire"
)

// Where a quantity does not exist the answer leaves it out, never a zero
// (issue 12): each case names a path that must be absent and one that
// must be present. The harness also walks every answer with answertest.
func TestNoPlaceholders(t *testing.T) {
	h := newHarness(t, Config{})
	csv := func(n int) string {
		r := rand.New(rand.NewPCG(12, uint64(n)))
		var b strings.Builder
		b.WriteString("x,y\n")
		for i := range n {
			x := float64(i+1) + 0.1*r.NormFloat64()
			fmt.Fprintf(&b, "%.4f,%.4f\n", x, 1.04*x-0.54+0.05*r.NormFloat64())
		}
		return b.String()
	}
	for _, c := range []struct {
		name, target, body string
		absent, present    []string
	}{
		{"comparison of 10 rows without resamples", "/v1/method-comparison", csv(10),
			[]string{"/fits/passing_bablok/cov_slope_intercept", "/ols_bias/2/slope_difference/se", "/ols_bias/2/slope_difference/ci",
				"/ols_bias/2/intercept_difference/ci", "/ols_bias/2/slope_relative_percent/se"},
			[]string{"/ols_bias/2/method", "/ols_bias/2/slope_difference/estimate", "/fits/deming/cov_slope_intercept",
				"/ols_bias/0/slope_difference/ci/method"}},
		{"bias in percent at level 0", "/v1/method-comparison?decision_levels=0,5", csv(12),
			[]string{"/decision_levels/0/fits/deming/bias_percent"},
			[]string{"/decision_levels/1/fits/deming/bias_percent/ci", "/decision_levels/0/fits/deming/bias/ci"}},
		{"Passing–Bablok with too few slopes", "/v1/fit?methods=ols,passing_bablok&at=2", "x,y\n1,1.1\n2,2.3\n3,2.9\n",
			[]string{"/fits/passing_bablok/slope/se", "/fits/passing_bablok/slope/ci", "/fits/passing_bablok/intercept/ci",
				"/fits/passing_bablok/at/0/y/ci", "/fits/passing_bablok/at/0/bias/se", "/fits/passing_bablok/cov_slope_intercept"},
			[]string{"/fits/passing_bablok/slope/estimate", "/fits/passing_bablok/at/0/y/estimate", "/fits/ols/at/0/y/ci"}},
		{"Passing–Bablok predictions above the jackknife limit", "/v1/fit?methods=passing_bablok&at=50", csv(study.PassingBablokJackknifeMaxN + 1),
			[]string{"/fits/passing_bablok/at/0/y/ci", "/fits/passing_bablok/at/0/y/se"},
			[]string{"/fits/passing_bablok/slope/ci/method", "/fits/passing_bablok/at/0/bias/estimate"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			rec := h.do("POST", c.target, "text/csv", c.body)
			if rec.Code != 200 {
				t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
			}
			var doc any
			if err := json.Unmarshal(rec.Body.Bytes(), &doc); err != nil {
				t.Fatal(err)
			}
			for _, p := range c.absent {
				if _, ok := lookup(doc, p); ok {
					t.Errorf("%s is present; it has no value here and must be left out", p)
				}
			}
			for _, p := range c.present {
				if _, ok := lookup(doc, p); !ok {
					t.Errorf("%s is missing", p)
				}
			}
		})
	}
}

// lookup follows a JSON pointer (without escapes) through decoded JSON.
func lookup(doc any, ptr string) (any, bool) {
	v := doc
	for _, k := range strings.Split(strings.TrimPrefix(ptr, "/"), "/") {
		switch x := v.(type) {
		case map[string]any:
			var ok bool
			if v, ok = x[k]; !ok {
				return nil, false
			}
		case []any:
			var i int
			if _, err := fmt.Sscan(k, &i); err != nil || i < 0 || i >= len(x) {
				return nil, false
			}
			v = x[i]
		default:
			return nil, false
		}
	}
	return v, true
}
