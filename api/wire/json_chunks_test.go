package wire

import (
	"encoding/json"
	"fmt"
	"math"
	"strings"
	"testing"
)

// readPoints reads a points array in one pass (chunks nil) or in chunks
// of plan, returning what a caller sees: the columns, the error as sent,
// and where reading stopped.
func readPoints(body []byte, lim Limits, plan *chunkPlan) (d Dataset, problem string, pos int) {
	p := pointParser{b: body, d: &d, lim: lim, chunk: chunkPlan{procs: 1}}
	if plan != nil {
		p.chunk = *plan
	}
	if err := p.parse(); err != nil {
		j, _ := json.Marshal(err)
		return Dataset{}, fmt.Sprintf("%T %v %s", err, err, j), p.pos
	}
	return d, "", p.pos
}

// samePoints compares two datasets bit for bit, telling a nil column from
// an empty one.
func samePoints(a, b Dataset) string {
	for _, c := range []struct {
		name string
		a, b []float64
	}{{"x", a.X, b.X}, {"y", a.Y, b.Y}, {"sx", a.SX, b.SX}, {"sy", a.SY, b.SY}, {"r", a.R, b.R}, {"order", a.Order, b.Order}} {
		if (c.a == nil) != (c.b == nil) || len(c.a) != len(c.b) {
			return fmt.Sprintf("%s: %d values (nil %v), %d (nil %v)", c.name, len(c.a), c.a == nil, len(c.b), c.b == nil)
		}
		for i := range c.a {
			if math.Float64bits(c.a[i]) != math.Float64bits(c.b[i]) {
				return fmt.Sprintf("%s[%d]: %v, %v", c.name, i, c.a[i], c.b[i])
			}
		}
	}
	if (a.ID == nil) != (b.ID == nil) || strings.Join(a.ID, "\x00") != strings.Join(b.ID, "\x00") {
		return fmt.Sprintf("ids %q, %q", a.ID, b.ID)
	}
	return ""
}

// maxPoints is a limit of n points per dataset and nothing else.
func maxPoints(n int) Limits {
	var l Limits
	l.MaxPoints = n
	return l
}

// pointsText writes n points, each made by f(i).
func pointsText(n int, f func(i int) string) string {
	parts := make([]string, n)
	for i := range parts {
		parts[i] = f(i)
	}
	return "[" + strings.Join(parts, ",") + "]"
}

