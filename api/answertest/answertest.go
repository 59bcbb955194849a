// Package answertest checks the numbers in eivfit's JSON answers for the
// tests of api and cmd/eivfit: the shared helpers that send a request or
// run the CLI pass every JSON answer to Check, so each new test is covered.
//
// The rules (issue 12):
//   - every number is finite;
//   - every "ci" object has a level in (0, 1), a method, and lower ≤ upper,
//     and contains the "estimate" beside it (a jackknife interval, the
//     estimate of its parameter);
//   - no "se", "se_scaled" or "u" is 0 unless the data lie exactly on a
//     line, which the analysis (the object holding "fits") shows by a
//     residual SD (or SD of differences) of 0 or an R² of 1;
//   - every "p_value" lies in [0, 1].
package answertest

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"sort"
	"strconv"
	"testing"
)

// Check reports through t every rule that the JSON answer body breaks.
// A body that is not a JSON object (CSV, HTML, SVG, text) is not checked.
func Check(t testing.TB, body []byte) {
	t.Helper()
	for _, p := range Problems(body) {
		t.Errorf("answer breaks a rule of the numbers: %s", p)
	}
}

// Problems lists the rules the JSON answer body breaks, each with the JSON
// pointer of the offending value; nil when body is not a JSON object.
func Problems(body []byte) []string {
	body = bytes.TrimSpace(body)
	if len(body) == 0 || body[0] != '{' {
		return nil
	}
	dec := json.NewDecoder(bytes.NewReader(body))
	dec.UseNumber()
	var doc any
	if err := dec.Decode(&doc); err != nil {
		return []string{"not JSON: " + err.Error()}
	}
	w := &walker{exact: onLine(doc)}
	w.walk(doc, "")
	return w.problems
}

type walker struct {
	exact    bool
	problems []string
}

func (w *walker) addf(format string, a ...any) {
	w.problems = append(w.problems, fmt.Sprintf(format, a...))
}

// num returns v as a float64 when it is a JSON number.
func num(v any) (float64, bool) {
	n, ok := v.(json.Number)
	if !ok {
		return 0, false
	}
	f, err := strconv.ParseFloat(string(n), 64)
	if err != nil { // out of range: ±Inf
		return math.Inf(1), true
	}
	return f, true
}

// onLine says whether the answer shows data exactly on a line.
func onLine(v any) bool {
	switch v := v.(type) {
	case map[string]any:
		for k, x := range v {
			f, isNum := num(x)
			switch {
			case isNum && (k == "residual_sd" || k == "sd_difference") && f == 0:
				return true
			case isNum && k == "r_squared" && f == 1:
				return true
			case onLine(x):
				return true
			}
		}
	case []any:
		for _, x := range v {
			if onLine(x) {
				return true
			}
		}
	}
	return false
}

func (w *walker) walk(v any, ptr string) {
	switch v := v.(type) {
	case map[string]any:
		if _, ok := v["fits"]; ok {
			// One analysis (a fit, a batch entry's fit, a comparison with or
			// without the excluded samples): exactness is its own.
			outer := w.exact
			w.exact = onLine(v)
			defer func() { w.exact = outer }()
		}
		keys := make([]string, 0, len(v))
		for k := range v {
			keys = append(keys, k)
		}
		sort.Strings(keys) // problems in a stable order
		for _, k := range keys {
			x, at := v[k], ptr+"/"+k
			if f, ok := num(x); ok {
				w.number(k, f, at)
			}
			if k == "ci" {
				w.ci(x, v["estimate"], at)
			}
			if k == "jackknife" {
				if jk, ok := x.(map[string]any); ok {
					for _, p := range []string{"slope", "intercept"} {
						if par, ok := v[p].(map[string]any); ok {
							if seci, ok := jk[p].(map[string]any); ok {
								w.ci(seci["ci"], par["estimate"], at+"/"+p+"/ci")
							}
						}
					}
				}
			}
			w.walk(x, at)
		}
	case []any:
		for i, x := range v {
			w.walk(x, ptr+"/"+strconv.Itoa(i))
		}
	}
}

func (w *walker) number(k string, f float64, at string) {
	switch {
	case math.IsNaN(f) || math.IsInf(f, 0):
		w.addf("%s = %v is not finite", at, f)
	case (k == "se" || k == "se_scaled" || k == "u") && f == 0 && !w.exact:
		w.addf("%s = 0, but the data do not lie exactly on a line", at)
	case (k == "se" || k == "se_scaled" || k == "u") && f < 0:
		w.addf("%s = %v is negative", at, f)
	case k == "p_value" && !(f >= 0 && f <= 1):
		w.addf("%s = %v is not a probability", at, f)
	}
}

func (w *walker) ci(v, estimate any, at string) {
	c, ok := v.(map[string]any)
	if !ok {
		w.addf("%s is not an object", at)
		return
	}
	level, okL := num(c["level"])
	if !okL || !(level > 0 && level < 1) {
		w.addf("%s/level = %v is not in (0, 1)", at, c["level"])
	}
	if m, _ := c["method"].(string); m == "" {
		w.addf("%s/method is missing or empty", at)
	}
	lo, okLo := num(c["lower"])
	hi, okHi := num(c["upper"])
	if !okLo || !okHi || !(lo <= hi) {
		w.addf("%s: lower %v, upper %v is not an interval", at, c["lower"], c["upper"])
		return
	}
	if e, ok := num(estimate); ok && !(lo <= e && e <= hi) {
		w.addf("%s = [%v, %v] excludes its estimate %v", at, lo, hi, e)
	}
}
