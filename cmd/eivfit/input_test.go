package main

import (
	"bytes"
	"io"
	"os"
	"path/filepath"
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
