package wire

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"strconv"
	"testing"
)

// chunkSizes are the chunk sizes the parallel row reader is held to the
// row-by-row reader with: one byte (every line its own chunk), sizes that
// cut rows at every offset, and the default.
var chunkSizes = []int{1, 2, 3, 5, 7, 11, 16, 31, 64, 200, 0}

// sameDecode says how the chunked read of body differs from the
// row-by-row read ("" when it does not): the same problem, or the same
// columns bit for bit, rows, notes and units.
func sameDecode(body []byte, maxRows int, o *CSVOptions, chunk int) string {
	want, werr := decodeCSVChunked(body, maxRows, o, -1)
	got, gerr := decodeCSVChunked(body, maxRows, o, chunk)
	return sameDataset(want, werr, got, gerr, fmt.Sprintf("chunks of %d", chunk))
}

// sameDataset says how got (read by the way named how) differs from want
// ("" when it does not): the same problem, or the same columns bit for
// bit, rows, notes and units.
func sameDataset(want *Dataset, werr error, got *Dataset, gerr error, how string) string {
	if werr != nil || gerr != nil {
		if fmt.Sprintf("%#v", werr) != fmt.Sprintf("%#v", gerr) {
			return fmt.Sprintf("row by row: %v; %s: %v", werr, how, gerr)
		}
		return ""
	}
	for _, c := range [][2][]float64{{want.X, got.X}, {want.Y, got.Y}, {want.SX, got.SX}, {want.SY, got.SY}, {want.R, got.R}, {want.Order, got.Order}} {
		if !sameBits(c[0], c[1]) || (c[0] == nil) != (c[1] == nil) {
			return fmt.Sprintf("%s: columns differ: %v and %v", how, c[0], c[1])
		}
	}
	if pointRows(want) != pointRows(got) || fmt.Sprint(want.Input()) != fmt.Sprint(got.Input()) ||
		want.xUnit != got.xUnit || want.yUnit != got.yUnit || want.csv != got.csv {
		return fmt.Sprintf("%s: rows or notes differ: %s %v / %s %v", how, pointRows(want), want.Input(), pointRows(got), got.Input())
	}
	return ""
}

// pointRows names the row of every point, and of the points just outside
// the dataset, as an error would.
func pointRows(d *Dataset) string {
	src := d.source(nil)
	var b bytes.Buffer
	for i := -1; i <= d.Len(); i++ {
		fmt.Fprintf(&b, "%s; ", src.point(i, "x"))
	}
	return b.String()
}

// tookChunks says whether the chunk reader, not the row-by-row reader,
// read body's rows (so that a differential case is not vacuous).
func tookChunks(body []byte, o *CSVOptions, chunk, maxRows int) bool {
	rs := newRecords(bytes.TrimPrefix(body, []byte("\xef\xbb\xbf")), o)
	rs.std, rs.chunk = nil, chunk
	fields, line, err := rs.next()
	if err != nil {
		return false
	}
	lay, err := readHeader(fields, line, o, func(k string) int { return indexOf(csvColumns, k) }, fitRoleIndex, "")
	if err != nil {
		return false
	}
	var seen [7]bool
	for _, r := range lay.roles {
		if r >= 0 {
			seen[r] = true
		}
	}
	return chunkFitRows(rs, lay, seen, maxRows, o) != nil
}

