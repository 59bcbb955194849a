package main

import (
	"bytes"
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"os"
	"strings"
	"testing"

	"eivfit/api"
	"eivfit/api/wire"
)

// listOption is one list option of a request, in every form it can be
// given: the query parameter of a CSV body, the flag of the CLI, and the
// JSON array of a JSON body.
type listOption struct {
	name  string // query parameter
	flag  string // the CLI's flag
	cmd   string // the CLI's command
	path  string // the HTTP path
	file  string // the CSV the query and CLI forms read
	extra []string
	a, b  string // two valid values, a different answer with b than without
	// ja, jb are a and b for the JSON body ("": a and b); jkey is the
	// key the JSON body gives the list ("": name).
	ja, jb, jkey string
	beyond       string // a value outside the range of the data ("": none to try)
	// json is a JSON body with the option set to list (a JSON value).
	json func(list string) string
}

const (
	fitJSON     = `{"points":[{"x":5.2,"y":5.4},{"x":6.9,"y":7.4},{"x":8.9,"y":9.2},{"x":10.0,"y":10.5},{"x":11.7,"y":11.8},{"x":12.9,"y":13.5}],"methods":["ols","deming"],"at":%s}`
	compareJSON = `{"samples":[{"id":"A","x":2.1,"y":2.3},{"id":"B","x":3.9,"y":4.0},{"id":"C","x":5.2,"y":5.6},{"id":"D","x":7.0,"y":7.1},{"id":"E","x":8.8,"y":9.3},{"id":"F","x":11.1,"y":11.2},{"id":"G","x":13.0,"y":13.9},{"id":"H","x":15.2,"y":15.3}],%s}`
	calJSON     = `{"standards":[{"id":"M1","x":10,"ux":0.05,"y":21.1,"uy":0.2},{"id":"M2","x":20,"ux":0.1,"y":40.6,"uy":0.2},{"id":"M3","x":30,"ux":0.15,"y":61.0,"uy":0.2},{"id":"M4","x":40,"ux":0.2,"y":80.9,"uy":0.2}],%s}`
)

func jsonWith(format string) func(string) string {
	return func(list string) string { return strings.Replace(format, "%s", list, 1) }
}

var listOptions = []listOption{
	{name: "methods", flag: "methods", cmd: "fit", path: "/v1/fit", file: "../../testdata/demo-glucose.csv",
		a: "ols", b: "deming",
		json: func(l string) string {
			return strings.Replace(strings.Replace(fitJSON, `"methods":["ols","deming"]`, `"methods":`+l, 1), "%s", "[3]", 1)
		}},
	{name: "at", flag: "at", cmd: "fit", path: "/v1/fit", file: "../../testdata/demo-glucose.csv",
		a: "7", b: "11.1", beyond: "40", json: jsonWith(fitJSON)},
	{name: "decision_levels", flag: "decision-levels", cmd: "compare", path: "/v1/method-comparison",
		file: "../../testdata/demo-glucose-duplicates.csv", a: "7", b: "11.1", beyond: "60",
		json: func(l string) string { return strings.Replace(compareJSON, "%s", `"decision_levels":`+l, 1) }},
	{name: "exclude", flag: "exclude", cmd: "compare", path: "/v1/method-comparison",
		file: "../../testdata/demo-glucose-duplicates.csv", a: "D001", b: "D002", ja: "A", jb: "B",
		json: func(l string) string { return strings.Replace(compareJSON, "%s", `"exclude":`+l, 1) }},
	{name: "forward", flag: "forward", cmd: "calibrate", path: "/v1/calibration",
		file: "../../testdata/demo-gas-sensor.csv", a: "500", b: "1000",
		json: func(l string) string { return strings.Replace(calJSON, "%s", `"forward":`+l, 1) }},
	{name: "shared_standards", flag: "shared-standards", cmd: "calibrate", path: "/v1/calibration",
		file: "../../testdata/demo-gas-sensor.csv", extra: []string{"shared_relative_u", "0.003"}, a: "M01,M02", b: "M03",
		ja: "M1,M2", jb: "M3", jkey: "standards",
		json: func(l string) string {
			return strings.Replace(calJSON, "%s", `"shared_components":[{"name":"stock","relative_u":0.003,"standards":`+l+`}]`, 1)
		}},
}

