package main

import (
	"bytes"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// TestOpenInput: a file is read whole into a buffer of its size, standard
// input to its end; a directory or a missing file is refused with its
// name, exit status 2.
func TestOpenInput(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "in.csv")
	body := []byte("x,y\n1,2\n2,3\n")
	if err := os.WriteFile(file, body, 0o644); err != nil {
		t.Fatal(err)
	}
	empty := filepath.Join(dir, "empty.csv")
	if err := os.WriteFile(empty, nil, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name, arg, stdin, want, stderr string
	}{
		{name: "file", arg: file, want: string(body)},
		{name: "empty file", arg: empty, want: ""},
		{name: "standard input", arg: "-", stdin: "x,y\n5,6\n", want: "x,y\n5,6\n"},
		{name: "directory", arg: dir, stderr: "is a directory"},
		{name: "missing", arg: filepath.Join(dir, "none.csv"), stderr: "no such file"},
	} {
		t.Run(c.name, func(t *testing.T) {
			var stderr bytes.Buffer
			in, _, err := openInput(c.arg, strings.NewReader(c.stdin), "fit", &stderr)
			if c.stderr != "" {
				if err == nil || !strings.Contains(stderr.String(), c.stderr) || err != (exitError{2}) {
					t.Fatalf("err %v, stderr %q; want exit 2 and %q", err, stderr.String(), c.stderr)
				}
				return
			}
			if err != nil {
				t.Fatal(err, stderr.String())
			}
			got, err := io.ReadAll(in)
			if err != nil || string(got) != c.want {
				t.Fatalf("read %q (%v), want %q", got, err, c.want)
			}
		})
	}
}

// A file above parallelReadMin is read in parts at once; the buffer must be
// the file byte for byte, whatever the number of parts (sizes that do not
// divide evenly, one byte over the threshold).
func TestReadInputFileParallel(t *testing.T) {
	dir := t.TempDir()
	for _, size := range []int{parallelReadMin - 1, parallelReadMin, parallelReadMin + 1, 3*parallelReadMin + 7} {
		body := make([]byte, size)
		for i := range body {
			body[i] = byte(i*7 + i/251) // no period that a misplaced part could hide behind
		}
		file := filepath.Join(dir, "big.csv")
		if err := os.WriteFile(file, body, 0o644); err != nil {
			t.Fatal(err)
		}
		got, err := readInputFile(file)
		if err != nil || !bytes.Equal(got, body) {
			t.Fatalf("size %d: read %d bytes (%v), not the file", size, len(got), err)
		}
	}
}

// A fit CSV of parallelReadMin bytes or more is decoded straight from the
// file in parts (wire.DecodeCSVAt); `eivfit fit FILE` must print what the
// same bytes read whole from standard input print, on stdout and stderr
// with the same exit status: valid files (LF, CRLF, a byte-order mark,
// comments among the rows, no final line break) and faulty ones (a bad
// cell near the end, a quote, too few columns, r without sx and sy).
func TestFitLargeFileInParts(t *testing.T) {
	dir := t.TempDir()
	rows := func(header string, n int, eol string, edit func(i int, row string) string) string {
		var b strings.Builder
		b.WriteString(header + eol)
		for i := range n {
			x := 10 + float64(i%9973)*0.0137
			row := strconv.FormatFloat(x, 'g', 10, 64) + "," + strconv.FormatFloat(2+1.1*x+float64(i%7)*0.01, 'g', 10, 64) +
				",0." + strconv.Itoa(1+i%8) + ",0." + strconv.Itoa(2+i%7)
			if edit != nil {
				row = edit(i, row)
			}
			b.WriteString(row + eol)
		}
		return b.String()
	}
	n := parallelReadMin/20 + 1000 // rows of about 25 bytes: over the threshold
	for _, c := range []struct {
		name, body string
		fails      bool
		parts      bool // decoded in parts, not left to the whole read
	}{
		{"plain", rows("x,y,sx,sy", n, "\n", nil), false, true},
		{"CRLF and a byte-order mark", "\xef\xbb\xbf" + rows("x,y,sx,sy", n, "\r\n", nil), false, true},
		{"comments among the rows", rows("x,y,sx,sy", n, "\n", func(i int, r string) string {
			if i%50_000 == 7 {
				return "# a note\n\n" + r
			}
			return r
		}), false, true},
		{"no final line break", strings.TrimSuffix(rows("x,y,sx,sy", n, "\n", nil), "\n"), false, true},
		{"bad cell near the end", rows("x,y,sx,sy", n, "\n", func(i int, r string) string {
			if i == n-3 {
				return "1,abc,0.1,0.2"
			}
			return r
		}), true, false},
		{"a quoted cell", rows("x,y,sx,sy", n, "\n", func(i int, r string) string {
			if i == n/2 {
				return `"1",2,0.1,0.2`
			}
			return r
		}), false, false},
		{"too few columns", rows("x,y,sx,sy", n, "\n", func(i int, r string) string {
			if i == n/3 {
				return "1,2,0.1"
			}
			return r
		}), true, false},
		{"r without sx and sy", rows("x,y,r,order", n, "\n", nil), true, true},
	} {
		t.Run(c.name, func(t *testing.T) {
			if len(c.body) < parallelReadMin {
				t.Fatalf("%d bytes: below the threshold, not a test of the parts", len(c.body))
			}
			file := filepath.Join(dir, "big.csv")
			if err := os.WriteFile(file, []byte(c.body), 0o644); err != nil {
				t.Fatal(err)
			}
			args := []string{"fit", "--methods", "ols,deming,york"}
			out, errOut, err := runCmd(t, "", append(args, file)...)
			wantOut, wantErr, werr := runCmd(t, c.body, append(args, "-")...)
			wantErr = strings.ReplaceAll(wantErr, "standard input", file)
			if out != wantOut || errOut != wantErr || err != werr {
				t.Fatalf("file: %v %q …%q; standard input: %v %q …%q", err, errOut, tail(out), werr, wantErr, tail(wantOut))
			}
			if (err != nil) != c.fails {
				t.Fatalf("exit %v, stderr %q", err, errOut)
			}
			if _, parts, _ := decodeFileInParts(file, nil); parts != c.parts {
				t.Fatalf("decoded in parts: %v, want %v", parts, c.parts)
			}
		})
	}
}

func tail(s string) string { return s[max(0, len(s)-200):] }
