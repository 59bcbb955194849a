package wire

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
)

// streamDecode reads body through a CSVStream in blocks of the sizes
// next gives (the last block may be shorter), declaring the body's
// length or not, and returns the dataset or problem and whether the rows
// were streamed to the end (not kept for the row-by-row reader).
func streamDecode(body []byte, maxRows int, o *CSVOptions, declared bool, next func() int) (*Dataset, error, bool) {
	lim := &Limits{}
	lim.MaxPoints = maxRows
	hint := int64(-1)
	if declared {
		hint = int64(len(body))
	}
	st := NewCSVStream(o, lim, hint)
	for i := 0; i < len(body); {
		k := min(max(next(), 1), len(body)-i)
		copy(st.Room(k), body[i:i+k])
		st.Got(k)
		i += k
	}
	d, err := st.Finish()
	return d, err, st.mode == inRows
}

// wholeDecode is the reference: the body read whole, as the server read
// every CSV before the stream (chunk reader, else row by row).
func wholeDecode(body []byte, maxRows int, o *CSVOptions) (*Dataset, error) {
	lim := &Limits{}
	lim.MaxPoints = maxRows
	return DecodeCSVWith(NewBody(bytes.Clone(body), lim), o)
}

// sameStream says how the stream read of body in blocks of every size
// from 1 to len(body)+1 bytes, declared or not, differs from the whole
// read ("" when none), and whether every block size streamed it.
func sameStream(body []byte, maxRows int, o *CSVOptions, sizes []int) (string, bool) {
	want, werr := wholeDecode(body, maxRows, o)
	streamed := true
	for _, k := range sizes {
		for _, declared := range []bool{true, false} {
			got, gerr, s := streamDecode(body, maxRows, o, declared, func() int { return k })
			streamed = streamed && s
			if d := sameDataset(want, werr, got, gerr, fmt.Sprintf("stream in blocks of %d (declared %v)", k, declared)); d != "" {
				return d, false
			}
		}
	}
	return "", streamed
}

func allSizes(n int) []int {
	s := make([]int, n+1)
	for i := range s {
		s[i] = i + 1
	}
	return s
}

// wholeBodyCases are the bodies the readers that do not hold the body
// whole (the stream, the file reader) are held to the whole read with:
// valid, faulty, quoted, in other dialects and at the row limit; streams
// marks the valid plain bodies they must read to the end themselves.
var wholeBodyCases = []struct {
	name    string
	body    string
	o       *CSVOptions
	max     int
	streams bool // the rows are streamed to the end (valid, plain)
}{
	{name: "plain", body: "x,y\n1,2\n2,3\n3,5\n", streams: true},
	{name: "no final newline", body: "x,y,sx,sy\n1,2,0.1,0.2\n2,3,0.1,0.2", streams: true},
	{name: "byte-order mark", body: "\xef\xbb\xbfx,y\n1,2\n2,3\n", streams: true},
	{name: "comments and blank lines", body: "# a\nx,y\n\n1,2\n# b\n2,3\n\r\n\n3,4\n#", streams: true},
	{name: "spaces and CRLF", body: "x , y\r\n 1 ,\t2 \r\n3,4\r\n", streams: true},
	{name: "final CR", body: "x,y\n1,2\n3,4\r", streams: true},
	{name: "all numeric columns", body: "order,r,sy,sx,y,x\n1,0.5,1,1,2,3\n2,-0.25,1,2,3,4\n", streams: true},
	{name: "semicolons", body: "x;y\n1.5;2\n2;3e-5\n", o: &CSVOptions{Delimiter: "semicolon"}, streams: true},
	{name: "tabs", body: "x\ty\n1\t 2\n2\t3\n", o: &CSVOptions{Delimiter: "tab"}, streams: true},
	{name: "long numbers", body: "x,y\n0.30000000000000004,1e-300\n-12345678901234567890,1.7976931348623157e308\n", streams: true},
	{name: "rows at the limit", body: "x,y\n1,2\n2,3\n#\n3,4\n", max: 3, streams: true},
	{name: "comments past the limit", body: "x,y\n1,2\n#\n#\n2,3\n#\n", max: 2, streams: true},
	{name: "too many rows", body: "x,y\n1,2\n2,3\n3,4\n4,5\n", max: 3},
	{name: "too many rows, bad cell after", body: "x,y\n1,2\n2,3\n3,4\nzz,5\n", max: 3},
	{name: "rows past the limit among comments", body: "x,y\n1,2\n#\n#\n2,3\n3,4\n", max: 2},
	{name: "bad cell late", body: "x,y\n1,2\n2,3\n3,4\n4,abc\n5,6\n6,x\n"},
	{name: "bad first row", body: "x,y\nmg,mg\n1,2\n"},
	{name: "two faults, first wins", body: "x,y\n1,2\n2,zz\n3,4\n9,,\n"},
	{name: "missing cells", body: "x,y\n1,2\n1,\n2,3\n,4\n"},
	{name: "field count", body: "x,y\n1,2\n2,3,4\n"},
	{name: "overflow", body: "x,y\n1,2\n1e400,3\n"},
	{name: "NUL", body: "x,y\n1,2\n3\x00,4\n"},
	{name: "header only", body: "x,y\n"},
	{name: "header and comments", body: "x,y\n#a\n\n"},
	{name: "empty", body: ""},
	{name: "comments only", body: "# a\n# b\n"},
	{name: "no x", body: "a,y\n1,2\n"},
	{name: "column twice", body: "x,y,x\n1,2,3\n"},
	{name: "id column", body: "x,y,id\n1,2,a\n2,3,b\n"},
	{name: "r without sx", body: "x,y,r\n1,2,0.5\n2,3,0.5\n"},
	{name: "quote in the header", body: "\"x\",y\n1,2\n2,3\n"},
	{name: "quote in a later comment", body: "x,y\n1,2\n# \"q\n2,3\n"},
	{name: "quoted cell later", body: "x,y\n1,2\n2,3\n\"3\",4\n4,5\n"},
	{name: "quoted line break later", body: "x,y\n1,2\n\"3\n\",4\n4,5\n"},
	{name: "bad quote later", body: "x,y\n1,2\n2,3\n3,4\"\n"},
	{name: "fault then quote", body: "x,y\n1,2\n2,q\n\"3\",4\n"},
	{name: "CR in cells then quote", body: "x,y\n1\r,2\r\r\n\"3\",4\n"},
	{name: "decimal comma", body: "x;y\n1,5;2\n2;3\n", o: &CSVOptions{Delimiter: "semicolon", Decimal: "comma"}},
	{name: "skip", body: "x,y\n1,2\nNA,3\n3,4\n", o: &CSVOptions{Missing: "skip"}},
	{name: "units row", body: "x,y\nmg,mg\n1,2\n", o: &CSVOptions{UnitsRow: true}},
}