// TestPointsChunked: reading a points array in chunks gives the columns,
// the error and the end position of one pass, for arrays that cut well and
// for those whose guessed cuts fall inside strings, whose optional columns
// start late or stop early, and whose faults lie in a late chunk. The
// expected result is the one-pass reading of the same bytes (the decoder
// this repository had before chunking, which decode_test.go and the
// differential fuzz targets check against encoding/json).
func TestPointsChunked(t *testing.T) {
	xy := func(i int) string { return fmt.Sprintf(`{"x":%d.5,"y":%d}`, i, 2*i) }
	full := func(i int) string {
		return fmt.Sprintf(`{"x":%d,"y":%d.25,"sx":0.%d,"sy":1e-%d,"r":0.1,"order":%d,"id":"p%d"}`, i, i, i+1, i%9+1, i, i)
	}
	tests := []struct {
		name string
		body string
		lim  Limits
		ok   bool // the one-pass reading accepts it (guards the table itself)
		// cut: the chunks are read as such (not again in one pass) when
		// the array is cut at all
		cut bool
	}{
		{"xy", pointsText(300, xy), Limits{}, true, true},
		{"all columns", pointsText(300, full), Limits{}, true, true},
		{"spaces", " " + strings.ReplaceAll(pointsText(200, xy), ",", " ,\n\t ") + "\r\n", Limits{}, true, true},
		{"ids holding cuts", pointsText(300, func(i int) string { return fmt.Sprintf(`{"x":%d,"y":1,"id":",{\"x\":1,\"y\":2},{"}`, i) }), Limits{}, true, false},
		{"braces in ids", pointsText(300, func(i int) string { return fmt.Sprintf(`{"x":%d,"y":1,"id":"{{{{%d"}`, i, i) }), Limits{}, true, true},
		{"sx from point 250", pointsText(300, func(i int) string {
			if i >= 250 {
				return fmt.Sprintf(`{"x":%d,"y":1,"sx":0.5}`, i)
			}
			return xy(i)
		}), Limits{}, false, true},
		{"sx missing at 170", pointsText(300, func(i int) string {
			if i == 170 {
				return xy(i)
			}
			return fmt.Sprintf(`{"x":%d,"y":1,"sx":0.5,"sy":0.5}`, i)
		}), Limits{}, false, true},
		{"sx null at 280", pointsText(300, func(i int) string {
			if i == 280 {
				return `{"x":1,"y":1,"sx":null}`
			}
			return fmt.Sprintf(`{"x":%d,"y":1,"sx":0.5}`, i)
		}), Limits{}, false, true},
		{"ids from point 299", pointsText(300, func(i int) string {
			if i == 299 {
				return `{"x":1,"y":1,"id":"last"}`
			}
			return xy(i)
		}), Limits{}, true, true},
		{"r without sy", pointsText(300, func(i int) string { return fmt.Sprintf(`{"x":%d,"y":1,"sx":1,"r":0}`, i) }), Limits{}, false, true},
		{"bad number late", pointsText(300, func(i int) string {
			if i == 290 {
				return `{"x":1e999,"y":1}`
			}
			return xy(i)
		}), Limits{}, false, false},
		{"syntax late", strings.Replace(pointsText(300, xy), `{"x":280.5`, `{"x":280.5,`, 1), Limits{}, false, false},
		{"two faults", strings.Replace(strings.Replace(pointsText(300, xy), `"x":20.5`, `"x":"a"`, 1), `"y":500`, `"y":nul`, 1), Limits{}, false, false},
		{"unclosed", strings.TrimSuffix(pointsText(300, xy), "]"), Limits{}, false, false},
		{"trailing comma", strings.TrimSuffix(pointsText(300, xy), "]") + ",]", Limits{}, false, false},
		{"at the limit", pointsText(300, xy), maxPoints(300), true, true},
		{"past the limit", pointsText(301, xy), maxPoints(300), false, false},
		{"braces past the limit", pointsText(200, func(i int) string { return fmt.Sprintf(`{"x":%d,"y":1,"id":"{{"}`, i) }), maxPoints(250), true, false},
		{"then more", pointsText(300, xy) + `,"methods":["york"]}`, Limits{}, true, true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			want, wantErr, wantPos := readPoints([]byte(tc.body), tc.lim, nil)
			if (wantErr == "") != tc.ok {
				t.Fatalf("one pass: %q, want ok %v", wantErr, tc.ok)
			}
			for _, plan := range []chunkPlan{{size: 64, parts: 7, procs: 2}, {size: 500, parts: 3, procs: 3}, {size: 1, parts: 64, procs: 4}} {
				if tc.cut {
					var d Dataset
					p := pointParser{b: []byte(tc.body), d: &d, lim: tc.lim, chunk: plan}
					p.pos = strings.IndexByte(tc.body, '{')
					if done, _ := p.parseChunks(); !done {
						t.Fatalf("%+v: read again in one pass", plan)
					}
				}
				got, gotErr, gotPos := readPoints([]byte(tc.body), tc.lim, &plan)
				if gotErr != wantErr {
					t.Fatalf("%+v: error\n%s\none pass:\n%s", plan, gotErr, wantErr)
				}
				if d := samePoints(got, want); d != "" || gotPos != wantPos {
					t.Fatalf("%+v: %s; stopped at %d, one pass at %d", plan, d, gotPos, wantPos)
				}
			}
		})
	}
}

// FuzzPointsChunked: any bytes read as a points array in chunks give what
// one pass gives (columns bit for bit, the error as sent, the end).
func FuzzPointsChunked(f *testing.F) {
	f.Add([]byte(`[{"x":1,"y":2},{"x":2,"y":3,"id":",{"},{"x":3,"y":4}]`), uint8(8), uint8(4))
	f.Add([]byte(`[{"x":1,"y":2,"sx":1},{"x":2,"y":3},{"x":3,"y":4,"sx":2,"r":0}]`), uint8(5), uint8(3))
	f.Add([]byte(`[{"x":1,"y":2,"id":"{"} , {"x":2,"y":3,"order":1}]`), uint8(3), uint8(9))
	f.Fuzz(func(t *testing.T, body []byte, size, parts uint8) {
		want, wantErr, wantPos := readPoints(body, maxPoints(50), nil)
		plan := chunkPlan{size: int(size%64) + 1, parts: int(parts%16) + 2, procs: 3}
		got, gotErr, gotPos := readPoints(body, maxPoints(50), &plan)
		if gotErr != wantErr {
			t.Fatalf("error\n%s\none pass:\n%s", gotErr, wantErr)
		}
		if d := samePoints(got, want); d != "" || gotPos != wantPos {
			t.Fatalf("%s; stopped at %d, one pass at %d", d, gotPos, wantPos)
		}
	})
}
