package wire_test

import (
	"fmt"
	"reflect"
	"strings"
	"testing"

	"eivfit/api/wire"
	"eivfit/eiv"
	"eivfit/eiv/study"
)

// smallLimits make the list limits reachable with short bodies.
var smallLimits = wire.Limits{Limits: study.Limits{MaxPoints: 3, MaxResamples: 100, MaxAt: 2}, MaxBatch: 2}

// repeatJSON is n copies of item joined by commas.
func repeatJSON(item string, n int) string {
	return strings.TrimSuffix(strings.Repeat(item+",", n), ",")
}

func TestDecodeCalibrationJSON(t *testing.T) {
	body := `{"standards":[{"id":"S1","x":1,"ux":0.01,"y":[2.1,2.2],"uy":0.05,"r":0.1},{"id":7,"x":2,"y":4.1},{"x":3,"y":[6.0]}],
	"unknowns":[{"id":"U1","y":[3.1,3.2],"uy":0.05},{"y":5}],
	"shared_components":[{"name":"balance","relative_u":0.001,"standards":["S1","7"]}],
	"x_name":"amount","y_name":"signal","x_unit":"mg","y_unit":"mV","model":"gmr","on_inconsistent":"inflate",
	"coverage_probability":0.95,"confidence":0.99,"monte_carlo":{"trials":1000,"seed":3},"forward":[1.5,{"x":2.5,"ux":0.1}]}`
	req, err := wire.DecodeCalibrationJSON(strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	uy := 0.05
	seed := uint64(3)
	want := study.CalibrationData{
		Standards: []study.CalStandard{{ID: "S1", X: 1, UX: 0.01, Y: []float64{2.1, 2.2}, UY: &uy, R: 0.1}, {ID: "7", X: 2, Y: []float64{4.1}}, {X: 3, Y: []float64{6}}},
		Unknowns:  []study.CalUnknown{{ID: "U1", Y: []float64{3.1, 3.2}, UY: &uy}, {Y: []float64{5}}},
		Shared:    []study.CalShared{{Name: "balance", RelativeU: 0.001, Standards: []string{"S1", "7"}}},
	}
	if !reflect.DeepEqual(req.Data, want) {
		t.Errorf("data %+v\nwant %+v", req.Data, want)
	}
	if req.XName != "amount" || req.YName != "signal" || req.XUnit != "mg" || req.YUnit != "mV" || req.Model != "gmr" ||
		req.OnInconsistent != "inflate" || *req.CoverageProbability != 0.95 || *req.Confidence != 0.99 ||
		!reflect.DeepEqual(req.MonteCarlo, &study.CalMonteCarlo{Trials: 1000, Seed: &seed}) ||
		!reflect.DeepEqual(req.Forward, []study.CalForward{{X: 1.5}, {X: 2.5, UX: 0.1}}) {
		t.Errorf("options %+v", req)
	}
	cov, err := wire.DecodeCalibrationJSON(strings.NewReader(`{"standards":[{"x":1,"y":1},{"x":2,"y":2}],"x_covariance":[[1,0.5],[0.5,1]]}`))
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(cov.Data.XCovariance, [][]float64{{1, 0.5}, {0.5, 1}}) {
		t.Errorf("covariance %v", cov.Data.XCovariance)
	}
}

// TestDecodeCalibrationJSONErrors: strict keys and numbers, and every list
// refused at the entry past its limit (before the rest of the body is
// read: the cases with "…" end in bytes that are not JSON, so a decoder
// that read on would answer a syntax error instead).
func TestDecodeCalibrationJSONErrors(t *testing.T) {
	std := `{"x":1,"y":2}`
	stds := `"standards":[` + repeatJSON(std, 3) + `]`
	row := "[" + repeatJSON("0", study.MaxCovarianceStandards+1) + "]"
	cases := []struct {
		name, body, pointer string
		status              int
	}{
		{"too many standards…", `{"standards":[` + repeatJSON(std, 4) + `,@@@`, "/standards", 413},
		{"too many unknowns…", `{"unknowns":[` + repeatJSON(`{"y":1}`, 4) + `,@@@`, "/unknowns", 413},
		{"too many forward…", `{` + stds + `,"forward":[1,2,3,@@@`, "/forward", 413},
		{"too many replicates…", `{"standards":[{"x":1,"y":[` + repeatJSON("1", 21) + `,@@@`, "/standards/0/y", 400},
		{"too many unknown replicates", `{"unknowns":[{"y":[` + repeatJSON("1", 21) + `]}]}`, "/unknowns/0/y", 400},
		{"too many covariance rows…", `{"x_covariance":[` + repeatJSON("[]", study.MaxCovarianceStandards+1) + `,@@@`, "/x_covariance", 413},
		{"too many covariance columns", `{"x_covariance":[` + row + `]}`, "/x_covariance/0", 413},
		{"too many shared components…", `{"shared_components":[` + repeatJSON(`{"relative_u":0.1,"standards":["S1"]}`, study.MaxSharedComponents+1) + `,@@@`, "/shared_components", 413},
		{"too many shared members", `{"shared_components":[{"relative_u":0.1,"standards":[` + repeatJSON(`"S"`, study.MaxCovarianceStandards+1) + `]}]}`, "/shared_components/0/standards", 413},
		{"repeated key", `{"standards":[{"x":1,"x":2,"y":1}]}`, "/standards/0/x", 400},
		{"repeated top-level key", `{"model":"wls","model":"gdr"}`, "/model", 400},
		{"case-variant key", `{"MODEL":"wls"}`, "/MODEL", 400},
		{"unknown key in a standard", `{"standards":[{"x":1,"y":1,"sigma":1}]}`, "/standards/0/sigma", 400},
		{"unknown key in monte_carlo", `{"monte_carlo":{"runs":5}}`, "/monte_carlo/runs", 400},
		{"overflow", `{"standards":[` + std + `,{"x":1e400,"y":1}]}`, "/standards/1/x", 400},
		{"string number", `{"standards":[{"x":"1","y":1}]}`, "/standards/0/x", 400},
		{"NaN reading", `{"unknowns":[{"y":[1,NaN]}]}`, "/unknowns/0/y/1", 400},
		{"covariance entry", `{"x_covariance":[[1,"a"]]}`, "/x_covariance/0/1", 400},
		{"missing x", `{"standards":[{"y":1}]}`, "/standards/0/x", 400},
		{"missing relative_u", `{"shared_components":[{"standards":["S1"]}]}`, "/shared_components/0/relative_u", 400},
		{"forward without x", `{"forward":[{"ux":1}]}`, "/forward/0/x", 400},
		{"standard not an object", `{"standards":[1]}`, "/standards/0", 400},
		{"trials fraction", `{"monte_carlo":{"trials":1.5}}`, "/monte_carlo/trials", 400},
		{"seed negative", `{"monte_carlo":{"seed":-1}}`, "/monte_carlo/seed", 400},
		{"unit too long", `{"x_unit":"` + strings.Repeat("m", 257) + `"}`, "/x_unit", 400},
		{"id too long", `{"standards":[{"id":"` + strings.Repeat("s", 257) + `","x":1,"y":1}]}`, "/standards/0/id", 400},
		{"trailing data", `{"model":"wls"} {}`, "", 400},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := wire.DecodeCalibrationJSON(wire.NewBody([]byte(c.body), &smallLimits))
			if err == nil {
				t.Fatal("no error")
			}
			p := problemOf(t, err)
			if p.Status != c.status || len(p.Errors) == 0 {
				t.Fatalf("status %d (want %d) errors %+v", p.Status, c.status, p.Errors)
			}
			if c.pointer != "" && p.Errors[0].Pointer != c.pointer {
				t.Errorf("pointer %q (%s), want %q", p.Errors[0].Pointer, p.Errors[0].Detail, c.pointer)
			}
		})
	}
}