// TestCSVChunksMatchRowByRow: valid and broken bodies, read in chunks cut
// at every size of chunkSizes, answer exactly as row by row: the same
// numbers, rows and notes, or the same problem naming the same (first)
// row and column, even when a later chunk fails first.
func TestCSVChunksMatchRowByRow(t *testing.T) {
	cases := []struct {
		name   string
		body   string
		o      *CSVOptions
		max    int
		chunks bool // the chunk reader reads it (valid, plain)
	}{
		{name: "plain", body: "x,y\n1,2\n2,3\n3,5\n", chunks: true},
		{name: "no final newline", body: "x,y,sx,sy\n1,2,0.1,0.2\n2,3,0.1,0.2", chunks: true},
		{name: "comments and blank lines", body: "# a\nx,y\n\n1,2\n# b\n2,3\n\r\n\n3,4\n#", chunks: true},
		{name: "spaces and CRLF", body: "x , y\r\n 1 ,\t2 \r\n3,4\r\n", chunks: true},
		{name: "all numeric columns", body: "order,r,sy,sx,y,x\n1,0.5,1,1,2,3\n2,-0.25,1,2,3,4\n", chunks: true},
		{name: "semicolons", body: "x;y\n1.5;2\n2;3e-5\n", o: &CSVOptions{Delimiter: "semicolon"}, chunks: true},
		{name: "tabs", body: "x\ty\n1\t 2\n2\t3\n", o: &CSVOptions{Delimiter: "tab"}, chunks: true},
		{name: "long and tiny numbers", body: "x,y\n0.30000000000000004,1e-300\n-12345678901234567890,1.7976931348623157e308\n", chunks: true},
		{name: "bad cell late", body: "x,y\n1,2\n2,3\n3,4\n4,abc\n5,6\n6,x\n"},
		{name: "two faults, first wins", body: "x,y\n1,2\n2,zz\n3,4\n4,5\n5,6\n6,7\n7,8\n8,9\n9,,\n"},
		{name: "missing cells", body: "x,y\n1,\n2,3\n,4\n"},
		{name: "missing cell plain", body: "x,y\n1,2\n2,\n"},
		{name: "field count", body: "x,y\n1,2\n2,3,4\n"},
		{name: "too few fields", body: "x,y\n1,2\n2\n"},
		{name: "overflow", body: "x,y\n1,2\n1e400,3\n"},
		{name: "underflow", body: "x,y\n1,2\n1e-400,3\n"},
		{name: "plus sign", body: "x,y\n1,2\n+1,3\n"},
		{name: "units row unasked", body: "x,y\nmg,mg\n1,2\n"},
		{name: "unicode space", body: "x,y\n1,2\n\u00a03,4\n"},
		{name: "space-only line", body: "x,y\n1,2\n   \n3,4\n"},
		{name: "indented comment", body: "x,y\n1,2\n #c\n3,4\n"},
		{name: "lone CRs", body: "x,y\n1,2\n\r\r\n3,4\n"},
		{name: "header only", body: "x,y\n"},
		{name: "header and comments", body: "x,y\n#a\n\n"},
		{name: "too many rows", body: "x,y\n1,2\n2,3\n3,4\n4,5\n", max: 3},
		{name: "rows at the limit", body: "x,y\n1,2\n2,3\n#\n3,4\n", max: 3, chunks: true},
		{name: "comments past the limit", body: "x,y\n1,2\n#\n#\n2,3\n", max: 2, chunks: true},
		{name: "rows past the limit among comments", body: "x,y\n1,2\n#\n#\n2,3\n3,4\n", max: 2},
		{name: "id column", body: "x,y,id\n1,2,a\n2,3,b\n"},
		{name: "r without sx", body: "x,y,r\n1,2,0.5\n2,3,0.5\n"},
		{name: "quote in a comment", body: "x,y\n# \"q\n1,2\n"},
		{name: "decimal comma", body: "x;y\n1,5;2\n2;3\n", o: &CSVOptions{Delimiter: "semicolon", Decimal: "comma"}},
		{name: "skip", body: "x,y\n1,2\nNA,3\n3,4\n", o: &CSVOptions{Missing: "skip"}},
		{name: "NUL", body: "x,y\n1,2\n3\x00,4\n"},
		{name: "hex", body: "x,y\n1,2\n0x10,4\n"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			for _, k := range chunkSizes {
				if d := sameDecode([]byte(c.body), c.max, c.o, k); d != "" {
					t.Fatal(d)
				}
			}
			if c.chunks && !tookChunks([]byte(c.body), c.o, 3, c.max) {
				t.Fatal("the chunk reader did not read this valid body")
			}
		})
	}
}

