package api

import (
	"encoding/json"
	"net/http"
	"os"
	"strings"
	"testing"

	"eivfit/api/wire"
)

// exportCases are the files of testdata/exports (invented data, each says
// so) with the one query that reads each; cmd/eivfit's TestExportsCLI
// sends the same files with the same options as flags.
var exportCases = []struct {
	name, file, path, query string
	check                   func(t *testing.T, body []byte)
}{
	{"semicolon, decimal comma, units row", "semicolon-decimal-comma-units.csv", "/v1/fit",
		"delimiter=semicolon&decimal=comma&units_row=true&columns=x:Referenz,y:Kandidat,id:Probe,sx:u_Referenz&methods=ols,deming&at=7",
		func(t *testing.T, body []byte) {
			var r wire.FitResponse
			mustJSON(t, body, &r)
			// 20 data rows in the file; the units row gives both axes mmol/L.
			if r.N != 20 || r.XUnit != "mmol/L" || r.YUnit != "mmol/L" {
				t.Errorf("n %d, units %q %q; want 20, mmol/L, mmol/L", r.N, r.XUnit, r.YUnit)
			}
			if r.Input == nil || len(r.Input.Columns) != 4 || r.Input.Columns[3].Role != "sx" || r.Input.Columns[3].Unit != "mmol/L" {
				t.Errorf("input %+v: want the four mapped columns with their units", r.Input)
			}
			// The decimal comma read as a decimal mark: the first point is 11.96, 12.04.
			if d := r.Fits.Deming; d == nil || d.At[0].Bias == nil {
				t.Errorf("same units: the bias at 7 must be given")
			}
		}},
	{"tab, quoted headers, extra columns ignored", "tab-extra-quoted.tsv", "/v1/fit",
		"delimiter=tab&columns=id:Sample%20ID,x:Reference,y:Candidate&extra_columns=ignore",
		func(t *testing.T, body []byte) {
			var r wire.FitResponse
			mustJSON(t, body, &r)
			if r.N != 25 || r.XUnit != "mmol/L" || r.YUnit != "mmol/L" {
				t.Errorf("n %d, units %q %q; want 25 and the headers' mmol/L", r.N, r.XUnit, r.YUnit)
			}
			if r.Input == nil || strings.Join(r.Input.IgnoredColumns, "|") != "Operator|QC Flag" {
				t.Errorf("ignored columns %+v, want Operator and QC Flag", r.Input)
			}
		}},
	{"Windows line ends and byte-order mark", "windows-crlf-bom.csv", "/v1/fit", "methods=york",
		func(t *testing.T, body []byte) {
			var r wire.FitResponse
			mustJSON(t, body, &r)
			if r.N != 15 || r.Fits.York == nil || r.Input != nil {
				t.Errorf("n %d, york %v, input %+v: want 15 points, a York fit, nothing to say about the input", r.N, r.Fits.York != nil, r.Input)
			}
		}},
	{"long format, duplicates by method", "long-duplicates.csv", "/v1/method-comparison",
		"columns=id:SampleID,method:Instrument,value:Result,order:Seq&x_method=RefLab&y_method=NewLab&unit=mmol/L&decision_levels=7",
		func(t *testing.T, body []byte) {
			var r wire.CompareResponse
			mustJSON(t, body, &r)
			// 96 rows: 24 samples, each twice on each method.
			rep := r.Input.Replicates
			if r.N != 24 || !r.Replicates || rep == nil || rep.Rows != 96 || rep.Samples != 24 ||
				len(rep.X) != 1 || rep.X[0] != (wire.ReplicateCount{Replicates: 2, Samples: 24}) || len(rep.Y) != 1 || rep.Y[0].Replicates != 2 {
				t.Errorf("n %d, replicates %+v: want 24 samples in duplicate from 96 rows", r.N, rep)
			}
			if r.ErrorModel.Source != "replicates" {
				t.Errorf("error model from %q, want the replicates", r.ErrorModel.Source)
			}
			for _, w := range r.Warnings {
				if strings.Contains(w.Message, "measure in duplicate") {
					t.Errorf("duplicates analysed as separate samples: %s", w.Message)
				}
			}
		}},
	{"three analytes, blank and censored cells skipped", "three-analytes.csv", "/v1/method-comparison",
		"columns=x:Comparative,y:Candidate,id:SampleID&group_by=Analyte&missing=skip&decision_levels%5Bglucose%5D=3.9,7&decision_levels%5Bsodium%5D=135&allowable_percent=5",
		func(t *testing.T, body []byte) {
			var r wire.BatchResponse
			mustJSON(t, body, &r)
			if r.OK != 3 || r.Failed != 0 || len(r.Results) != 3 {
				t.Fatalf("ok %d failed %d: want three groups answered", r.OK, r.Failed)
			}
			// The file's blank (row 8), NA (row 33) and censored cells (rows 50, 57).
			want := map[string]struct {
				n      int
				rows   []int
				levels int
			}{"glucose": {21, []int{8}, 2}, "sodium": {21, []int{33}, 1}, "crp": {20, []int{50, 57}, 0}}
			for _, g := range r.Results {
				w, c := want[g.Name], g.Comparison
				if c == nil || c.Input == nil || c.Input.Group != g.Name {
					t.Fatalf("%s: %+v", g.Name, g)
				}
				var rows []int
				for _, s := range c.Input.SkippedRows {
					rows = append(rows, s.Row)
					if s.Reason == "" {
						t.Errorf("%s: row %d skipped without a reason", g.Name, s.Row)
					}
				}
				if c.N != w.n || !equalInts(rows, w.rows) || len(c.DecisionLevels) != w.levels {
					t.Errorf("%s: n %d, skipped %v, %d levels; want %d, %v, %d", g.Name, c.N, rows, len(c.DecisionLevels), w.n, w.rows, w.levels)
				}
			}
		}},
}