// TestCSVStreamMatchesWholeBody: bodies read as they arrive, in blocks of
// every size from one byte to the whole body (so that blocks end inside a
// number, between '\r' and '\n', inside the header and its byte-order
// mark, and at the row limit), answer exactly as the whole body read at
// once: the same numbers, rows and notes, or the same problem at the same
// row and column. So do the same bodies read as files (checkFileReader).
func TestCSVStreamMatchesWholeBody(t *testing.T) {
	for _, c := range wholeBodyCases {
		t.Run(c.name, func(t *testing.T) {
			d, streamed := sameStream([]byte(c.body), c.max, c.o, allSizes(len(c.body)))
			if d != "" {
				t.Fatal(d)
			}
			if c.streams && !streamed {
				t.Fatal("the stream kept this valid body for the row-by-row reader")
			}
			checkFileReader(t, c.body, c.max, c.o, c.streams)
		})
	}
}

// TestCSVStreamRandomBodies: seeded random bodies of 1 to 300 rows,
// valid or with one to three faults (a bad or empty cell, a wrong field
// count, a comment, a blank or CR line, a quote) at random rows, read in
// blocks of fixed sizes and of random sizes from 1 byte up, and as files
// in chunks of fixed sizes and of a random size, agree with the whole
// read; the row limit is set at, below or above the row count.
func TestCSVStreamRandomBodies(t *testing.T) {
	r := rand.New(rand.NewPCG(20, 3))
	faults := []string{"abc", "", "1,2,3,4,5", "1", "# note", "\r", " ", "+1", "1e999", "NA", "\"1\"", "\"1\n2\"", "\u00a01"}
	valid, streamed, read := 0, 0, 0
	for iter := range 400 {
		body, n := randomFitBody(r, 300, faults, iter%2 != 0)
		maxRows := []int{0, n, n - 1, n + 1}[r.IntN(4)]
		sizes := []int{1, 2, 3, 7, 49, 50, 51, 500, len(body)}
		d, s := sameStream(body, maxRows, nil, sizes)
		if d != "" {
			t.Fatalf("case %d: %s", iter, d)
		}
		if d, _ := sameFile(body, maxRows, nil, append(sizes[:7], 1+r.IntN(len(body)))); d != "" {
			t.Fatalf("case %d: %s", iter, d)
		}
		d, f := sameFile(body, maxRows, nil, sizes[7:]) // chunks longer than the lines
		if d != "" {
			t.Fatalf("case %d: %s", iter, d)
		}
		want, werr := wholeDecode(body, maxRows, nil)
		for rep := range 4 {
			got, gerr, _ := streamDecode(body, maxRows, nil, rep%2 == 0, func() int { return 1 + r.IntN(1+r.IntN(200)) })
			if d := sameDataset(want, werr, got, gerr, "stream in random blocks"); d != "" {
				t.Fatalf("case %d: %s", iter, d)
			}
		}
		if werr == nil {
			valid++
			if s {
				streamed++
			}
			if f {
				read++
			}
		}
	}
	if valid < 100 || streamed < valid/2 || read < valid/2 {
		t.Fatalf("%d of 400 bodies valid, %d of them streamed, %d read as files: the paths are not exercised", valid, streamed, read)
	}
}