// jsonList writes values as a JSON array: numbers as they are, ids
// quoted.
func jsonList(vals ...string) string {
	var parts []string
	for _, v := range vals {
		for _, f := range strings.Split(v, ",") {
			if strings.Trim(f, "0123456789.") != "" {
				f = `"` + f + `"`
			}
			parts = append(parts, f)
		}
	}
	return "[" + strings.Join(parts, ",") + "]"
}

// TestListOptionsNeverDropped sends every list option of the fit, the
// comparison and the calibration through every entry point — the query
// of a CSV body, the CLI's flags, a JSON body — with a comma list, a
// repeat, ';', bad escapes and values outside the data: each answer is
// either a 4xx naming the option (the flag, for the CLI) or a 200 that
// used every value given (the comma list and the repeat give the same
// answer, different from the first value alone, and the CLI gives the
// service's bytes).
func TestListOptionsNeverDropped(t *testing.T) {
	srv, err := api.NewServer(api.Config{})
	if err != nil {
		t.Fatal(err)
	}
	h := srv.Handler()
	post := func(t *testing.T, path, query, ctype, body string) (int, []byte) {
		t.Helper()
		req := httptest.NewRequest(http.MethodPost, path+"?"+query, strings.NewReader(body))
		req.Header.Set("Content-Type", ctype)
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, req)
		return rec.Code, rec.Body.Bytes()
	}
	problem := func(t *testing.T, code int, body []byte, pointer, detail string) {
		t.Helper()
		var p wire.Problem
		if code < 400 || code >= 500 || json.Unmarshal(body, &p) != nil {
			t.Fatalf("status %d, want a 4xx problem naming %q: %s", code, pointer, wire.Truncate(string(body)))
		}
		for _, e := range p.Errors {
			if strings.Contains(e.Pointer, pointer) && strings.Contains(e.Detail, detail) {
				return
			}
		}
		t.Errorf("the problem names no %q with %q: %+v", pointer, detail, p.Errors)
	}
	for _, o := range listOptions {
		csv := readFile(t, o.file)
		q := func(pairs ...string) string {
			pairs = append(append([]string{}, o.extra...), pairs...)
			var b strings.Builder
			for i := 0; i+1 < len(pairs); i += 2 {
				if b.Len() > 0 {
					b.WriteByte('&')
				}
				b.WriteString(pairs[i] + "=" + pairs[i+1])
			}
			return b.String()
		}
		flags := func(pairs ...string) []string {
			args := []string{o.cmd}
			all := append(append([]string{}, o.extra...), pairs...)
			for i := 0; i+1 < len(all); i += 2 {
				args = append(args, "--"+strings.ReplaceAll(all[i], "_", "-"), all[i+1])
			}
			return append(args, o.file)
		}
		ja, jb, jkey := o.a, o.b, o.name
		if o.ja != "" {
			ja, jb = o.ja, o.jb
		}
		if o.jkey != "" {
			jkey = o.jkey
		}
		t.Run(o.name, func(t *testing.T) {
			// Query and CLI: a comma list and a repeat are the same request.
			code, both := post(t, o.path, q(o.name, o.a+","+o.b), "text/csv", csv)
			if code != http.StatusOK {
				t.Fatalf("comma list: %d %s", code, both)
			}
			code, repeated := post(t, o.path, q(o.name, o.a, o.name, o.b), "text/csv", csv)
			if code != http.StatusOK || !bytes.Equal(repeated, both) {
				t.Errorf("%s=%s&%s=%s: %d, not the answer to %s=%s,%s", o.name, o.a, o.name, o.b, code, o.name, o.a, o.b)
			}
			code, first := post(t, o.path, q(o.name, o.a), "text/csv", csv)
			if code != http.StatusOK || bytes.Equal(first, both) {
				t.Errorf("%s=%s gives the answer to %s,%s: the second value was dropped", o.name, o.a, o.a, o.b)
			}
			for _, args := range [][]string{flags(o.name, o.a+","+o.b), flags(o.name, o.a, o.name, o.b)} {
				out, stderr, err := runCmd(t, "", args...)
				if err != nil || out != string(both) {
					t.Errorf("eivfit %s: %v %s\nthe CLI's answer differs from the service's", strings.Join(args, " "), err, stderr)
				}
			}

			// Refused, naming the option: ';' in a list, ';' between
			// parameters, a bad %-escape, too many parameters.
			code, body := post(t, o.path, q(o.name, o.a+";"+o.b), "text/csv", csv)
			problem(t, code, body, "query parameter "+o.name, "separate values with commas")
			code, body = post(t, o.path, q(o.name, o.a+";confidence=0.9"), "text/csv", csv)
			problem(t, code, body, "query parameter "+o.name, "separated by '&', not ';'")
			for _, bad := range []string{o.a + "%zz", o.a + "%2", "%"} {
				code, body = post(t, o.path, q(o.name, bad), "text/csv", csv)
				problem(t, code, body, "query parameter "+o.name, "bad %-escape")
			}
			code, body = post(t, o.path, q(o.name, o.a)+strings.Repeat("&"+o.name+"="+o.a, wire.MaxQueryParams), "text/csv", csv)
			problem(t, code, body, "query", "more than 10000 query parameters")
			code, body = post(t, o.path, q(o.name, o.a, "confidence", "0.9", "confidence", "0.95"), "text/csv", csv)
			problem(t, code, body, "query parameter confidence", "given 2 times")
			_, stderr, err := runCmd(t, "", flags(o.name, o.a+";"+o.b)...)
			if err == nil || !strings.Contains(stderr, "--"+o.flag+": ") || !strings.Contains(stderr, "separate values with commas") || strings.Contains(stderr, "query") {
				t.Errorf("--%s %s;%s: %v %q", o.flag, o.a, o.b, err, stderr)
			}
			_, stderr, err = runCmd(t, "", flags(o.name, o.a, "confidence", "0.9", "confidence", "0.95")...)
			if err == nil || !strings.Contains(stderr, "--confidence: given 2 times") {
				t.Errorf("--confidence twice: %v %q", err, stderr)
			}

			// JSON: an array; a repeated key, a string for a list, a bad
			// escape are refused naming the key.
			code, jboth := post(t, o.path, "", "application/json", o.json(jsonList(ja, jb)))
			code1, jfirst := post(t, o.path, "", "application/json", o.json(jsonList(ja)))
			if code != http.StatusOK || code1 != http.StatusOK || bytes.Equal(jboth, jfirst) {
				t.Errorf("JSON %s: %d %d; the answers to both values and to the first alone must differ\n%s", o.name, code, code1, wire.Truncate(string(jboth)))
			}
			code, body = post(t, o.path, "", "application/json", o.json(jsonList(ja)+`,"`+jkey+`":`+jsonList(jb)))
			problem(t, code, body, jkey, "")
			code, body = post(t, o.path, "", "application/json", o.json(`"`+ja+`;`+jb+`"`))
			problem(t, code, body, jkey, "")
			code, body = post(t, o.path, "", "application/json", o.json(`["`+ja+`\q"]`))
			problem(t, code, body, "", "")

			if o.beyond == "" {
				return
			}
			// Outside the data: answered, with a warning and the entry
			// marked, in every form.
			code, body = post(t, o.path, q(o.name, o.a+","+o.beyond), "text/csv", csv)
			out, _, err := runCmd(t, "", flags(o.name, o.a, o.name, o.beyond)...)
			_, jbody := post(t, o.path, "", "application/json", o.json(jsonList(ja, o.beyond)))
			if code != http.StatusOK || err != nil || out != string(body) {
				t.Fatalf("%s=%s,%s: %d %v", o.name, o.a, o.beyond, code, err)
			}
			for form, b := range map[string][]byte{"query": body, "JSON": jbody} {
				if n := bytes.Count(b, []byte(`"code":"extrapolated"`)); n != 1 {
					t.Errorf("%s: %d extrapolated warnings, want 1 (for %s)", form, n, o.beyond)
				}
				if !bytes.Contains(b, []byte(`"extrapolated":true`)) || !bytes.Contains(b, []byte(`"extrapolated":false`)) {
					t.Errorf("%s: the entries are not marked extrapolated (true for %s, false for %s)", form, o.beyond, o.a)
				}
			}
		})
	}
}