func equalInts(a, b []int) bool {
	return strings.Trim(strings.Join(strings.Fields(strings.Trim(strings.Repeat(" ", 0)+fmtInts(a), "[]")), ","), ",") ==
		strings.Trim(strings.Join(strings.Fields(strings.Trim(fmtInts(b), "[]")), ","), ",")
}

func fmtInts(a []int) string {
	b, _ := json.Marshal(a)
	return strings.NewReplacer(",", " ", "null", "").Replace(string(b))
}

func mustJSON(t *testing.T, body []byte, v any) {
	t.Helper()
	if err := json.Unmarshal(body, v); err != nil {
		t.Fatalf("%v: %.300s", err, body)
	}
}

// Each export of the corpus through the real router with one query: the
// answers say what was read (units, replicates, skipped rows, ignored
// columns), and the same file without its options is refused with a
// problem that names the option to use.
func TestExportsThroughRouter(t *testing.T) {
	h := newHarness(t, Config{})
	for _, c := range exportCases {
		t.Run(c.name, func(t *testing.T) {
			body, err := os.ReadFile("../testdata/exports/" + c.file)
			if err != nil {
				t.Fatal(err)
			}
			rec := h.do("POST", c.path+"?"+c.query, "text/csv", string(body))
			if rec.Code != http.StatusOK {
				t.Fatalf("status %d: %s", rec.Code, rec.Body.String())
			}
			c.check(t, rec.Body.Bytes())
		})
	}
}

