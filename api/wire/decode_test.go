package wire_test

import (
	"context"
	"errors"
	"net/url"
	"strings"
	"testing"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// The decoders' errors, and the study's errors as wire.Source locates
// them: each case names the JSON pointer, CSV row and column or query
// parameter a client must see.

// runFit is the handlers' path without HTTP: fit, convert, encode, each
// error located as the handler locates it.
func runFit(req *wire.FitRequest) (*wire.FitResponse, error) {
	r, err := study.Fit(context.Background(), req.Points.Data, req.Options(study.Settings{Limits: study.DefaultLimits}))
	if err != nil {
		return nil, req.Source().Problem(err)
	}
	resp := wire.NewFitResponse(r)
	if _, err := wire.Marshal(resp); err != nil {
		return nil, req.Source().Problem(err)
	}
	return resp, nil
}

func problemOf(t *testing.T, err error) *wire.Problem {
	t.Helper()
	var p *wire.Problem
	if !errors.As(err, &p) {
		t.Fatalf("want a *wire.Problem, got %T %v", err, err)
	}
	return p
}

func TestDecodeCSV(t *testing.T) {
	d, err := wire.DecodeCSV(strings.NewReader("\xef\xbb\xbf# a comment\nID,X,Y,Sx,SY\nA,1,2,0.1,0.2\nB,2,4.1,0.1,0.2\n# between\nC,3,5.9,0.1,0.2\n"))
	if err != nil {
		t.Fatal(err)
	}
	if d.Len() != 3 || d.X[2] != 3 || d.SY[1] != 0.2 || d.ID[0] != "A" || d.R != nil {
		t.Fatalf("decoded %+v", d)
	}
	src := (&wire.FitRequest{Points: *d}).Source()
	if got := src.Locate(&study.Error{Field: "sx", Index: 2}); got != "row 6, column sx" {
		t.Errorf("locate = %q", got)
	}
}

func TestDecodeCSVErrors(t *testing.T) {
	cases := []struct {
		name, body, pointer string
	}{
		{"empty", "", "row 1"},
		{"unknown column", "x,y,sigma_x\n1,2,3\n", "row 1, column sigma_x"},
		{"duplicate column", "x,y,x\n1,2,3\n", "row 1, column x"},
		{"no y", "x,sx\n1,2\n", "row 1"},
		{"headerless", "1,2\n3,4\n", "row 1"},
		{"semicolon", "x;y\n1,5;2,5\n", "row 1"},
		{"ragged", "x,y\n1,2\n3\n", "row 3, column 1"},
		{"not a number", "x,y\n1,2\nabc,4\n", "row 3, column x"},
		{"decimal comma", "x,y\n1,2\n\"1,5\",4\n", "row 3, column x"},
		{"NaN", "x,y\n1,NaN\n", "row 2, column y"},
		{"Inf", "x,y\n-Inf,1\n", "row 2, column x"},
		{"overflow", "x,y\n1e999,1\n", "row 2, column x"},
		{"empty cell", "x,y,sx\n1,2,\n", "row 2, column sx"},
		{"r without sigma", "x,y,r\n1,2,0.1\n", "row 1, column r"},
		{"bad utf8 id", "x,y,id\n1,2,\xff\xfe\n", "row 2, column id"},
		{"bare quote", "x,y\n1,\"2\n", "row 2, column 6"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := wire.DecodeCSV(strings.NewReader(c.body))
			if err == nil {
				t.Fatal("no error")
			}
			p := problemOf(t, err)
			if p.Status != 400 || len(p.Errors) == 0 || p.Errors[0].Pointer != c.pointer {
				t.Errorf("status %d errors %+v, want pointer %q", p.Status, p.Errors, c.pointer)
			}
		})
	}
}

