package wire

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"strings"
	"testing"
)

// fileDecode reads body as a file through decodeCSVAt in chunks of the
// given size: the dataset or problem, and whether it read the file itself
// (false: the caller reads it whole).
func fileDecode(r io.ReaderAt, size int64, maxRows int, o *CSVOptions, chunk int) (*Dataset, error, bool) {
	g, ok, err := decodeCSVAt(r, size, o, maxRows, chunk)
	if !ok || err != nil {
		return nil, err, ok
	}
	return g[0].Data, nil, true
}

// sameFile says how the file read of body in chunks of each size differs
// from the whole read ("" when none), and whether every size read it.
// A file it reads must give the whole read's dataset or problem.
func sameFile(body []byte, maxRows int, o *CSVOptions, sizes []int) (string, bool) {
	want, werr := wholeDecode(body, maxRows, o)
	read := true
	for _, k := range sizes {
		got, gerr, ok := fileDecode(bytes.NewReader(body), int64(len(body)), maxRows, o, k)
		read = read && ok
		if !ok {
			continue
		}
		if d := sameDataset(want, werr, got, gerr, fmt.Sprintf("file in chunks of %d", k)); d != "" {
			return d, false
		}
	}
	return "", read
}

// checkFileReader holds the file reader to the whole read on body (one
// of wholeBodyCases) in chunks of every size from one byte to past the
// body (so that chunks start and end inside numbers, between '\r' and
// '\n', on line breaks and inside lines longer than a chunk): the same
// answer, or the body left to the whole read; a valid plain body (valid)
// must be read by the file reader itself once chunks are longer than its
// lines.
func checkFileReader(t *testing.T, body string, maxRows int, o *CSVOptions, valid bool) {
	t.Helper()
	if d, _ := sameFile([]byte(body), maxRows, o, allSizes(len(body))); d != "" {
		t.Fatal(d)
	}
	if !valid {
		return
	}
	longest := 0
	for _, l := range strings.Split(body, "\n") {
		longest = max(longest, len(l)+1)
	}
	if _, read := sameFile([]byte(body), maxRows, o, []int{longest, longest + 1, len(body) + 1}); !read {
		t.Fatal("the file reader left this valid body to the whole read")
	}
}

// changingFile is a file that grows, shrinks or fails after its size was
// taken: every such file is left to the whole read.
type changingFile struct {
	b    []byte
	size int64 // the size it was stated to have
	err  error // every read fails with it
}

func (f changingFile) ReadAt(p []byte, off int64) (int, error) {
	if f.err != nil {
		return 0, f.err
	}
	return bytes.NewReader(f.b).ReadAt(p, off)
}

func TestCSVFileChangedOrFailing(t *testing.T) {
	body, _ := randomFitBody(rand.New(rand.NewPCG(5, 5)), 2000, nil, false)
	size := int64(len(body))
	if _, _, ok := fileDecode(bytes.NewReader(body), size, 0, nil, 1000); !ok {
		t.Fatal("the unchanged file was not read")
	}
	for _, c := range []struct {
		name string
		f    changingFile
	}{
		{"grew", changingFile{b: append(bytes.Clone(body), "1,2,3,4\n"...), size: size}},
		{"shrank", changingFile{b: body[:size-10], size: size}},
		{"failed", changingFile{b: body, size: size, err: errors.New("I/O error")}},
	} {
		t.Run(c.name, func(t *testing.T) {
			if _, err, ok := fileDecode(c.f, c.f.size, 0, nil, 1000); ok || err != nil {
				t.Fatalf("read %v, error %v; want it left to the whole read", ok, err)
			}
		})
	}
}

// TestCSVFileMoreLinesThanEstimated: a file whose first chunk has long
// lines and the rest short ones holds more lines than the columns sized
// from the first chunk; the chunks then only count, and a second round
// reads them into columns of the exact size: the whole read's answer. At
// a row limit below the lines it is left to the whole read.
func TestCSVFileMoreLinesThanEstimated(t *testing.T) {
	var b bytes.Buffer
	b.WriteString("x,y,sx,sy\n")
	long := "12.34567890123456,23.45678901234567,0.1234567890123456,0.2345678901234567\n"
	for b.Len() < 80<<10 {
		b.WriteString(long)
	}
	headLines := bytes.Count(b.Bytes(), []byte{'\n'}) - 1
	for i := range 60_000 {
		fmt.Fprintf(&b, "%d,%d,1,2\n", i%10, i%7)
	}
	body := b.Bytes()
	rows := headLines + 60_000
	f := &fileRows{size: int64(len(body)), from: 10}
	est, _ := f.estimate(body[10:64<<10], false)
	if est >= rows {
		t.Fatalf("the estimate (%d slots) holds all %d rows: the second round is not exercised", est, rows)
	}
	if d, read := sameFile(body, 0, nil, []int{64 << 10, 100_000}); d != "" || !read {
		t.Fatalf("%s (read %v)", d, read)
	}
	if d, read := sameFile(body, rows-1, nil, []int{64 << 10}); d != "" || read {
		t.Fatalf("%s (read %v, want it left to the whole read at the row limit)", d, read)
	}
}