// Exports read without the options they need are refused, each with a
// problem naming the place and the option; nothing is guessed or dropped.
func TestExportRefusals(t *testing.T) {
	h := newHarness(t, Config{})
	read := func(f string) string {
		b, err := os.ReadFile("../testdata/exports/" + f)
		if err != nil {
			t.Fatal(err)
		}
		return string(b)
	}
	for _, c := range []struct {
		name, path, query, body string
		pointer, detail         string
	}{
		{"semicolon header", "/v1/fit", "", read("semicolon-decimal-comma-units.csv"), "row 3", "delimiter=semicolon"},
		{"tab header", "/v1/fit", "", "x\ty\n1\t2\n", "row 1", "delimiter=tab"},
		{"extra column refused", "/v1/fit", "delimiter=tab&columns=id:Sample%20ID,x:Reference,y:Candidate", read("tab-extra-quoted.tsv"), "row 3, column Operator", "extra_columns=ignore"},
		{"units row without the option", "/v1/fit", "", "x (mmol/L),y\nmmol/L,mmol/L\n1,2\n2,3\n3,5\n", "row 2, column x (mmol/L)", "units_row=true"},
		{"missing cells named row by row", "/v1/method-comparison", "columns=x:Comparative,y:Candidate,id:SampleID&group_by=Analyte", read("three-analytes.csv"), "row 33, column Comparative", "missing value (NA)"},
		{"a single blank cell", "/v1/fit", "", "x,y\n1,2\n2,\n3,4\n", "row 3, column y", "empty"},
		{"censored value", "/v1/fit", "", "x,y\n1,2\n2,<0.5\n3,4\n", "row 3, column y", "censored"},
		{"thousands separator", "/v1/fit", "delimiter=semicolon", "x;y\n1;2\n1,234.5;3\n4;5\n", "row 3, column x", "thousands separator"},
		{"decimal comma without the option", "/v1/fit", "delimiter=semicolon", "x;y\n1;2\n2,5;3\n4;5\n", "row 3, column x", "decimal=comma"},
		{"point with decimal=comma", "/v1/fit", "delimiter=semicolon&decimal=comma", "x;y\n1;2\n2.5;3\n4;5\n", "row 3, column x", "decimal=comma"},
		{"decimal comma between commas", "/v1/fit", "decimal=comma", "x,y\n1,2\n", "query parameter decimal", "delimiter=semicolon"},
		{"mapped column absent", "/v1/fit", "columns=x:Ref", "x,y\n1,2\n", "query parameter columns", "no column \"Ref\""},
		{"unknown role", "/v1/fit", "columns=slope:Ref", "x,y\n1,2\n", "query parameter columns", "unknown role"},
		{"method outside x_method and y_method", "/v1/method-comparison", "x_method=A&y_method=B", "id,method,value\n1,A,2\n1,C,3\n", "row 3, column method", "neither"},
		{"long format sample without y", "/v1/method-comparison", "x_method=A&y_method=B", "id,method,value\n1,A,2\n1,B,3\n2,A,4\n", "row 4, column id", "no y value"},
		{"units that differ in a comparison", "/v1/method-comparison", "", "id,x (mmol/L),y (mg/dL)\n1,2,36\n2,3,54\n3,4,72\n", "row 1", "one unit"},
		{"per-group option for an absent group", "/v1/method-comparison", "group_by=analyte&decision_levels%5Burea%5D=5", "analyte,x,y\nna,1,2\nna,2,3\nna,3,4\n", "query parameter decision_levels[urea]", "no group"},
		{"per-group option without group_by", "/v1/fit", "at%5Bglucose%5D=5", "x,y\n1,2\n", "query parameter group_by", "need group_by"},
		{"group_by on a JSON body", "/v1/fit", "group_by=analyte", "", "query parameter group_by", "text/csv"},
	} {
		t.Run(c.name, func(t *testing.T) {
			ctype := "text/csv"
			if c.body == "" {
				ctype, c.body = "application/json", `{"points":[{"x":1,"y":2}]}`
			}
			rec := h.do("POST", c.path+"?"+c.query, ctype, c.body)
			if rec.Code != http.StatusBadRequest {
				t.Fatalf("status %d, want 400: %s", rec.Code, rec.Body.String())
			}
			p := decodeProblem(t, rec)
			found := false
			for _, e := range p.Errors {
				if e.Pointer == c.pointer && strings.Contains(e.Detail+" "+p.Detail, c.detail) {
					found = true
				}
			}
			if !found {
				t.Errorf("want %q at %q; got %+v (%s)", c.detail, c.pointer, p.Errors, p.Detail)
			}
		})
	}
}
