// Package reftest runs the reference scripts in testdata/ (general-purpose
// libraries such as Debian's python3-scipy and python3-statsmodels) for
// tests that compare eivfit with the outside world.
//
// A test that needs a reference library calls Python; when the library does
// not import, the test is skipped, unless EIVFIT_REQUIRE_REFERENCE=1 is set
// (as CI does), in which case it fails.
package reftest

import (
	"bytes"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"testing"
)

// Python returns a Python interpreter that imports every module named.
// It prefers $EIVFIT_PYTHON, then Debian's /usr/bin/python3, then python3 on PATH.
func Python(t testing.TB, modules ...string) string {
	t.Helper()
	cands := []string{os.Getenv("EIVFIT_PYTHON"), "/usr/bin/python3", "python3"}
	probe := "import sys\n"
	for _, m := range modules {
		probe += "import " + m + "\n"
	}
	for _, c := range cands {
		if c == "" {
			continue
		}
		p, err := exec.LookPath(c)
		if err != nil {
			continue
		}
		if exec.Command(p, "-c", probe).Run() == nil {
			return p
		}
	}
	msg := "reference library not available: python3 with " + joinNames(modules)
	if os.Getenv("EIVFIT_REQUIRE_REFERENCE") == "1" {
		t.Fatal(msg + " (EIVFIT_REQUIRE_REFERENCE=1 forbids skipping)")
	}
	t.Skip(msg)
	return ""
}

func joinNames(m []string) string {
	var b bytes.Buffer
	for i, s := range m {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(s)
	}
	return b.String()
}

// Script returns the absolute path of a script in the repository's testdata/.
func Script(t testing.TB, name string) string {
	t.Helper()
	_, file, _, _ := runtime.Caller(0)
	p := filepath.Join(filepath.Dir(file), "..", "..", "testdata", name)
	if _, err := os.Stat(p); err != nil {
		t.Fatal(err)
	}
	return p
}

// Run runs a reference script with the given interpreter, writes input as
// JSON to its standard input and decodes its JSON standard output into out.
func Run(t testing.TB, python, script string, input, out any) {
	t.Helper()
	in, err := json.Marshal(input)
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(python, script)
	cmd.Stdin = bytes.NewReader(in)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	b, err := cmd.Output()
	if err != nil {
		t.Fatalf("%s: %v\n%s", filepath.Base(script), err, stderr.String())
	}
	if err := json.Unmarshal(b, out); err != nil {
		t.Fatalf("%s: bad output: %v\n%s", filepath.Base(script), err, b)
	}
}