// TestDecodeCalibrationCSVErrors: the CSV takes plain decimals only, as
// many replicate columns as JSON, ids and units up to 256 bytes, and its
// rows are counted against the limit as they are read.
func TestDecodeCalibrationCSVErrors(t *testing.T) {
	var many strings.Builder
	many.WriteString("role,x,y\n")
	for i := range 4 {
		fmt.Fprintf(&many, "standard,%d,%d\n", i, 2*i)
	}
	ys := make([]string, 21)
	for k := range ys {
		ys[k] = fmt.Sprintf("y%d", k+1)
	}
	cases := []struct {
		name, body, where string
		status            int
	}{
		{"Go digit separator", "role,x,y\nstandard,1_000,2\n", "row 2, column x", 400},
		{"hex float", "role,x,y\nstandard,0x1p3,2\n", "row 2, column x", 400},
		{"plus sign", "role,x,y\nstandard,1,+5\n", "row 2, column y", 400},
		{"underflow", "role,x,y\nstandard,1e-400,2\n", "row 2, column x", 400},
		{"NaN", "role,x,y\nstandard,1,NaN\n", "row 2, column y", 400},
		{"too many replicate columns", "role,x," + strings.Join(ys, ",") + "\n", "row 1, column y21", 400},
		{"too many standards", many.String(), "row 5", 413},
		{"id too long", "role,id,x,y\nstandard," + strings.Repeat("s", 257) + ",1,2\n", "row 2, column id", 400},
		{"unit too long", "role,x (" + strings.Repeat("m", 257) + "),y\n", "row 1, column x", 400},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := wire.DecodeCalibrationCSV(wire.NewBody([]byte(c.body), &smallLimits))
			if err == nil {
				t.Fatal("no error")
			}
			p := problemOf(t, err)
			if p.Status != c.status || len(p.Errors) == 0 {
				t.Fatalf("status %d (want %d) errors %+v", p.Status, c.status, p.Errors)
			}
			if p.Errors[0].Pointer != c.where {
				t.Errorf("place %q (%s), want %q", p.Errors[0].Pointer, p.Errors[0].Detail, c.where)
			}
		})
	}
}