func TestDecodeFitJSONErrors(t *testing.T) {
	pts := `"points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]`
	cases := []struct {
		name, body, pointer string
	}{
		{"empty", ``, ""},
		{"array", `[]`, ""},
		{"string", `"x"`, ""},
		{"syntax", `{"points":`, ""},
		{"trailing", `{` + pts + `} {}`, ""},
		{"unknown top-level", `{` + pts + `,"sigma_x":1}`, "/sigma_x"},
		{"unknown in point", `{"points":[{"x":1,"y":2,"sigma_x":0.1}]}`, "/points/0/sigma_x"},
		{"unknown in bootstrap", `{` + pts + `,"bootstrap":{"resamples":200,"seeds":1}}`, "/bootstrap/seeds"},
		{"string number", `{"points":[{"x":1,"y":2},{"x":"3","y":2}]}`, "/points/1/x"},
		{"NaN string", `{"points":[{"x":1,"y":"NaN"}]}`, "/points/0/y"},
		{"NaN literal", `{"points":[{"x":1,"y":NaN}]}`, "/points/0/y"},
		{"Infinity literal", `{"points":[{"x":Infinity,"y":1}]}`, "/points/0/x"},
		{"overflow", `{"points":[{"x":1,"y":2},{"x":1e400,"y":2}]}`, "/points/1/x"},
		{"missing y", `{"points":[{"x":1}]}`, "/points/0/y"},
		{"null x", `{"points":[{"x":null,"y":1}]}`, "/points/0/x"},
		{"duplicate key", `{"points":[{"x":1,"x":2,"y":1}]}`, "/points/0/x"},
		{"point not object", `{"points":[1,2]}`, "/points/0"},
		{"points null", `{"points":null}`, "/points"},
		{"points object", `{"points":{"x":1}}`, "/points"},
		{"sx on some points", `{"points":[{"x":1,"y":2,"sx":0.1},{"x":2,"y":3}]}`, "/points/1/sx"},
		{"confidence string", `{` + pts + `,"confidence":"high"}`, "/confidence"},
		{"lambda overflow", `{` + pts + `,"lambda":1e999}`, "/lambda"},
		{"resamples fraction", `{` + pts + `,"bootstrap":{"resamples":2.5}}`, "/bootstrap/resamples"},
		{"seed negative", `{` + pts + `,"bootstrap":{"resamples":200,"seed":-1}}`, "/bootstrap/seed"},
		{"methods not array", `{` + pts + `,"methods":"york"}`, "/methods"},
		{"deep nesting", `{` + pts + `,"at":` + strings.Repeat("[", 20000) + strings.Repeat("]", 20000) + `}`, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := wire.DecodeFitJSON(strings.NewReader(c.body))
			if err == nil {
				t.Fatal("no error")
			}
			p := problemOf(t, err)
			if p.Status != 400 || len(p.Errors) == 0 {
				t.Fatalf("status %d errors %+v", p.Status, p.Errors)
			}
			if c.pointer != "" || c.name == "empty" {
				if p.Errors[0].Pointer != c.pointer {
					t.Errorf("pointer %q (%s), want %q", p.Errors[0].Pointer, p.Errors[0].Detail, c.pointer)
				}
			}
		})
	}
}

func TestValidateAndFitErrors(t *testing.T) {
	ok := `{"x":1,"y":2,"sx":0.1,"sy":0.1},{"x":2,"y":3.1,"sx":0.1,"sy":0.1},{"x":3,"y":3.9,"sx":0.1,"sy":0.1},{"x":4,"y":5.2,"sx":0.1,"sy":0.1}`
	cases := []struct {
		name, body string
		status     int
		pointer    string
	}{
		{"no points", `{}`, 400, "/points"},
		{"negative sx", `{"points":[` + ok + `,{"x":5,"y":6,"sx":-1,"sy":0.1}]}`, 400, "/points/4/sx"},
		{"r = 1", `{"points":[{"x":1,"y":2,"sx":0.1,"sy":0.1,"r":1},{"x":2,"y":3.1,"sx":0.1,"sy":0.1,"r":0},{"x":3,"y":3.9,"sx":0.1,"sy":0.1,"r":0}]}`, 400, "/points/0/r"},
		{"unknown method", `{"points":[` + ok + `],"methods":["ols","passing"]}`, 400, "/methods/1"},
		{"duplicate method", `{"points":[` + ok + `],"methods":["ols","ols"]}`, 400, "/methods/1"},
		{"lambda zero", `{"points":[` + ok + `],"lambda":0}`, 400, "/lambda"},
		{"lambda negative", `{"points":[` + ok + `],"lambda":-2}`, 400, "/lambda"},
		{"confidence 1", `{"points":[` + ok + `],"confidence":1}`, 400, "/confidence"},
		{"confidence 0", `{"points":[` + ok + `],"confidence":0}`, 400, "/confidence"},
		{"resamples huge", `{"points":[` + ok + `],"bootstrap":{"resamples":100000000}}`, 400, "/bootstrap/resamples"},
		{"resamples few", `{"points":[` + ok + `],"bootstrap":{"resamples":10}}`, 400, "/bootstrap/resamples"},
		{"scheme", `{"points":[` + ok + `],"bootstrap":{"resamples":200,"scheme":"wild"}}`, 400, "/bootstrap/scheme"},
		{"parametric without sigma", `{"points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}],"bootstrap":{"resamples":200,"scheme":"parametric"}}`, 400, "/bootstrap/scheme"},
		{"two points", `{"points":[{"x":1,"y":2},{"x":2,"y":3}]}`, 422, "/points"},
		{"constant x", `{"points":[{"x":1,"y":2},{"x":1,"y":3},{"x":1,"y":5}]}`, 422, "/points"},
		{"york without sigma", `{"points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}],"methods":["york"]}`, 422, "/methods/0"},
		{"york zero sigmas", `{"points":[{"x":1,"y":2,"sx":0,"sy":0},{"x":2,"y":3.1,"sx":0.1,"sy":0.1},{"x":3,"y":3.9,"sx":0.1,"sy":0.1}],"methods":["york"]}`, 422, "/points/0/sy"},
		{"weighted deming at zero", `{"points":[{"x":0,"y":2},{"x":2,"y":3},{"x":3,"y":5}],"methods":["weighted_deming"]}`, 422, "/points/0/x"},
		{"uncorrelated deming", `{"points":[{"x":1,"y":1},{"x":2,"y":0},{"x":3,"y":1}],"methods":["deming"]}`, 422, "/points"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			req, err := wire.DecodeFitJSON(strings.NewReader(c.body))
			if err != nil {
				t.Fatal(err)
			}
			_, err = runFit(req)
			if err == nil {
				t.Fatal("no error")
			}
			p := problemOf(t, err)
			if p.Status != c.status || len(p.Errors) == 0 || p.Errors[0].Pointer != c.pointer {
				t.Errorf("status %d errors %+v, want %d at %q", p.Status, p.Errors, c.status, c.pointer)
			}
		})
	}
}