// TestCSVChunksRandomBodies: seeded random bodies of 1 to 400 rows, valid
// or with one to three faults (a bad or empty cell, a missing or extra
// field, a comment, a blank or CR line, a byte outside the grammar) at
// random rows, agree at every chunk size.
func TestCSVChunksRandomBodies(t *testing.T) {
	r := rand.New(rand.NewPCG(20, 2))
	faults := []string{"abc", "", "1,2,3,4,5", "1", "# note", "\r", " ", "+1", "1e999", "NA", "1e", "\u00a01", "--1", "0x1"}
	valid := 0
	for iter := range 600 {
		var b bytes.Buffer
		b.WriteString("x,y,sx,sy\n")
		n := 1 + r.IntN(400)
		lines := make([]string, n)
		for i := range lines {
			f := func() string {
				v := r.NormFloat64() * 100
				return strconv.FormatFloat(v, "gef"[r.IntN(3)], r.IntN(18)-1, 64)
			}
			lines[i] = f() + "," + f() + "," + f() + "," + f()
		}
		if iter%3 != 0 {
			for range 1 + r.IntN(3) {
				i := r.IntN(n)
				fs := bytes.Split([]byte(lines[i]), []byte{','})
				fs[r.IntN(len(fs))] = []byte(faults[r.IntN(len(faults))])
				lines[i] = string(bytes.Join(fs, []byte{','}))
			}
		}
		for _, l := range lines {
			b.WriteString(l)
			b.WriteByte('\n')
		}
		body := b.Bytes()
		if _, err := decodeCSVChunked(body, 0, nil, -1); err == nil {
			valid++
			// A no-break space is trimmed by the row-by-row reader only.
			if !tookChunks(body, nil, 7, 0) && !bytes.Contains(body, []byte("\u00a0")) {
				t.Fatalf("case %d: the chunk reader did not read a valid body: %q", iter, Truncate(string(body)))
			}
		}
		for _, k := range chunkSizes {
			if d := sameDecode(body, 0, nil, k); d != "" {
				t.Fatalf("case %d: %s", iter, d)
			}
		}
	}
	if valid < 150 {
		t.Fatalf("only %d of 600 bodies valid: the valid path is not exercised", valid)
	}
}

// FuzzCSVChunks: any body, in any dialect, reads the same in chunks of
// 1, 3 and 17 bytes and row by row, and streamed in blocks of 1, 2, 3, 17
// and 4096 bytes (length declared or not) and as a file in chunks of 1, 3,
// 17 and 4096 bytes as read whole.
func FuzzCSVChunks(f *testing.F) {
	for _, s := range []string{"x,y\n1,2\n2,3\n", "x,y,sx,sy,r,order\n1,2,0.1,0.2,0,1\n2,3,1,1,0.5,2\n", "# c\nx,y\n\n1,2\r\n#\n3,4",
		"x,y\n1,2\n2,a\n3,\n", "x,y\n1, 2\n2 ,3\n", "x,y\n1,2\n\"3\",4\n", "\xef\xbb\xbfx,y\r\n1,2\r\n"} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, body []byte) {
		o := csvDialects[0]
		if len(body) >= 2 && body[0] == 0 {
			o, body = csvDialects[int(body[1])%len(csvDialects)], body[2:]
		}
		for _, k := range []int{1, 3, 17} {
			if d := sameDecode(body, 0, o, k); d != "" {
				t.Fatal(d)
			}
		}
		if d, _ := sameStream(body, 0, o, []int{1, 2, 3, 17, 4096}); d != "" {
			t.Fatal(d)
		}
		if d, _ := sameFile(body, 0, o, []int{1, 3, 17, 4096}); d != "" {
			t.Fatal(d)
		}
	})
}

// TestCSVChunksConsecutiveRows: rows on consecutive lines keep no list of
// lines (8 bytes a point less); a comment between rows makes one.
func TestCSVChunksConsecutiveRows(t *testing.T) {
	for _, c := range []struct {
		name  string
		body  string
		list  bool
		first int
	}{
		{"consecutive", "x,y\n1,2\n2,3\n3,4\n", false, 2},
		{"comment before", "# a\n\nx,y\n#b\n1,2\n2,3\n", false, 5},
		{"blank line after", "x,y\n1,2\n2,3\n\n\n", false, 2},
		{"comment between", "x,y\n1,2\n#\n2,3\n", true, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			d, err := decodeCSVChunked([]byte(c.body), 0, nil, 0)
			if err != nil {
				t.Fatal(err)
			}
			if (d.rows != nil) != c.list || d.firstRow != c.first {
				t.Fatalf("rows %v, first row %d; want a list %v, first row %d", d.rows, d.firstRow, c.list, c.first)
			}
		})
	}
}

// TestHasQuote: a quote anywhere in a large body (at either side of a
// part's edge, first, last) is found, and none is found where there is none.
func TestHasQuote(t *testing.T) {
	n := 3*csvChunkBytes + 12345
	for _, at := range []int{-1, 0, 1, csvChunkBytes - 1, csvChunkBytes, 2*csvChunkBytes + 7, n - 1} {
		b := bytes.Repeat([]byte("1,2\n"), n/4+1)[:n]
		if at >= 0 {
			b[at] = '"'
		}
		if got := hasQuote(b); got != (at >= 0) {
			t.Errorf("quote at %d: hasQuote %v", at, got)
		}
		if got := hasQuote(b[:1000]); got != (at >= 0 && at < 1000) {
			t.Errorf("quote at %d, first 1000 bytes: hasQuote %v", at, got)
		}
	}
}