// TestPlanListFlags: the plan's list flags follow the same rules (its
// HTTP form is JSON only, whose repeated keys the decoder refuses).
func TestPlanListFlags(t *testing.T) {
	base := []string{"plan", "--low", "3", "--high", "25", "--error-x", "0.1,2.5", "--lambda", "1", "--trials", "50",
		"--allowable-percent", "5"}
	for _, c := range []struct {
		flag, a, b string
	}{{"sizes", "20", "30"}, {"decision-levels", "7", "11"}, {"differences", "0:2", "0:4"}} {
		base := base
		if c.flag != "sizes" {
			base = append(base[:len(base):len(base)], "--sizes", "20")
		}
		t.Run(c.flag, func(t *testing.T) {
			both, stderr, err := runCmd(t, "", append(base, "--"+c.flag, c.a+","+c.b)...)
			if err != nil {
				t.Fatalf("%v %s", err, stderr)
			}
			repeated, _, err := runCmd(t, "", append(base, "--"+c.flag, c.a, "--"+c.flag, c.b)...)
			if err != nil || repeated != both {
				t.Errorf("--%s %s --%s %s is not --%s %s,%s: %v", c.flag, c.a, c.flag, c.b, c.flag, c.a, c.b, err)
			}
			first, _, _ := runCmd(t, "", append(base, "--"+c.flag, c.a)...)
			if first == both {
				t.Errorf("--%s %s,%s: the second value was dropped", c.flag, c.a, c.b)
			}
			_, stderr, err = runCmd(t, "", append(base, "--"+c.flag, c.a+";"+c.b)...)
			if err == nil || !strings.Contains(stderr, "--"+c.flag+": ") || !strings.Contains(stderr, "separate values with commas") {
				t.Errorf("--%s %s;%s: %v %q", c.flag, c.a, c.b, err, stderr)
			}
		})
	}
	_, stderr, err := runCmd(t, "", append(base, "--lambda", "2")...)
	if err == nil || !strings.Contains(stderr, "--lambda: given 2 times") {
		t.Errorf("--lambda twice: %v %q", err, stderr)
	}
}

