package api

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"

	"eivfit/api/wire"
)

// batchPoints and batchSamples are seeded invented data: a line y = 0.2 +
// 1.03·x with noise, as points of a fit and as samples of a comparison.
func batchPoints(seed uint64, n int) (points, samples string) {
	r := rand.New(rand.NewPCG(seed, 7))
	var p, s []string
	for i := range n {
		x := 3 + 20*r.Float64()
		y := 0.2 + 1.03*x + 0.3*r.NormFloat64()
		x += 0.3 * r.NormFloat64()
		p = append(p, fmt.Sprintf(`{"x":%.3f,"y":%.3f}`, x, y))
		s = append(s, fmt.Sprintf(`{"id":"S%d","x":%.3f,"y":%.3f}`, i, x, y))
	}
	return "[" + strings.Join(p, ",") + "]", "[" + strings.Join(s, ",") + "]"
}

func decodeBatchAnswer(t *testing.T, rec interface{ Bytes() []byte }) wire.BatchResponse {
	t.Helper()
	var resp wire.BatchResponse
	if err := json.Unmarshal(rec.Bytes(), &resp); err != nil {
		t.Fatalf("%v\n%s", err, rec.Bytes())
	}
	return resp
}

// Every dataset of a batch, with the defaults applied, answers exactly as
// the same request sent alone to its endpoint with those options written
// out: defaults fill what a dataset leaves out, and a dataset's own member
// replaces the default whole.
func TestBatchDefaultsAndComparisons(t *testing.T) {
	p1, s1 := batchPoints(1, 30)
	p2, s2 := batchPoints(2, 25)
	cases := []struct {
		name     string
		defaults string
		dataset  string // inside the batch
		alone    string // the same request on its own
		path     string
	}{
		{"fit takes every fit default", `{"methods":["ols","deming"],"confidence":0.9,"at":[7,11]}`,
			`{"name":"a","points":` + p1 + `}`,
			`{"points":` + p1 + `,"methods":["ols","deming"],"confidence":0.9,"at":[7,11]}`, "/v1/fit"},
		{"own methods and at replace the defaults", `{"methods":["ols","deming"],"confidence":0.9,"at":[7,11]}`,
			`{"name":"b","points":` + p2 + `,"methods":["passing_bablok"],"at":[5]}`,
			`{"points":` + p2 + `,"methods":["passing_bablok"],"confidence":0.9,"at":[5]}`, "/v1/fit"},
		{"own bootstrap replaces the default whole", `{"bootstrap":{"resamples":200,"seed":3,"scheme":"pairs"}}`,
			`{"points":` + p1 + `,"bootstrap":{"resamples":100,"seed":4}}`,
			`{"points":` + p1 + `,"bootstrap":{"resamples":100,"seed":4}}`, "/v1/fit"},
		{"comparison takes shared and comparison defaults", `{"confidence":0.9,"decision_levels":[7,{"level":11,"allowable_bias":{"percent":5}}],"allowable_bias":{"absolute":0.5},"unit":"mmol/L"}`,
			`{"name":"c","kind":"method-comparison","samples":` + s1 + `}`,
			`{"samples":` + s1 + `,"confidence":0.9,"decision_levels":[7,{"level":11,"allowable_bias":{"percent":5}}],"allowable_bias":{"absolute":0.5},"unit":"mmol/L"}`, "/v1/method-comparison"},
		{"comparison's own levels replace the default", `{"decision_levels":[7],"error_model":"constant"}`,
			`{"kind":"method-comparison","samples":` + s2 + `,"decision_levels":[10],"exclude":["S3"]}`,
			`{"samples":` + s2 + `,"decision_levels":[10],"error_model":"constant","exclude":["S3"]}`, "/v1/method-comparison"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			h := newHarness(t, Config{})
			// Two datasets that take every default beside the one tested
			// (a default no dataset takes is refused).
			takers := `,{"points":` + p2 + `},{"kind":"method-comparison","samples":` + s2 + `}`
			rec := h.do("POST", "/v1/batch", "application/json", `{"defaults":`+c.defaults+`,"datasets":[`+c.dataset+takers+`]}`)
			if rec.Code != 200 {
				t.Fatalf("status %d\n%s", rec.Code, rec.Body.String())
			}
			resp := decodeBatchAnswer(t, rec.Body)
			if resp.OK != 3 || resp.Results[0].Status != 200 {
				t.Fatalf("%+v", resp.Results[0].Problem)
			}
			one := h.do("POST", c.path, "application/json", c.alone)
			if one.Code != 200 {
				t.Fatalf("alone: status %d\n%s", one.Code, one.Body.String())
			}
			var got any = resp.Results[0].Fit
			if c.path == "/v1/method-comparison" {
				got = resp.Results[0].Comparison
				if resp.Results[0].Fit != nil {
					t.Error("a comparison answered with a fit")
				}
			}
			a, _ := json.Marshal(got)
			var alone any
			if c.path == "/v1/fit" {
				alone = &wire.FitResponse{}
			} else {
				alone = &wire.CompareResponse{}
			}
			if err := json.Unmarshal(one.Body.Bytes(), alone); err != nil {
				t.Fatal(err)
			}
			b, _ := json.Marshal(alone)
			if !bytes.Equal(a, b) {
				t.Errorf("the batch's answer differs from the request alone\nbatch %s\nalone %s", wire.Truncate(string(a)), wire.Truncate(string(b)))
			}
		})
	}
}

