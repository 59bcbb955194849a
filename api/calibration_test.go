package api

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"eivfit/api/wire"
)

// gasSensorFitCSV is the gas-sensor demo's standards as a line-fit
// dataset (id,x,sx,y,sy), for the tests of /v1/fit and its report; the
// demo itself is a calibration (role column).
func gasSensorFitCSV(t *testing.T) (body, path string) {
	t.Helper()
	b, err := os.ReadFile("../testdata/demo-gas-sensor.csv")
	if err != nil {
		t.Fatal(err)
	}
	var sb strings.Builder
	sb.WriteString("id,x,sx,y,sy\n")
	for _, line := range strings.Split(string(b), "\n") {
		f := strings.Split(line, ",")
		if len(f) == 8 && f[0] == "standard" { // role,id,x,ux,y1,y2,y3,uy
			sb.WriteString(strings.Join([]string{f[1], f[2], f[3], f[4], f[7]}, ",") + "\n")
		}
	}
	path = filepath.Join(t.TempDir(), "gas-sensor-standards.csv")
	if err := os.WriteFile(path, []byte(sb.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return sb.String(), path
}

const calJSON = `{"standards":[{"id":"S1","x":1.0,"ux":0.005,"y":[0.212,0.215]},{"id":"S2","x":2.0,"ux":0.008,"y":[0.418,0.421]},` +
	`{"id":"S3","x":4.0,"ux":0.012,"y":[0.829,0.834]},{"id":"S4","x":8.0,"ux":0.020,"y":[1.650,1.641]}]`

// Every case goes through the real router and is checked against the
// OpenAPI document and the rules of the numbers (answertest).
func TestCalibrationEndpoint(t *testing.T) {
	h := newHarness(t, Config{})
	demo, err := os.ReadFile("../testdata/demo-gas-sensor.csv")
	if err != nil {
		t.Fatal(err)
	}
	const unk = `,"unknowns":[{"id":"U1","y":[0.530,0.534]},{"id":"U2","y":1.21,"uy":0.004}]`
	cases := []struct {
		name, target, ctype, body string
		status                    int
		pointer                   string
	}{
		{"json shared component", "/v1/calibration", "application/json", calJSON + unk +
			`,"shared_components":[{"name":"stock","relative_u":0.002,"standards":["S1","S2","S3","S4"]}],"coverage_probability":0.95,"monte_carlo":{"trials":20000,"seed":3},"forward":[3,{"x":5,"ux":0.01}],"x_unit":"mg/L","y_unit":"AU"}`, 200, ""},
		{"json explicit covariance", "/v1/calibration", "application/json", `{"standards":[{"x":1,"y":2.1,"uy":0.1},{"x":2,"y":3.9,"uy":0.1},{"x":3,"y":6.2,"uy":0.1}],"x_covariance":[[0.01,0.002,0],[0.002,0.01,0],[0,0,0.01]],"unknowns":[{"y":5,"uy":0.1}]}`, 200, ""},
		{"csv demo", "/v1/calibration?coverage_probability=0.95&trials=10000&seed=1&forward=500", "text/csv", string(demo), 200, ""},
		{"unknown without readings", "/v1/calibration", "application/json", calJSON + `,"unknowns":[{"id":"U1"}]}`, 400, "/unknowns/0/y"},
		{"unknown with empty readings", "/v1/calibration", "application/json", calJSON + `,"unknowns":[{"id":"U1","y":[]}]}`, 400, "/unknowns/0/y"},
		{"csv unknown without readings", "/v1/calibration", "text/csv", "role,id,x,ux,y,uy\nstandard,S1,1,0.01,2,0.1\nunknown,U1,,,,0.1\n", 400, "row 3, column y"},
		{"covariance not symmetric", "/v1/calibration", "application/json", `{"standards":[{"x":1,"y":2.1,"uy":0.1},{"x":2,"y":3.9,"uy":0.1},{"x":3,"y":6.2,"uy":0.1}],"x_covariance":[[0.01,0.002,0],[0.003,0.01,0],[0,0,0.01]]}`, 400, "/x_covariance/1/0"},
		{"covariance not PSD", "/v1/calibration", "application/json", `{"standards":[{"x":1,"y":2.1,"uy":0.1},{"x":2,"y":3.9,"uy":0.1},{"x":3,"y":6.2,"uy":0.1}],"x_covariance":[[0.01,0.02,0],[0.02,0.01,0],[0,0,0.01]]}`, 400, "/x_covariance/1/1"},
		{"covariance wrong size", "/v1/calibration", "application/json", `{"standards":[{"x":1,"y":2.1,"uy":0.1},{"x":2,"y":3.9,"uy":0.1},{"x":3,"y":6.2,"uy":0.1}],"x_covariance":[[0.01,0],[0,0.01]]}`, 400, "/x_covariance"},
		{"fewer than 3 standards", "/v1/calibration", "application/json", `{"standards":[{"x":1,"y":2,"uy":0.1},{"x":2,"y":4,"uy":0.1}]}`, 422, "/standards"},
		{"zero slope", "/v1/calibration", "application/json", `{"standards":[{"x":1,"y":2.0,"uy":0.5},{"x":2,"y":2.1,"uy":0.5},{"x":3,"y":1.9,"uy":0.5}],"unknowns":[{"y":2}]}`, 422, "/standards"},
		{"csv zero slope", "/v1/calibration", "text/csv", "role,x,y,uy\nstandard,1,2.0,0.5\nstandard,2,2.1,0.5\nstandard,3,1.9,0.5\n", 422, "body"},
		{"refuse inconsistent", "/v1/calibration", "application/json", `{"standards":[{"x":1,"y":2.0,"uy":0.01},{"x":2,"y":4.5,"uy":0.01},{"x":3,"y":5.9,"uy":0.01},{"x":4,"y":8.3,"uy":0.01}],"on_inconsistent":"refuse"}`, 422, "/on_inconsistent"},
		{"stated uy zero", "/v1/calibration", "application/json", calJSON + `,"unknowns":[{"y":1,"uy":0}]}`, 400, "/unknowns/0/uy"},
		{"negative ux", "/v1/calibration", "application/json", `{"standards":[{"x":1,"ux":-1,"y":2,"uy":0.1},{"x":2,"y":4,"uy":0.1},{"x":3,"y":6.1,"uy":0.1}]}`, 400, "/standards/0/ux"},
		{"shared component names no standard", "/v1/calibration", "application/json", calJSON + `,"shared_components":[{"relative_u":0.01,"standards":["S1","S9"]}]}`, 400, "/shared_components/0/standards/1"},
		{"unknown field", "/v1/calibration", "application/json", calJSON + `,"coverage":2}`, 400, "/coverage"},
		{"unknown standard field", "/v1/calibration", "application/json", `{"standards":[{"x":1,"y":2,"sy":1}]}`, 400, "/standards/0/sy"},
		{"bad number", "/v1/calibration", "application/json", `{"standards":[{"x":1,"y":[2,"a"]}]}`, 400, "/standards/0/y/1"},
		{"both k and p", "/v1/calibration", "application/json", calJSON + `,"coverage_factor":2,"coverage_probability":0.95}`, 400, "/coverage_probability"},
		{"bad model", "/v1/calibration", "application/json", calJSON + `,"model":"ols"}`, 400, "/model"},
		{"too few trials", "/v1/calibration", "application/json", calJSON + unk + `,"monte_carlo":{"trials":5}}`, 400, "/monte_carlo/trials"},
		{"csv bad query", "/v1/calibration?trials=many", "text/csv", string(demo), 400, "query parameter trials"},
		{"csv unknown query", "/v1/calibration?methods=york", "text/csv", string(demo), 400, "query parameter methods"},
		{"csv bad cell", "/v1/calibration", "text/csv", "role,x,ux,y,uy\nstandard,1,0.1,2,0.1\nstandard,2,0.1,x,0.1\n", 400, "row 3, column y"},
		{"csv bad role", "/v1/calibration", "text/csv", "role,x,y,uy\nsample,1,2,0.1\n", 400, "row 2, column role"},
		{"csv unknown with x", "/v1/calibration", "text/csv", "role,x,y,uy\nunknown,1,2,0.1\n", 400, "row 2, column x"},
		{"csv no role column", "/v1/calibration", "text/csv", "x,y\n1,2\n", 400, "row 1"},
		{"csv uy zero", "/v1/calibration", "text/csv", "role,x,y,uy\nstandard,1,2,0\nstandard,2,4,0.1\nstandard,3,6.1,0.1\n", 400, "row 2, column uy"},
		{"csv shared unknown id", "/v1/calibration?shared_relative_u=0.01&shared_standards=M01,Q", "text/csv", string(demo), 400, "query parameter shared_standards"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			rec := h.do("POST", c.target, c.ctype, c.body)
			if rec.Code != c.status {
				t.Fatalf("status %d, want %d\n%s", rec.Code, c.status, wire.Truncate(rec.Body.String()))
			}
			if c.status != 200 {
				p := decodeProblem(t, rec)
				if len(p.Errors) == 0 || p.Errors[0].Pointer != c.pointer {
					t.Errorf("errors %+v, want pointer %q", p.Errors, c.pointer)
				}
				return
			}
			// The answer paths that checks outside the project read.
			var doc map[string]any
			if err := json.Unmarshal(rec.Body.Bytes(), &doc); err != nil {
				t.Fatal(err)
			}
			for _, path := range []string{"line.model", "line.intercept.estimate", "line.intercept.u", "line.slope.estimate",
				"line.slope.u", "line.cov_slope_intercept", "validation.chi2", "validation.dof", "validation.p",
				"validation.consistent", "unknowns.0.id", "unknowns.0.x.estimate", "unknowns.0.x.u", "unknowns.0.x.k",
				"unknowns.0.x.expanded", "unknowns.0.x.interval.lower", "unknowns.0.x.interval.upper", "warnings", "caution"} {
				if _, ok := walk(doc, path); !ok {
					t.Errorf("no %s in the answer", path)
				}
			}
			for _, bad := range []string{"bias", "identity", "agreement", "limits_of_agreement"} {
				if strings.Contains(rec.Body.String(), `"`+bad) {
					t.Errorf("a calibration answer carries %q", bad)
				}
			}
		})
	}
}

// walk follows a dotted path (array indices as numbers) through JSON.
func walk(v any, path string) (any, bool) {
	for _, k := range strings.Split(path, ".") {
		switch x := v.(type) {
		case map[string]any:
			var ok bool
			if v, ok = x[k]; !ok {
				return nil, false
			}
		case []any:
			i := 0
			for _, ch := range k {
				i = 10*i + int(ch-'0')
			}
			if i >= len(x) {
				return nil, false
			}
			v = x[i]
		default:
			return nil, false
		}
	}
	return v, true
}

// The Monte Carlo check and the known inverse of a line: on the ISO/TS
// 28037:2010 example 1 data (testdata/ref/iso28037-ex1-wls-equal.csv: x
// exact, u(y) = 0.5), the published inverse prediction x(10.5 ± 0.5) =
// 4.913 ± 0.322 reaches the answer through the router, to the printed
// digits (half a unit in the last: 5e-4).
func TestCalibrationISOExample(t *testing.T) {
	h := newHarness(t, Config{})
	body := `{"standards":[{"x":1,"y":3.3,"uy":0.5},{"x":2,"y":5.6,"uy":0.5},{"x":3,"y":7.1,"uy":0.5},{"x":4,"y":9.3,"uy":0.5},{"x":5,"y":10.7,"uy":0.5},{"x":6,"y":12.1,"uy":0.5}],` +
		`"unknowns":[{"id":"y0","y":10.5,"uy":0.5}],"monte_carlo":{"trials":200000,"seed":11}}`
	rec := h.do("POST", "/v1/calibration", "application/json", body)
	if rec.Code != 200 {
		t.Fatalf("status %d %s", rec.Code, rec.Body.String())
	}
	var r wire.CalibrationResponse
	if err := json.Unmarshal(rec.Body.Bytes(), &r); err != nil {
		t.Fatal(err)
	}
	u := r.Unknowns[0]
	if r.Line.Model != "wls" || !near(u.X.Estimate, 4.913, 5e-4) || !near(u.X.U, 0.322, 5e-4) {
		t.Errorf("model %s, x0 = %v ± %v, want wls, 4.913 ± 0.322", r.Line.Model, u.X.Estimate, u.X.U)
	}
	// JCGM 101: the Monte Carlo SD agrees with the linear u within its
	// own sampling error (2e5 trials: relative SE of an SD ≈ 1/√(2M) ≈ 0.0016;
	// 1 % allows for the slight non-linearity through 1/b).
	if u.MonteCarlo == nil || !near(u.MonteCarlo.SD, u.X.U, 0.01*u.X.U) {
		t.Errorf("Monte Carlo %+v", u.MonteCarlo)
	}
}

func near(a, b, tol float64) bool { return a-b <= tol && b-a <= tol }

// The calibration record: the standards, the model and why, the line with
// its covariance, the validation with its residual plot, the calibration
// plot, the unknowns, the caution, version, input hash and seed; nothing
// that compares y with x.
func TestCalibrationReport(t *testing.T) {
	h := newHarness(t, Config{Version: "9.9.9"})
	demo, err := os.ReadFile("../testdata/demo-gas-sensor.csv")
	if err != nil {
		t.Fatal(err)
	}
	rec := h.do("POST", "/v1/calibration?coverage_probability=0.95&trials=20000&seed=5", "text/csv", string(demo), "Accept", "text/html")
	if rec.Code != 200 || !strings.HasPrefix(rec.Header().Get("Content-Type"), "text/html") {
		t.Fatalf("status %d %s", rec.Code, rec.Body.String())
	}
	html := rec.Body.String()
	for _, want := range []string{"Calibration record", "Reference standards", "generalized distance regression", "Why:",
		"cov(a, b)", "Validation", "Standardized residuals of the standards", "Calibration line", "unknowns x₀",
		"x₀ = (ȳ₀ − a)/b", "Monte Carlo check", "U1", "ISO/IEC 17025", "eivfit 9.9.9", "Input SHA-256", "Monte Carlo seed", "umol/mol"} {
		if !strings.Contains(html, want) {
			t.Errorf("the record lacks %q", want)
		}
	}
	for _, bad := range []string{"identity", "y − x", "Bland", "limits of agreement"} {
		if strings.Contains(html, bad) {
			t.Errorf("the record carries %q", bad)
		}
	}
	if os.Getenv("EIVFIT_CAL_HTML") != "" {
		_ = os.WriteFile(os.Getenv("EIVFIT_CAL_HTML"), rec.Body.Bytes(), 0o644)
	}
}

// /v1/fit with x and y in different units: no bias y − x in the JSON, no
// identity line in the data plot, no difference plot; the same data
// without units keep them.
func TestFitDifferentUnits(t *testing.T) {
	h := newHarness(t, Config{})
	csv, _ := gasSensorFitCSV(t)
	rec := h.do("POST", "/v1/fit?at=500&x_unit=umol/mol&y_unit=mV", "text/csv", csv)
	if rec.Code != 200 {
		t.Fatalf("status %d %s", rec.Code, rec.Body.String())
	}
	var r wire.FitResponse
	if err := json.Unmarshal(rec.Body.Bytes(), &r); err != nil {
		t.Fatal(err)
	}
	if strings.Contains(rec.Body.String(), `"bias"`) || r.Fits.York.At[0].Y.Estimate == 0 {
		t.Errorf("bias present or prediction missing: %s", wire.Truncate(rec.Body.String()))
	}
	if n := len(r.Warnings); n == 0 || r.Warnings[n-1].Code != wire.WarnUnitsDiffer {
		t.Errorf("warnings %+v", r.Warnings)
	}
	json := `{"points":[{"x":1,"y":3.1},{"x":2,"y":5.2},{"x":3,"y":6.9},{"x":4,"y":9.2}],"at":[2.5],"x_unit":"mg/kg","y_unit":"mV"}`
	if rec := h.do("POST", "/v1/fit", "application/json", json); rec.Code != 200 || strings.Contains(rec.Body.String(), `"bias"`) {
		t.Errorf("json: %d %s", rec.Code, wire.Truncate(rec.Body.String()))
	}
	if rec := h.do("POST", "/v1/fit?at=2.5", "text/csv", "x,y\n1,3.1\n2,5.2\n3,6.9\n4,9.2\n"); !strings.Contains(rec.Body.String(), `"bias"`) {
		t.Error("without units the bias is gone too")
	}
	page := h.do("POST", "/v1/fit?at=500&x_unit=umol/mol&y_unit=mV", "text/csv", csv, "Accept", "text/html").Body.String()
	for _, bad := range []string{"identity y = x", "Difference plot", "Fitted y and bias y − x"} {
		if strings.Contains(page, bad) {
			t.Errorf("the report carries %q", bad)
		}
	}
	if !strings.Contains(page, "umol/mol") || !strings.Contains(page, "different units") {
		t.Error("the report does not say why")
	}
	if rec := h.do("POST", "/v1/plots/difference?x_unit=umol/mol&y_unit=mV", "text/csv", csv); rec.Code != 400 {
		t.Errorf("difference plot across units: %d", rec.Code)
	}
}