// TestCSVStreamSizesColumnsOnce: a large body with a declared length
// makes its columns once (the room estimated from the first block holds
// every row) and keeps no list of lines; without a declared length the
// columns double.
func TestCSVStreamSizesColumnsOnce(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 7))
	var b bytes.Buffer
	b.WriteString("x,y,sx,sy\n")
	for range 200_000 {
		for j := range 4 {
			if j > 0 {
				b.WriteByte(',')
			}
			b.WriteString(strconv.FormatFloat(r.Float64()*1000, 'g', 10, 64))
		}
		b.WriteByte('\n')
	}
	body := b.Bytes()
	lim := &Limits{}
	st := NewCSVStream(nil, lim, int64(len(body)))
	grew := 0
	for i := 0; i < len(body); {
		k := min(256<<10, len(body)-i)
		before := cap(st.cols[0])
		copy(st.Room(k), body[i:i+k])
		st.Got(k)
		if before > 0 && cap(st.cols[0]) != before {
			grew++
		}
		i += k
	}
	d, err := st.Finish()
	if err != nil {
		t.Fatal(err)
	}
	if d.Len() != 200_000 || grew != 0 || d.rows != nil || d.firstRow != 2 {
		t.Fatalf("%d points, columns made again %d times, rows listed %v, first row %d", d.Len(), grew, d.rows != nil, d.firstRow)
	}
	// The estimate leaves at most a few per cent of spare room (common
	// practice for a size taken from a sample of the lines).
	if spare := float64(cap(st.cols[0]))/float64(d.Len()) - 1; spare > 0.03 {
		t.Fatalf("columns %.1f %% larger than the rows", 100*spare)
	}
}

// TestCSVStreamLongLines: a preamble of comments longer than the stream
// scans for its header (kept whole), a comment line and a bad cell longer
// than a block, read in blocks of several sizes, answer as the whole read.
func TestCSVStreamLongLines(t *testing.T) {
	long := strings.Repeat("9", 3*streamBlock)
	rows := strings.Repeat("1,2\n", 1000)
	for _, c := range []struct {
		name, body string
		streams    bool
	}{
		{"long preamble", strings.Repeat("# comment line\n", 80_000) + "x,y\n" + rows, false},
		{"long comment", "x,y\n" + rows + "#" + long + "\n" + rows, true},
		{"long number (too large)", "x,y\n" + rows + "1," + long + "\n" + rows, false},
		{"long bad cell", "x,y\n" + rows + "1,2" + long + "x\n" + rows, false},
	} {
		t.Run(c.name, func(t *testing.T) {
			d, streamed := sameStream([]byte(c.body), 0, nil, []int{1000, 4096, 256 << 10})
			if d != "" {
				t.Fatal(d)
			}
			if streamed != c.streams {
				t.Fatalf("streamed %v, want %v", streamed, c.streams)
			}
		})
	}
}

// TestCSVStreamRoomWithinDeclaredLength: after the first block of a body
// of the shortest rows ("1,2\n", 16 bytes of columns for 4 bytes of
// body), the columns made take no more bytes than the declared length;
// the rows that follow grow them, and every row is read.
func TestCSVStreamRoomWithinDeclaredLength(t *testing.T) {
	body := []byte("x,y\n" + strings.Repeat("1,2\n", 1<<20))
	st := NewCSVStream(nil, &Limits{}, int64(len(body)))
	const block = 256 << 10
	copy(st.Room(block), body[:block])
	st.Got(block)
	if made := 8 * 2 * cap(st.cols[0]); made > len(body) {
		t.Fatalf("after the first block: %d bytes of columns for a body of %d", made, len(body))
	}
	for i := block; i < len(body); {
		k := min(block, len(body)-i)
		copy(st.Room(k), body[i:i+k])
		st.Got(k)
		i += k
	}
	d, err := st.Finish()
	if err != nil || d.Len() != 1<<20 {
		t.Fatalf("%v, %d points", err, d.Len())
	}
}

// randomFitBody is a seeded random fit CSV (x, y, sx, sy) of 1 to maxN
// rows, LF or CRLF, in shortest, exponent and fixed forms; with broken,
// one to three cells replaced by one of faults. n is the row count.
func randomFitBody(r *rand.Rand, maxN int, faults []string, broken bool) (body []byte, n int) {
	var b bytes.Buffer
	b.WriteString([]string{"x,y,sx,sy\n", "x,y,sx,sy\r\n"}[r.IntN(2)])
	n = 1 + r.IntN(maxN)
	lines := make([]string, n)
	for i := range lines {
		f := func() string {
			return strconv.FormatFloat(r.NormFloat64()*100, "gef"[r.IntN(3)], r.IntN(18)-1, 64)
		}
		lines[i] = f() + "," + f() + "," + f() + "," + f()
	}
	if broken {
		for range 1 + r.IntN(3) {
			i := r.IntN(n)
			fs := bytes.Split([]byte(lines[i]), []byte{','})
			fs[r.IntN(len(fs))] = []byte(faults[r.IntN(len(faults))])
			lines[i] = string(bytes.Join(fs, []byte{','}))
		}
	}
	eol := []string{"\n", "\r\n"}[r.IntN(2)]
	for _, l := range lines {
		b.WriteString(l)
		b.WriteString(eol)
	}
	return b.Bytes(), n
}