// Faults in the defaults refuse the batch (400, pointer under /defaults);
// faults in a dataset are its own problem, named by the name it gave or
// by its 0-based index, pointed at under /datasets/i.
func TestBatchFaults(t *testing.T) {
	p, s := batchPoints(3, 12)
	fit := `{"name":"f","points":` + p + `}`
	cmp := `{"name":"m","kind":"method-comparison","samples":` + s + `}`
	cases := []struct {
		name     string
		body     string
		status   int    // of the whole answer
		dataset  int    // the failing dataset, when status is 200
		wantName string // its name in the answer
		pointer  string
		detail   string
	}{
		{"defaults not an object", `{"defaults":[1],"datasets":[` + fit + `]}`, 400, 0, "", "/defaults", "object"},
		{"unknown default", `{"defaults":{"method":["ols"]},"datasets":[` + fit + `]}`, 400, 0, "", "/defaults/method", "unknown field"},
		{"upper-case default", `{"defaults":{"AT":[1]},"datasets":[` + fit + `]}`, 400, 0, "", "/defaults/AT", `write "at"`},
		{"data in defaults", `{"defaults":{"points":[]},"datasets":[` + fit + `]}`, 400, 0, "", "/defaults/points", "belongs to each dataset"},
		{"excluded ids in defaults", `{"defaults":{"exclude":["S1"]},"datasets":[` + cmp + `]}`, 400, 0, "", "/defaults/exclude", "belongs to each dataset"},
		{"bad default value", `{"defaults":{"confidence":"high"},"datasets":[` + fit + `]}`, 400, 0, "", "/defaults/confidence", "number"},
		{"bad default level", `{"defaults":{"decision_levels":[7,"x"]},"datasets":[` + cmp + `]}`, 400, 0, "", "/defaults/decision_levels/1", ""},
		{"default repeated", `{"defaults":{"at":[1],"at":[2]},"datasets":[` + fit + `]}`, 400, 0, "", "/defaults/at", "twice"},
		{"fit default without fits", `{"defaults":{"at":[7]},"datasets":[` + cmp + `]}`, 400, 0, "", "/defaults/at", "no fit"},
		{"comparison default without comparisons", `{"defaults":{"decision_levels":[7]},"datasets":[` + fit + `]}`, 400, 0, "", "/defaults/decision_levels", "no method comparison"},
		{"default every fit overrides", `{"defaults":{"methods":["ols"]},"datasets":[{"points":` + p + `,"methods":["deming"]},` + cmp + `]}`, 400, 0, "", "/defaults/methods", "every fit sets its own"},
		{"shared default every dataset overrides", `{"defaults":{"confidence":0.9},"datasets":[{"points":` + p + `,"confidence":0.8},{"kind":"method-comparison","samples":` + s + `,"confidence":0.8}]}`, 400, 0, "", "/defaults/confidence", "every dataset sets its own"},
		{"defaults too many at", `{"defaults":{"at":[` + strings.TrimSuffix(strings.Repeat("1,", 1001), ",") + `]},"datasets":[` + fit + `]}`, 400, 0, "", "/defaults/at", "at most 1000"},
		{"unknown batch member", `{"default":{},"datasets":[` + fit + `]}`, 400, 0, "", "/default", "unknown field"},
		{"named dataset fails to decode", `{"datasets":[` + fit + `,{"name":"kept","points":` + p + `,"methods":"ols"}]}`, 200, 1, "kept", "/datasets/1/methods", "array"},
		{"name after the fault is kept", `{"datasets":[{"points":` + p + `,"lambda":-1,"name":"late"}]}`, 200, 0, "late", "/datasets/0/lambda", ""},
		{"unnamed dataset is named by its 0-based index", `{"datasets":[` + fit + `,{"points":[]}]}`, 200, 1, "dataset 1", "/datasets/1/points", ""},
		{"unknown kind", `{"datasets":[` + fit + `,{"name":"k","kind":"calibration","points":` + p + `}]}`, 200, 1, "k", "/datasets/1/kind", "method-comparison"},
		{"kind not a string", `{"datasets":[{"name":"k","kind":1,"points":` + p + `}]}`, 200, 0, "k", "/datasets/0/kind", "string"},
		{"samples in a fit", `{"datasets":[{"name":"s","samples":` + s + `}]}`, 200, 0, "s", "/datasets/0/samples", `"kind": "method-comparison"`},
		{"points in a comparison", `{"datasets":[{"name":"q","kind":"method-comparison","points":` + p + `}]}`, 200, 0, "q", "/datasets/0/points", `"samples"`},
		{"comparison entry strict", `{"datasets":[` + fit + `,{"name":"m","kind":"method-comparison","samples":` + s + `,"decision_level":[7]}]}`, 200, 1, "m", "/datasets/1/decision_level", "unknown field"},
		{"comparison without samples", `{"datasets":[{"kind":"method-comparison"}]}`, 200, 0, "dataset 0", "/datasets/0/samples", ""},
		{"dataset not an object", `{"datasets":[` + fit + `,[1]]}`, 200, 1, "dataset 1", "/datasets/1", "object"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			h := newHarness(t, Config{})
			h.skipRequest = true // invalid on purpose; the answer is still checked
			rec := h.do("POST", "/v1/batch", "application/json", c.body)
			if rec.Code != c.status {
				t.Fatalf("status %d, want %d\n%s", rec.Code, c.status, rec.Body.String())
			}
			var pr *wire.Problem
			if c.status != 200 {
				p := decodeProblem(t, rec)
				pr = &p
			} else {
				resp := decodeBatchAnswer(t, rec.Body)
				r := resp.Results[c.dataset]
				if r.Name != c.wantName {
					t.Errorf("name %q, want %q", r.Name, c.wantName)
				}
				if r.Problem == nil || r.Status < 400 || r.Status >= 500 {
					t.Fatalf("dataset %d: status %d, problem %+v", c.dataset, r.Status, r.Problem)
				}
				if resp.Failed != 1 || resp.OK != len(resp.Results)-1 {
					t.Errorf("ok %d failed %d", resp.OK, resp.Failed)
				}
				pr = r.Problem
			}
			if len(pr.Errors) == 0 || pr.Errors[0].Pointer != c.pointer {
				t.Fatalf("errors %+v, want pointer %q", pr.Errors, c.pointer)
			}
			if !strings.Contains(pr.Errors[0].Detail+" "+pr.Detail, c.detail) {
				t.Errorf("detail %q, want it to contain %q", pr.Errors[0].Detail, c.detail)
			}
		})
	}
}

