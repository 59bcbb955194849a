package main

import (
	"os"
	"strings"
	"testing"

	"eivfit/api"
)

// Each export of testdata/exports (invented data) read with one command
// line gives the bytes the service gives for the same file and query
// (api's TestExportsThroughRouter checks what those answers say).
func TestExportsCLI(t *testing.T) {
	srv, err := api.NewServer(api.Config{})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name, cmd, file, path, query string
		args                         []string
		want                         []string // in the --format text output
	}{
		{"semicolon", "fit", "semicolon-decimal-comma-units.csv", "/v1/fit",
			"delimiter=semicolon&decimal=comma&units_row=true&columns=x:Referenz,y:Kandidat,id:Probe,sx:u_Referenz&methods=ols,deming",
			[]string{"--delimiter", "semicolon", "--decimal", "comma", "--units-row", "--columns", "x:Referenz,y:Kandidat,id:Probe,sx:u_Referenz", "--methods", "ols,deming"},
			[]string{"x ← Referenz [mmol/L]"}},
		{"tab", "fit", "tab-extra-quoted.tsv", "/v1/fit", "delimiter=tab&columns=id:Sample%20ID,x:Reference,y:Candidate&extra_columns=ignore",
			[]string{"--delimiter", "tab", "--columns", "id:Sample ID,x:Reference,y:Candidate", "--extra-columns", "ignore"},
			[]string{"Columns not read (extra_columns=ignore): Operator, QC Flag."}},
		{"windows", "fit", "windows-crlf-bom.csv", "/v1/fit", "", nil, []string{"n = 15"}},
		{"long", "compare", "long-duplicates.csv", "/v1/method-comparison", "columns=id:SampleID,method:Instrument,value:Result,order:Seq&x_method=RefLab&y_method=NewLab",
			[]string{"--columns", "id:SampleID,method:Instrument,value:Result,order:Seq", "--x-method", "RefLab", "--y-method", "NewLab"},
			[]string{"Replicates: 96 rows gathered into 24 samples by id; x: 24 samples with 2; y: 24 samples with 2."}},
		{"runs", "compare", "runs-by-day.csv", "/v1/method-comparison", "columns=id:SampleID,x:Reference,y:Candidate,run:Day&decision_levels=7",
			[]string{"--columns", "id:SampleID,x:Reference,y:Candidate,run:Day", "--decision-levels", "7"},
			[]string{"Single measurements, true value changing between runs (60 pairs)", "Design: the replicates carry runs that pair them (60 pairs)"}},
		{"analytes", "compare", "three-analytes.csv", "/v1/method-comparison", "columns=x:Comparative,y:Candidate,id:SampleID&group_by=Analyte&missing=skip",
			[]string{"--columns", "x:Comparative,y:Candidate,id:SampleID", "--group-by", "Analyte", "--missing", "skip"},
			[]string{"==== glucose ====", "==== sodium ====", "==== crp ====", `skipped row 8, column Candidate (""): no y value (blank cells)`,
				`skipped row 33, column Comparative ("NA"): missing value (NA)`, `skipped row 57, column Candidate (">100"): censored value (>100: above a limit)`}},
	} {
		t.Run(c.name, func(t *testing.T) {
			file := "../../testdata/exports/" + c.file
			body, err := os.ReadFile(file)
			if err != nil {
				t.Fatal(err)
			}
			cli, stderr, err := runCmd(t, "", append(append([]string{c.cmd}, c.args...), file)...)
			if err != nil {
				t.Fatalf("%v: %s", err, stderr)
			}
			rec := serveCSV(srv, c.path+"?"+c.query, body)
			if rec.Code != 200 {
				t.Fatalf("status %d %s", rec.Code, rec.Body.String())
			}
			if rec.Body.String() != cli {
				t.Errorf("CLI and service differ\nCLI:\n%.600s\nservice:\n%.600s", cli, rec.Body.String())
			}
			text, stderr, err := runCmd(t, "", append(append([]string{c.cmd, "--format", "text"}, c.args...), file)...)
			if err != nil {
				t.Fatalf("%v: %s", err, stderr)
			}
			for _, w := range c.want {
				if !strings.Contains(text, w) {
					t.Errorf("text output lacks %q:\n%s", w, text)
				}
			}
		})
	}
}

// Without the options it needs, an export is refused naming the flag.
func TestExportsCLIRefusals(t *testing.T) {
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"semicolon", []string{"fit", "../../testdata/exports/semicolon-decimal-comma-units.csv"}, "--delimiter semicolon"},
		{"missing", []string{"compare", "--columns", "x:Comparative,y:Candidate,id:SampleID", "--group-by", "Analyte", "../../testdata/exports/three-analytes.csv"}, "--missing skip"},
		{"bad choice", []string{"fit", "--missing", "drop", "../../testdata/exports/windows-crlf-bom.csv"}, "--missing"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, stderr, err := runCmd(t, "", c.args...)
			if err == nil || !strings.Contains(stderr, c.want) {
				t.Errorf("err %v, stderr %q: want exit 2 naming %q", err, stderr, c.want)
			}
		})
	}
}
