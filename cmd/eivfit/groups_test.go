package main

import (
	"bytes"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"eivfit/api"
)

// --group-options FILE gives each group its own options: the CLI's answer
// is byte for byte the service's for the same file with the same options
// written as name[group] query parameters.
func TestGroupOptionsCLI(t *testing.T) {
	srv, err := api.NewServer(api.Config{})
	if err != nil {
		t.Fatal(err)
	}
	const analytes = "../../testdata/exports/three-analytes.csv"
	cols := []string{"--columns", "x:Comparative,y:Candidate,id:SampleID", "--group-by", "Analyte", "--missing", "skip"}
	const colsQuery = "columns=x:Comparative,y:Candidate,id:SampleID&group_by=Analyte&missing=skip"
	for _, c := range []struct {
		name, cmd, path, options, query string
		args                            []string
		want                            []string // in the --format text output
	}{
		{"comparison levels per group", "compare", "/v1/method-comparison",
			`{"glucose": {"decision_levels": [3.9, 7], "allowable_bias": {"percent": 5}}, "crp": {"decision_levels": [10], "confidence": 0.9}}`,
			colsQuery + "&decision_levels=50&decision_levels%5Bglucose%5D=3.9,7&allowable_percent%5Bglucose%5D=5&decision_levels%5Bcrp%5D=10&confidence%5Bcrp%5D=0.9",
			[]string{"--decision-levels", "50"}, []string{"==== glucose ====", "==== crp ===="}},
		{"fit options per group", "fit", "/v1/fit",
			`{"sodium": {"methods": ["ols"], "at": [140]}}`,
			colsQuery + "&methods=ols,deming&methods%5Bsodium%5D=ols&at%5Bsodium%5D=140",
			[]string{"--methods", "ols,deming"}, []string{"==== sodium ===="}},
	} {
		t.Run(c.name, func(t *testing.T) {
			opts := filepath.Join(t.TempDir(), "groups.json")
			if err := os.WriteFile(opts, []byte(c.options), 0o600); err != nil {
				t.Fatal(err)
			}
			args := append(append(append([]string{c.cmd}, cols...), c.args...), "--group-options", opts, analytes)
			cli, stderr, err := runCmd(t, "", args...)
			if err != nil {
				t.Fatalf("%v: %s", err, stderr)
			}
			body, err := os.ReadFile(analytes)
			if err != nil {
				t.Fatal(err)
			}
			req := httptest.NewRequest("POST", c.path+"?"+c.query, bytes.NewReader(body))
			req.Header.Set("Content-Type", "text/csv")
			rec := httptest.NewRecorder()
			srv.Handler().ServeHTTP(rec, req)
			if rec.Code != 200 {
				t.Fatalf("status %d %s", rec.Code, rec.Body.String())
			}
			if rec.Body.String() != cli {
				t.Errorf("CLI and service differ\nCLI:\n%.800s\nservice:\n%.800s", cli, rec.Body.String())
			}
			// Without the group options the answer differs: they were used.
			plain, _, err := runCmd(t, "", append(append(append([]string{c.cmd}, cols...), c.args...), analytes)...)
			if err != nil {
				t.Fatal(err)
			}
			if plain == cli {
				t.Error("the group options changed nothing")
			}
			text, stderr, err := runCmd(t, "", append([]string{args[0], "--format", "text"}, args[1:]...)...)
			if err != nil {
				t.Fatalf("%v: %s", err, stderr)
			}
			for _, w := range c.want {
				if !strings.Contains(text, w) {
					t.Errorf("text output lacks %q", w)
				}
			}
		})
	}
}

// A group options file that cannot apply whole is refused naming the flag,
// the group and the member; --save with --group-by is refused.
func TestGroupOptionsCLIRefusals(t *testing.T) {
	const analytes = "../../testdata/exports/three-analytes.csv"
	cols := []string{"--columns", "x:Comparative,y:Candidate,id:SampleID", "--missing", "skip"}
	for _, c := range []struct {
		name, cmd, options string
		groupBy, save      bool
		want               string
	}{
		{"no group-by", "compare", `{"glucose": {"decision_levels": [7]}}`, false, false, "add --group-by"},
		{"unknown group", "compare", `{"Glucose": {"decision_levels": [7]}}`, true, false, `/Glucose: no group "Glucose" in the file (groups: glucose, sodium, crp)`},
		{"fit option in a comparison", "compare", `{"glucose": {"at": [7]}}`, true, false, `/glucose/at: "at" is an option of a line fit`},
		{"comparison option in a fit", "fit", `{"glucose": {"decision_levels": [7]}}`, true, false, `/glucose/decision_levels: "decision_levels" is an option of a method comparison`},
		{"unknown member", "compare", `{"glucose": {"decision_level": [7]}}`, true, false, `/glucose/decision_level: unknown field`},
		{"list with a semicolon string", "compare", `{"glucose": {"decision_levels": "3.9;7"}}`, true, false, "/glucose/decision_levels"},
		{"not a number", "fit", `{"crp": {"confidence": "high"}}`, true, false, "/crp/confidence: must be a JSON number"},
		{"group twice", "compare", `{"crp": {"confidence": 0.9}, "crp": {"confidence": 0.8}}`, true, false, `/crp: group "crp" appears twice`},
		{"empty group", "compare", `{"crp": {}}`, true, false, `group "crp" has no options`},
		{"data in options", "compare", `{"crp": {"samples": []}}`, true, false, `/crp/samples`},
		{"not an object", "compare", `[1]`, true, false, "JSON object of groups"},
		{"save", "compare", "", true, true, "--save with --group-by"},
	} {
		t.Run(c.name, func(t *testing.T) {
			args := append([]string{c.cmd}, cols...)
			if c.groupBy {
				args = append(args, "--group-by", "Analyte")
			}
			if c.options != "" {
				opts := filepath.Join(t.TempDir(), "groups.json")
				if err := os.WriteFile(opts, []byte(c.options), 0o600); err != nil {
					t.Fatal(err)
				}
				args = append(args, "--group-options", opts)
			}
			if c.save {
				args = append(args, "--save", "--data-dir", t.TempDir())
			}
			out, stderr, err := runCmd(t, "", append(args, analytes)...)
			if err == nil {
				t.Fatalf("accepted: %.300s", out)
			}
			if !strings.Contains(stderr, c.want) {
				t.Errorf("stderr %q, want it to contain %q", stderr, c.want)
			}
			if c.options != "" && !c.save && !strings.Contains(stderr, "--group-options") {
				t.Errorf("stderr %q does not name --group-options", stderr)
			}
		})
	}
}