// A batch carries its options in its body, and a file split by group_by
// is not saved: a query that would be ignored is a 400 naming it.
func TestBatchAndGroupQueries(t *testing.T) {
	p, _ := batchPoints(4, 10)
	batch := `{"datasets":[{"points":` + p + `}]}`
	const csv = "analyte,id,x,y\na,1,1,1.1\na,2,2,2.1\na,3,3,3.2\na,4,4,4.1\nb,1,1,1.1\nb,2,2,2.3\nb,3,3,3.2\nb,4,4,4.4\n"
	cases := []struct {
		name, target, ctype, body string
		pointer, detail           string
	}{
		{"batch with save", "/v1/batch?save=true", "application/json", batch, "query parameter save", "not saved"},
		{"batch with a label", "/v1/batch?label=x", "application/json", batch, "query parameter label", "not saved"},
		{"batch with an option", "/v1/batch?confidence=0.9", "application/json", batch, "query parameter confidence", "defaults"},
		{"batch with a bad escape", "/v1/batch?x=%zz", "application/json", batch, "", "escape"},
		{"groups with save", "/v1/fit?group_by=analyte&save=true", "text/csv", csv, "query parameter save", "group_by is not saved"},
		{"comparison groups with a tag", "/v1/method-comparison?group_by=analyte&tag=a:b", "text/csv", csv, "query parameter tag", "group_by is not saved"},
		{"groups with a bad escape", "/v1/fit?group_by=analyte&at=%zz", "text/csv", csv, "", "escape"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			h := newHarness(t, Config{})
			rec := h.do("POST", c.target, c.ctype, c.body)
			if rec.Code != 400 {
				t.Fatalf("status %d\n%s", rec.Code, rec.Body.String())
			}
			pr := decodeProblem(t, rec)
			if c.pointer != "" && (len(pr.Errors) == 0 || pr.Errors[0].Pointer != c.pointer) {
				t.Errorf("errors %+v, want pointer %q", pr.Errors, c.pointer)
			}
			if !strings.Contains(pr.Error(), c.detail) {
				t.Errorf("problem %q, want it to contain %q", pr.Error(), c.detail)
			}
		})
	}
}
