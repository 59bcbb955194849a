package answertest

import (
	"strings"
	"testing"
)

// Each rule catches what it is for, and passes what is right. The first
// case is the placeholder eivfit printed before issue 12 (`eivfit compare`
// on 10 rows without resamples, ols_bias for passing_bablok).
func TestProblems(t *testing.T) {
	for _, c := range []struct {
		name string
		body string
		want []string // substrings, one per expected problem, in order
	}{
		{"old placeholder interval", `{"fits":{"ols":{"residual_sd":0.1}},"ols_bias":[{"method":"passing_bablok",
			"slope_difference":{"estimate":0.0013333333333334085,"se":0,"ci":{"lower":0,"upper":0,"level":0,"method":""}}}]}`,
			[]string{"/ols_bias/0/slope_difference/ci/level = 0 is not in (0, 1)", "/ols_bias/0/slope_difference/ci/method is missing",
				"/ols_bias/0/slope_difference/ci = [0, 0] excludes its estimate 0.0013333333333334085",
				"/ols_bias/0/slope_difference/se = 0, but the data do not lie exactly on a line"}},
		{"absent se and ci", `{"fits":{},"ols_bias":[{"slope_difference":{"estimate":0.5}}]}`, nil},
		{"se 0 on an exact line", `{"fits":{"deming":{"residual_sd":0,"slope":{"estimate":2,"se":0,"ci":{"lower":2,"upper":2,"level":0.95,"method":"t"}}}}}`, nil},
		{"exactness is per analysis", `{"results":[{"fit":{"fits":{"ols":{"r_squared":1}}}},{"fit":{"fits":{"ols":{"r_squared":0.5,"slope":{"estimate":1,"se":0}}}}}]}`,
			[]string{"/results/1/fit/fits/ols/slope/se = 0"}},
		{"interval excludes its estimate", `{"fits":{"ols":{"slope":{"estimate":3,"se":1,"ci":{"lower":0,"upper":2,"level":0.95,"method":"t"}}}}}`,
			[]string{"excludes its estimate 3"}},
		{"jackknife interval against its parameter", `{"fits":{"ols":{"slope":{"estimate":3,"se":1,"ci":{"lower":1,"upper":5,"level":0.95,"method":"t"}},
			"jackknife":{"slope":{"se":1,"ci":{"lower":4,"upper":5,"level":0.95,"method":"jackknife-t"}}}}}}`,
			[]string{"/fits/ols/jackknife/slope/ci = [4, 5] excludes its estimate 3"}},
		{"reversed interval", `{"ci":{"lower":2,"upper":1,"level":0.9,"method":"t"}}`, []string{"is not an interval"}},
		{"level of 1", `{"ci":{"lower":1,"upper":2,"level":1,"method":"t"}}`, []string{"level = 1 is not in (0, 1)"}},
		{"out of double range", `{"x":1e999}`, []string{"/x = +Inf is not finite"}},
		{"p-value above 1", `{"kendall_tau":{"statistic":0.5,"p_value":1.5}}`, []string{"not a probability"}},
		{"negative se", `{"fits":{"ols":{"r_squared":1,"slope":{"estimate":1,"se":-1}}}}`, []string{"is negative"}},
		{"not JSON object", "x,y\n1,2\n", nil},
	} {
		t.Run(c.name, func(t *testing.T) {
			got := Problems([]byte(c.body))
			if len(got) != len(c.want) {
				t.Fatalf("%d problems, want %d:\n%s", len(got), len(c.want), strings.Join(got, "\n"))
			}
			for i, w := range c.want {
				if !strings.Contains(got[i], w) {
					t.Errorf("problem %d = %q, want it to contain %q", i, got[i], w)
				}
			}
		})
	}
}
