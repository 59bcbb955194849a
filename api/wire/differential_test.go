package wire

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"testing"
)

// The fast decoders are checked against the standard library on the same
// input: the plain CSV scan against encoding/csv, the one-pass JSON
// decoder against encoding/json.

// csvDialects are the dialects FuzzCSVDifferential reads a body in: a
// body led by the bytes 0, d is read in dialect d (others in eivfit's own).
var csvDialects = []*CSVOptions{nil,
	{Delimiter: "semicolon"}, {Delimiter: "semicolon", Decimal: "comma"}, {Delimiter: "tab", Decimal: "comma"},
	{Delimiter: "semicolon", Decimal: "comma", Missing: "skip", UnitsRow: true},
	{Delimiter: "tab", Missing: "skip", ExtraColumns: "ignore", Columns: []ColumnMap{{"x", "Ref"}, {"y", "Cand"}}}}

// FuzzCSVDifferential: the plain-CSV fast path and the encoding/csv path
// must accept and refuse the same bodies, decode identical numbers, skip
// the same rows, and name the same place for a fault in a cell, in every
// dialect.
func FuzzCSVDifferential(f *testing.F) {
	for _, s := range []string{"x,y\n1,2\n2,3\n", "x,y,sx,sy,r,id,order\n1,2,0.1,0.2,0,a,1\n", "x,y\n1,0x1p3\n",
		"x,y\n1,1_000\n", "x,y\n1,NaN\n", "x,y\n1,\n", "# c\nX, Y\n 1, 2\n", "x,y\n1,2,3\n", "x,y\r\n1,2\r\n", "x,y\n.5,5.\n"} {
		f.Add([]byte(s))
	}
	for i, s := range []string{"x;y\n1;2\n", "x;y\n1,5;2,25\n3;4\n", "x\ty\n1,5\t2\n", "x (mg);y [mg]\nmg;mg\n1,5;NA\n2;<0,5\n3;4\n",
		"Ref (mmol/L)\tCand\tnote\n1.5\t\tz\n2\t3\tq\n"} {
		f.Add(append([]byte{0, byte(i + 1)}, s...))
	}
	f.Fuzz(func(t *testing.T, body []byte) {
		o := csvDialects[0]
		if len(body) >= 2 && body[0] == 0 { // a body led by 0, d is read in dialect d
			o, body = csvDialects[int(body[1])%len(csvDialects)], body[2:]
		}
		if bytes.IndexByte(body, '"') >= 0 || bytes.IndexByte(body, '\r') >= 0 || !utfLines(body) {
			return // quotes take the general path anyway; encoding/csv folds \r\n and bare \r
		}
		fast, ferr := decodeCSVPlain(body, 0, o)
		std, serr := decodeCSVReader(body, 0, o)
		if (ferr == nil) != (serr == nil) {
			t.Fatalf("fast: %v; encoding/csv: %v", ferr, serr)
		}
		if ferr != nil {
			var fp, sp *Problem
			if errors.As(ferr, &fp) && errors.As(serr, &sp) && strings.Contains(fp.Errors[0].Pointer, "column") &&
				strings.Contains(sp.Errors[0].Pointer, "column") && !strings.HasSuffix(sp.Errors[0].Pointer, "column 1") &&
				fp.Errors[0].Pointer != sp.Errors[0].Pointer {
				t.Fatalf("fast names %q, encoding/csv %q", fp.Errors[0].Pointer, sp.Errors[0].Pointer)
			}
			return
		}
		for _, c := range [][2][]float64{{fast.X, std.X}, {fast.Y, std.Y}, {fast.SX, std.SX}, {fast.SY, std.SY}, {fast.R, std.R}, {fast.Order, std.Order}} {
			if !sameBits(c[0], c[1]) {
				t.Fatalf("columns differ: %v and %v", c[0], c[1])
			}
		}
		if fi, si := fmt.Sprint(fast.Input()), fmt.Sprint(std.Input()); fi != si || fast.xUnit != std.xUnit || fast.yUnit != std.yUnit {
			t.Fatalf("input notes differ: %s / %s", fi, si)
		}
	})
}

