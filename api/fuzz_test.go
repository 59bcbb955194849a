package api

import (
	"bytes"
	"context"
	"eivfit/eiv/study"
	"encoding/json"
	"errors"
	"net/url"
	"testing"
	"time"

	"eivfit/api/wire"
)

// fuzzSettings keep each fuzzed fit small and quick.
var fuzzSettings = study.Settings{Limits: study.Limits{MaxPoints: 500, MaxResamples: 200, MaxAt: 20}, Workers: 1, JackknifeMaxN: 100}

// mustBeClean fails on anything but a finite answer or a *wire.Problem with a
// 4xx status.
func mustBeClean(t *testing.T, resp any, err error) {
	t.Helper()
	if err != nil {
		var p *wire.Problem
		if !errors.As(err, &p) || p.Status < 400 || p.Status >= 500 {
			t.Fatalf("not a 4xx problem: %T %v", err, err)
		}
		if len(p.Errors) == 0 && p.Status != 413 {
			t.Fatalf("a problem without a pointer: %+v", p)
		}
		return
	}
	if _, err := json.Marshal(resp); err != nil {
		t.Fatalf("the answer does not encode (NaN?): %v", err)
	}
}

func fuzzCtx() (context.Context, context.CancelFunc) {
	return context.WithTimeout(context.Background(), 5*time.Second)
}

func FuzzFitJSON(f *testing.F) {
	for _, s := range []string{
		`{"points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]}`,
		`{"points":[{"x":1.2,"sx":0.2,"y":3.4,"sy":0.2},{"x":1.9,"sx":0.2,"y":4.4,"sy":0.2},{"x":2.9,"sx":0.2,"y":7.2,"sy":0.2}],"methods":["york","ols"],"at":[2]}`,
		`{"points":[{"x":1,"y":2,"sx":0.1,"sy":0.1,"r":0.5},{"x":2,"y":3,"sx":0.1,"sy":0.1,"r":-0.5},{"x":3,"y":5,"sx":0.1,"sy":0.1,"r":0}],"bootstrap":{"resamples":100,"seed":1}}`,
		`{"points":[{"x":1,"y":1},{"x":1,"y":2},{"x":1,"y":3}]}`,
		`{"points":[{"x":1e300,"y":2},{"x":-1e300,"y":3},{"x":0,"y":5}],"lambda":1e-300}`,
		`{"points":[{"x":NaN,"y":2}]}`, `{"points":"x"}`, `[]`, `{`, ``,
		`{"points":[{"x":1,"y":2,"id":"\u00e9"},{"x":2,"y":3,"id":7},{"x":3,"y":5,"order":3}],"confidence":0.5,"methods":["passing_bablok","weighted_deming"]}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		req, err := wire.DecodeFitJSON(bytes.NewReader(data))
		if err != nil {
			mustBeClean(t, nil, err)
			return
		}
		ctx, cancel := fuzzCtx()
		defer cancel()
		resp, err := runFit(ctx, req, fuzzSettings)
		mustBeClean(t, resp, err)
	})
}

func FuzzFitCSV(f *testing.F) {
	for _, s := range []string{
		"x,y\n1,2\n2,3\n3,5\n",
		"\xef\xbb\xbf# c\nID,X,Y,SX,SY,R,ORDER\na,1,2,0.1,0.1,0,1\nb,2,3,0.1,0.1,0,2\nc,3,5,0.1,0.2,0.3,3\n",
		"x,y\n\"1\",\"2\"\n2,3\n3,5\n", "x;y\n1;2\n", "1,2\n3,4\n", "x,y\n1,2,3\n", "x,y\n1e999,2\n",
		"x,y,sx,sy\n1,2,0,0\n2,3,0,0\n3,5,0,0\n", "x,y\r\n1,2\r\n2,3\r\n3,5\r\n",
	} {
		f.Add([]byte(s), "methods=ols,deming,york&at=2")
	}
	f.Add([]byte("x,y\n1,2\n2,3\n3,5\n4,4\n"), "resamples=100&seed=3&scheme=pairs")
	f.Fuzz(func(t *testing.T, data []byte, query string) {
		q, err := url.ParseQuery(query)
		if err != nil {
			return
		}
		ctx, cancel := fuzzCtx()
		defer cancel()
		var resp *wire.FitResponse
		req, err := wire.FitFromCSV(bytes.NewReader(data), q)
		if err == nil {
			resp, err = runFit(ctx, req, fuzzSettings)
		}
		mustBeClean(t, resp, err)
	})
}

func FuzzCompareJSON(f *testing.F) {
	for _, s := range []string{
		`{"samples":[{"x":[1,1.1],"y":[1.2,1.1]},{"x":[2,2.1],"y":[2.2,2.3]},{"x":[3,2.9],"y":[3.1,3.3]},{"x":[4,4.2],"y":[4.1,4.3]}],"decision_levels":[2,{"level":3,"allowable_bias":{"percent":5}}],"allowable_bias":{"absolute":0.2}}`,
		`{"samples":[{"id":"a","x":1,"y":1},{"id":"b","x":2,"y":2.5},{"id":"c","x":3,"y":2.9},{"id":"d","x":4,"y":4.4}],"exclude":["a"],"error_model":"proportional"}`,
		`{"samples":[{"x":1,"y":1,"sx":0.1,"sy":0.1},{"x":2,"y":2,"sx":0.1,"sy":0.1},{"x":3,"y":3.1,"sx":0.1,"sy":0.1}]}`,
		`{"samples":[]}`, `{"samples":[{"x":[],"y":1}]}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		req, err := wire.DecodeCompareJSON(bytes.NewReader(data))
		if err != nil {
			mustBeClean(t, nil, err)
			return
		}
		if len(req.Samples) > 300 {
			return // keep each run quick
		}
		ctx, cancel := fuzzCtx()
		defer cancel()
		resp, err := runCompare(ctx, req, fuzzSettings)
		mustBeClean(t, resp, err)
	})
}
