package api

import (
	"encoding/json"
	"fmt"
	"strings"
	"testing"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// repeatList is `[e,e,…]` with n entries.
func repeatList(e string, n int) string {
	return "[" + strings.TrimSuffix(strings.Repeat(e+",", n), ",") + "]"
}

// Every list is counted while it is read and refused at limit + 1 naming
// it; repeated and case-variant keys are refused naming the key; numbers a
// spreadsheet would not write are refused; names have a length limit.
// Each case goes through the real router.
func TestStrictDecoding(t *testing.T) {
	h := newHarness(t, Config{MaxBodyBytes: 256 << 10, MaxBatch: 10, Limits: study.Limits{MaxPoints: 100, MaxAt: 5}})
	p3 := `[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]`
	fit := func(extra string) string { return `{"points":` + p3 + extra + `}` }
	s3 := `[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]`
	cmp := func(extra string) string { return `{"samples":` + s3 + extra + `}` }
	pt := `{"x":1,"y":2}`
	long := strings.Repeat("n", 256+1) // the limit on names and ids, in wire
	csv3 := "x,y\n1,2\n2,3\n3,5\n"
	repl := func(n int) string { // CSV header with n x replicates
		var cols []string
		for i := range n {
			cols = append(cols, fmt.Sprintf("x%d", i+1))
		}
		return strings.Join(cols, ",") + ",y\n" + strings.TrimSuffix(strings.Repeat("1,", n), ",") + ",2\n"
	}
	cases := []struct {
		name, path, ctype, body string
		status                  int
		pointer, detail         string
	}{
		// Lists stop at limit + 1.
		{"points over limit", "/v1/fit", "application/json", `{"points":` + repeatList(pt, 101) + `}`, 413, "/points", "at most 100"},
		{"at over limit", "/v1/fit", "application/json", fit(`,"at":` + repeatList("1", 6)), 400, "/at", "at most 5"},
		{"methods over limit", "/v1/fit", "application/json", fit(`,"methods":` + repeatList(`"ols"`, 6)), 400, "/methods", "at most 5"},
		{"samples over limit", "/v1/method-comparison", "application/json", `{"samples":` + repeatList(pt, 101) + `}`, 413, "/samples", "at most 100"},
		{"decision levels over limit", "/v1/method-comparison", "application/json", cmp(`,"decision_levels":` + repeatList("1", 6)), 400, "/decision_levels", "at most 5"},
		{"replicates over limit", "/v1/method-comparison", "application/json", `{"samples":[{"x":` + repeatList("1", 21) + `,"y":2}]}`, 400, "/samples/0/x", "at most 20"},
		{"exclude over limit", "/v1/method-comparison", "application/json", cmp(`,"exclude":` + repeatList(`"a"`, 101)), 413, "/exclude", "at most 100"},
		{"datasets over limit", "/v1/batch", "application/json", `{"datasets":` + repeatList(`{}`, 11) + `}`, 400, "/datasets", "at most 10"},
		{"csv rows over limit", "/v1/fit", "text/csv", "x,y\n" + strings.Repeat("1,2\n", 101), 413, "row 102", "at most 100"},
		{"csv samples over limit", "/v1/method-comparison", "text/csv", "x,y\n" + strings.Repeat("1,2\n", 101), 413, "row 102", "at most 100"},
		{"csv replicate columns", "/v1/method-comparison", "text/csv", repl(21), 400, "row 1, column x21", "at most 20"},
		// Repeated and case-variant keys.
		{"points twice", "/v1/fit", "application/json", `{"points":` + p3 + `,"points":` + p3 + `}`, 400, "/points", "twice"},
		{"lambda twice", "/v1/fit", "application/json", fit(`,"lambda":1,"lambda":2`), 400, "/lambda", "twice"},
		{"POINTS", "/v1/fit", "application/json", `{"POINTS":` + p3 + `}`, 400, "/POINTS", `write "points"`},
		{"METHODS", "/v1/fit", "application/json", fit(`,"METHODS":["ols"]`), 400, "/METHODS", `write "methods"`},
		{"LAMBDA", "/v1/fit", "application/json", fit(`,"LAMBDA":2`), 400, "/LAMBDA", `write "lambda"`},
		{"Resamples", "/v1/fit", "application/json", fit(`,"bootstrap":{"Resamples":200}`), 400, "/bootstrap/Resamples", `write "resamples"`},
		{"point X", "/v1/fit", "application/json", `{"points":[{"X":1,"y":2}]}`, 400, "/points/0/X", `write "x"`},
		{"SAMPLES", "/v1/method-comparison", "application/json", `{"SAMPLES":` + s3 + `}`, 400, "/SAMPLES", `write "samples"`},
		{"sample x twice", "/v1/method-comparison", "application/json", `{"samples":[{"x":1,"x":2,"y":3}]}`, 400, "/samples/0/x", "twice"},
		{"sample Y", "/v1/method-comparison", "application/json", `{"samples":[{"x":1,"Y":2}]}`, 400, "/samples/0/Y", `write "y"`},
		{"allowable twice", "/v1/method-comparison", "application/json", cmp(`,"allowable_bias":{"absolute":1,"absolute":2}`), 400, "/allowable_bias/absolute", "twice"},
		{"level Level", "/v1/method-comparison", "application/json", cmp(`,"decision_levels":[{"Level":1}]`), 400, "/decision_levels/0/Level", `write "level"`},
		// Names.
		{"x_name too long", "/v1/method-comparison", "application/json", cmp(`,"x_name":"` + long + `"`), 400, "/x_name", "at most 256 bytes"},
		{"unit too long (query)", "/v1/method-comparison?unit=" + long, "text/csv", csv3, 400, "query parameter unit", "at most 256 bytes"},
		{"point id too long", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2,"id":"` + long + `"}]}`, 400, "/points/0/id", "at most 256 bytes"},
		{"csv id too long", "/v1/fit", "text/csv", "x,y,id\n1,2," + long + "\n", 400, "row 2, column id", "at most 256 bytes"},
		{"method name too long", "/v1/fit", "application/json", fit(`,"methods":["` + long + `"]`), 400, "/methods/0", "at most 256 bytes"},
		// Numbers a spreadsheet would not write.
		{"csv underscore", "/v1/fit", "text/csv", "x,y\n1_000.5,2\n2,3\n3,5\n", 400, "row 2, column x", "not a number"},
		{"csv hex float", "/v1/fit", "text/csv", "x,y\n0x1p3,2\n2,3\n3,5\n", 400, "row 2, column x", "not a number"},
		{"csv plus sign", "/v1/fit", "text/csv", "x,y\n+5,2\n2,3\n3,5\n", 400, "row 2, column x", "no '+' sign"},
		{"csv underflow", "/v1/fit", "text/csv", "x,y\n1,1e-400\n2,3\n3,5\n", 400, "row 2, column y", "smallest normal"},
		{"csv overflow", "/v1/fit", "text/csv", "x,y\n1,1e400\n2,3\n3,5\n", 400, "row 2, column y", "double-precision range"},
		{"csv quoted underscore", "/v1/fit", "text/csv", "x,y\n\"1_0\",2\n2,3\n3,5\n", 400, "row 2, column x", "not a number"},
		{"json underflow", "/v1/fit", "application/json", `{"points":[{"x":1,"y":1e-400}]}`, 400, "/points/0/y", "smallest normal"},
		{"query underscore", "/v1/fit?lambda=1_0", "text/csv", csv3, 400, "query parameter lambda", "not a number"},
		{"query hex", "/v1/fit?at=0x10", "text/csv", csv3, 400, "query parameter at", "not a number"},
		{"query plus", "/v1/method-comparison?decision_levels=%2B5", "text/csv", csv3, 400, "query parameter decision_levels", "no '+' sign"},
		{"query underflow", "/v1/fit?confidence=1e-400", "text/csv", csv3, 400, "query parameter confidence", "smallest normal"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			rec := h.do("POST", c.path, c.ctype, c.body)
			if rec.Code != c.status {
				t.Fatalf("status %d, want %d: %s", rec.Code, c.status, wire.Truncate(rec.Body.String()))
			}
			if c.path == "/v1/batch" && rec.Code == 200 {
				return
			}
			p := decodeProblem(t, rec)
			if len(p.Errors) == 0 || p.Errors[0].Pointer != c.pointer || !strings.Contains(p.Errors[0].Detail, c.detail) {
				t.Errorf("errors %+v, want pointer %q with %q", p.Errors, c.pointer, c.detail)
			}
		})
	}
}

// A batch entry is read as strictly as a fit body: its problem names the
// key under /datasets/i.
func TestStrictBatchEntry(t *testing.T) {
	h := newHarness(t, Config{})
	h.skipRequest = true // the request is invalid on purpose; the answer is still checked
	body := `{"datasets":[{"name":"a","points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]},{"name":"b","METHODS":["ols"]},{"name":"c","name":"d"}]}`
	rec := h.do("POST", "/v1/batch", "application/json", body)
	if rec.Code != 200 {
		t.Fatalf("status %d: %s", rec.Code, rec.Body.String())
	}
	var resp wire.BatchResponse
	if err := json.Unmarshal(rec.Body.Bytes(), &resp); err != nil {
		t.Fatal(err)
	}
	want := []string{"", "/datasets/1/METHODS", "/datasets/2/name"}
	for i, r := range resp.Results {
		got := ""
		if r.Problem != nil && len(r.Problem.Errors) > 0 {
			got = r.Problem.Errors[0].Pointer
		}
		if got != want[i] {
			t.Errorf("dataset %d: pointer %q, want %q (%+v)", i, got, want[i], r.Problem)
		}
	}
}

// An unknown key or value of 200 KB is echoed cut to 64 bytes (wire's maxEcho), so the
// problem stays small.
func TestEchoTruncated(t *testing.T) {
	h := newHarness(t, Config{MaxBodyBytes: 1 << 20})
	big := strings.Repeat("k", 200<<10)
	for _, c := range []struct{ name, path, ctype, body string }{
		{"unknown key", "/v1/fit", "application/json", `{"` + big + `":1}`},
		{"unknown point key", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2,"` + big + `":1}]}`},
		{"unknown sample key", "/v1/method-comparison", "application/json", `{"samples":[{"x":1,"y":2,"` + big + `":1}]}`},
		{"string number", "/v1/fit", "application/json", `{"points":[{"x":"` + big + `","y":2}]}`},
		{"csv column", "/v1/fit", "text/csv", "x,y," + big + "\n1,2,3\n"},
		{"csv cell", "/v1/fit", "text/csv", "x,y\n1," + big + "\n"},
		{"query", "/v1/fit?lambda=" + big, "text/csv", "x,y\n1,2\n"},
	} {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			rec := h.do("POST", c.path, c.ctype, c.body)
			if rec.Code != 400 {
				t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
			}
			// Three echoes of maxEcho bytes and the prose: well under 2 KB.
			if n := rec.Body.Len(); n > 2048 {
				t.Errorf("the problem is %d bytes: %s", n, wire.Truncate(rec.Body.String()))
			}
		})
	}
}