// utfLines excludes what encoding/csv treats differently by design of its
// trimming: a field of spaces only before a comma at the end of a line.
func utfLines(b []byte) bool { return !bytes.Contains(b, []byte("\x00")) }

func sameBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// plainPoint is the points of a fit request as encoding/json decodes them.
type plainPoint struct {
	X, Y  *float64
	SX    *float64 `json:"sx"`
	SY    *float64 `json:"sy"`
	R     *float64 `json:"r"`
	Order *float64 `json:"order"`
	ID    any      `json:"id"`
}

type plainRequest struct {
	Points     []plainPoint      `json:"points"`
	Methods    []string          `json:"methods"`
	Lambda     *float64          `json:"lambda"`
	Confidence *float64          `json:"confidence"`
	Bootstrap  *BootstrapOptions `json:"bootstrap"`
	At         []float64         `json:"at"`
}

// FuzzFitJSONDifferential: a body the fast decoder accepts is accepted by
// encoding/json with the same numbers; a body encoding/json finds
// malformed is refused, and the syntax error is reported at encoding/json's
// offset of the body as sent. The fast decoder is stricter by design:
// repeated keys, keys in another case, and a column given at some points
// only are refused.
func FuzzFitJSONDifferential(f *testing.F) {
	for _, s := range []string{`{"points":[{"x":1,"y":2},{"x":2,"y":3}]}`, `{"POINTS":[{"x":1,"y":2}]}`,
		`{"points":[{"x":1,"y":2,"sx":0.1,"sy":0.1}],"at":[1,]}`, `{"points":[{"x":NaN,"y":1}]}`,
		`{"points":[{"x":1e400,"y":1}]}`, `{"lambda":2,"points":[]}`, `{"points":[{"x":-0,"y":1.5e-7,"id":"a"}],"methods":["ols"]}`} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, body []byte) {
		req, ferr := DecodeFitJSON(bytes.NewReader(body))
		var std plainRequest
		dec := json.NewDecoder(bytes.NewReader(body))
		dec.DisallowUnknownFields()
		serr := dec.Decode(&std)
		if serr == nil {
			if _, err := dec.Token(); err == nil || !errors.Is(err, errEOF) {
				serr = errors.New("trailing data")
			}
		}
		var syn *json.SyntaxError
		if errors.As(serr, &syn) {
			if ferr == nil {
				t.Fatalf("accepted a body encoding/json finds malformed: %v", serr)
			}
			var p *Problem
			if errors.As(ferr, &p) && strings.Contains(p.Detail, "not valid JSON at byte") &&
				!strings.Contains(p.Detail, "at byte "+itoa(syn.Offset)+" ") {
				t.Fatalf("syntax error at byte %d, reported %q", syn.Offset, p.Detail)
			}
			return
		}
		if ferr != nil {
			return
		}
		if serr != nil {
			t.Fatalf("accepted what encoding/json refuses (%v)", serr)
		}
		if len(std.Points) != req.Points.Len() {
			t.Fatalf("%d points, encoding/json %d", req.Points.Len(), len(std.Points))
		}
		for i, p := range std.Points {
			for _, c := range []struct {
				v   *float64
				col []float64
			}{{p.X, req.Points.X}, {p.Y, req.Points.Y}, {p.SX, req.Points.SX}, {p.SY, req.Points.SY}, {p.R, req.Points.R}, {p.Order, req.Points.Order}} {
				if c.v != nil && math.Float64bits(*c.v) != math.Float64bits(c.col[i]) {
					t.Fatalf("point %d: %v, encoding/json %v", i, c.col[i], *c.v)
				}
			}
		}
		if !sameBits(req.At, std.At) {
			t.Fatalf("at %v, encoding/json %v", req.At, std.At)
		}
	})
}

var errEOF = func() error { _, err := json.NewDecoder(strings.NewReader("")).Token(); return err }()

func itoa(v int64) string { return strconv.FormatInt(v, 10) }