func readFile(t *testing.T, name string) string {
	t.Helper()
	b, err := os.ReadFile(name)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// A decision level at 0 has no percent bias: it is left out, not 0.
func TestLevelZeroHasNoPercentBias(t *testing.T) {
	srv, err := api.NewServer(api.Config{})
	if err != nil {
		t.Fatal(err)
	}
	req := httptest.NewRequest(http.MethodPost, "/v1/method-comparison", strings.NewReader(strings.Replace(compareJSON, "%s", `"decision_levels":[0,7]`, 1)))
	req.Header.Set("Content-Type", "application/json")
	rec := httptest.NewRecorder()
	srv.Handler().ServeHTTP(rec, req)
	var resp struct {
		DecisionLevels []struct {
			Level        float64                    `json:"level"`
			Extrapolated bool                       `json:"extrapolated"`
			Fits         map[string]json.RawMessage `json:"fits"`
		} `json:"decision_levels"`
	}
	if rec.Code != http.StatusOK || json.Unmarshal(rec.Body.Bytes(), &resp) != nil || len(resp.DecisionLevels) != 2 {
		t.Fatalf("%d %s", rec.Code, wire.Truncate(rec.Body.String()))
	}
	for i, l := range resp.DecisionLevels {
		if len(l.Fits) == 0 {
			t.Fatalf("level %g: no fits", l.Level)
		}
		for m, f := range l.Fits {
			if has := bytes.Contains(f, []byte(`"bias_percent"`)); has != (i == 1) {
				t.Errorf("level %g, %s: bias_percent present %v", l.Level, m, has)
			}
		}
	}
	if !resp.DecisionLevels[0].Extrapolated || resp.DecisionLevels[1].Extrapolated {
		t.Errorf("0 lies below the data (2.1 to 15.2), 7 within: %+v", resp.DecisionLevels)
	}
}