func TestOddButValid(t *testing.T) {
	cases := []struct{ name, body string }{
		{"three points", `{"points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]}`},
		{"perfect line", `{"points":[{"x":1,"y":2},{"x":2,"y":4},{"x":3,"y":6},{"x":4,"y":8}]}`},
		{"sx zero", `{"points":[{"x":1,"y":2,"sx":0,"sy":0.1},{"x":2,"y":3.1,"sx":0,"sy":0.1},{"x":3,"y":3.9,"sx":0,"sy":0.1},{"x":4,"y":5.2,"sx":0,"sy":0.2}],"methods":["york","ols"]}`},
		{"duplicate ids", `{"points":[{"x":1,"y":2,"id":"a"},{"x":2,"y":3,"id":"a"},{"x":3,"y":5,"id":7}]}`},
		{"huge values", `{"points":[{"x":1e300,"y":2e300},{"x":2e300,"y":3e300},{"x":3e300,"y":5e300}],"methods":["ols"]}`},
		{"tiny values", `{"points":[{"x":1e-300,"y":2e-300},{"x":2e-300,"y":3e-300},{"x":3e-300,"y":5e-300}],"methods":["ols","deming"]}`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			req, err := wire.DecodeFitJSON(strings.NewReader(c.body))
			if err != nil {
				t.Fatal(err)
			}
			resp, err := runFit(req)
			if err != nil {
				var p *wire.Problem
				// Values near the double limits may be refused, but only
				// as unfittable data with a pointer, never a NaN.
				if errors.As(err, &p) && p.Status == 422 && p.Errors[0].Pointer == "/points" &&
					(strings.HasPrefix(c.name, "huge") || strings.HasPrefix(c.name, "tiny")) {
					return
				}
				t.Fatal(err)
			}
			if _, err := wire.Marshal(resp); err != nil {
				t.Fatal(err)
			}
		})
	}
}

func TestQueryParameters(t *testing.T) {
	d, err := wire.DecodeCSV(strings.NewReader("x,y\n1,2\n2,3\n3,5\n"))
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ q, pointer string }{
		{"lambda=abc", "query parameter lambda"},
		{"confidence=NaN", "query parameter confidence"},
		{"resamples=many", "query parameter resamples"},
		{"seed=-3", "query parameter seed"},
		{"at=1,x", "query parameter at"},
		{"method=york", "query parameter method"},
	} {
		q, _ := url.ParseQuery(c.q)
		_, err := wire.FitRequestFromQuery(q, d)
		p := problemOf(t, err)
		if p.Errors[0].Pointer != c.pointer {
			t.Errorf("%s: pointer %q", c.q, p.Errors[0].Pointer)
		}
	}
}