// TestDecodePlanJSONErrors: the planner's lists are refused at the entry
// past the planner's own limit, before the rest of the body is read.
func TestDecodePlanJSONErrors(t *testing.T) {
	cases := []struct {
		name, body, pointer string
	}{
		{"too many sizes…", `{"sizes":[` + repeatJSON("40", eiv.PlanMaxSizes+1) + `,@@@`, "/sizes"},
		{"too many levels…", `{"levels":[` + repeatJSON("1", eiv.PlanMaxN+1) + `,@@@`, "/levels"},
		{"too many differences…", `{"differences":[` + repeatJSON(`{"constant":1}`, eiv.PlanMaxScenarios+1) + `,@@@`, "/differences"},
		{"too many decision levels…", `{"decision_levels":[` + repeatJSON("1", eiv.PlanMaxDecisions+1) + `,@@@`, "/decision_levels"},
		{"repeated key", `{"trials":200,"trials":50}`, "/trials"},
		{"case-variant key", `{"Trials":200}`, "/Trials"},
		{"unknown key in error_x", `{"error_x":{"cv":2}}`, "/error_x/cv"},
		{"size fraction", `{"sizes":[40,2.5]}`, "/sizes/1"},
		{"level overflow", `{"levels":[1,1e400]}`, "/levels/1"},
		{"no_difference not bool", `{"no_difference":"yes"}`, "/no_difference"},
		{"seed negative", `{"seed":-1}`, "/seed"},
		{"replicates string", `{"replicates":{"x":"2"}}`, "/replicates/x"},
		{"unit too long", `{"unit":"` + strings.Repeat("m", 257) + `"}`, "/unit"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := wire.DecodePlanJSON(strings.NewReader(c.body))
			if err == nil {
				t.Fatal("no error")
			}
			p := problemOf(t, err)
			if p.Status != 400 || len(p.Errors) == 0 {
				t.Fatalf("status %d errors %+v", p.Status, p.Errors)
			}
			if p.Errors[0].Pointer != c.pointer {
				t.Errorf("pointer %q (%s), want %q", p.Errors[0].Pointer, p.Errors[0].Detail, c.pointer)
			}
		})
	}
}
