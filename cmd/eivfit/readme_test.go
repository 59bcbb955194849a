package main

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"eivfit/eiv/reftest"
)

// readmeBlock is one fenced code block of README.md.
type readmeBlock struct {
	lang, text string
	line       int
}

func readmeBlocks(t *testing.T) []readmeBlock {
	t.Helper()
	b, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	var out []readmeBlock
	var cur *readmeBlock
	for i, l := range strings.Split(string(b), "\n") {
		switch {
		case cur == nil && strings.HasPrefix(l, "```") && len(l) > 3:
			cur = &readmeBlock{lang: l[3:], line: i + 1}
		case cur != nil && l == "```":
			out = append(out, *cur)
			cur = nil
		case cur != nil:
			cur.text += l + "\n"
		}
	}
	return out
}

// need finds a program the examples use; without it the test skips,
// unless EIVFIT_REQUIRE_REFERENCE=1 (as in CI, which installs it).
func need(t *testing.T, name string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("EIVFIT_REQUIRE_REFERENCE") == "1" {
			t.Fatalf("%s is required (EIVFIT_REQUIRE_REFERENCE=1): apt-get install %s", name, name)
		}
		t.Skipf("%s is not installed", name)
	}
	return p
}

// TestReadmeExamples runs every example of README.md that talks to the
// service — the curl lines, the jq LIMS script, the Python snippets with
// requests and with urllib — against `eivfit serve` started as a real
// process on a free port with a throwaway data directory, so that the
// README cannot drift from the code. Each command runs with the port
// substituted, curl failing on an HTTP error (a shim adds
// --fail-with-body) and pipelines failing when any part fails; where the
// README prints the output, the output must be what the command prints.
func TestReadmeExamples(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a process")
	}
	sh, curl := need(t, "bash"), need(t, "curl")
	need(t, "jq")
	srv := startServe(t, []string{"EIVFIT_DATA_DIR=" + t.TempDir()})
	host := strings.TrimPrefix(srv.base, "http://")
	root, err := filepath.Abs("../..")
	if err != nil {
		t.Fatal(err)
	}
	// The examples run in a directory of their own (they write report.html
	// and data.svg) that sees the repository's testdata; eivfit is the test
	// binary standing in for the real one.
	dir, bin := t.TempDir(), t.TempDir()
	if err := os.Symlink(filepath.Join(root, "testdata"), filepath.Join(dir, "testdata")); err != nil {
		t.Fatal(err)
	}
	self, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	for name, script := range map[string]string{
		"curl":   "#!/bin/sh\nexec " + curl + " --fail-with-body \"$@\"\n",
		"eivfit": "#!/bin/sh\nEIVFIT_TEST_AS_BINARY=1 exec " + self + " \"$@\"\n",
	} {
		if err := os.WriteFile(filepath.Join(bin, name), []byte(script), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	env := append(os.Environ(), "PATH="+bin+string(os.PathListSeparator)+os.Getenv("PATH"), "EIVFIT_DATA_DIR="+t.TempDir())
	run := func(t *testing.T, name string, args ...string) (string, string, error) {
		t.Helper()
		ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
		defer cancel()
		cmd := exec.CommandContext(ctx, name, args...)
		cmd.Dir, cmd.Env = dir, env
		var out, errb bytes.Buffer
		cmd.Stdout, cmd.Stderr = &out, &errb
		err := cmd.Run()
		return out.String(), errb.String(), err
	}
	local := func(text string) string {
		text = strings.ReplaceAll(text, "127.0.0.1:8080", host)
		return strings.ReplaceAll(text, "go run ./cmd/eivfit", "eivfit")
	}
	ran := map[string]int{}
	var pyOut []string
	for _, b := range readmeBlocks(t) {
		if !strings.Contains(b.text, "127.0.0.1:8080/") {
			continue
		}
		name := b.lang + " at README.md:" + strconv.Itoa(b.line)
		t.Run(name, func(t *testing.T) {
			switch {
			case b.lang == "python":
				modules := []string{}
				if strings.Contains(b.text, "import requests") {
					modules = append(modules, "requests")
				}
				py := reftest.Python(t, modules...)
				f := filepath.Join(t.TempDir(), "example.py")
				if err := os.WriteFile(f, []byte(local(b.text)), 0o644); err != nil {
					t.Fatal(err)
				}
				out, stderr, err := run(t, py, f)
				if err != nil || !strings.Contains(out, "OLS") {
					t.Fatalf("%v\n%s\n%s", err, out, stderr)
				}
				pyOut = append(pyOut, out)
				ran["python"]++
			case strings.HasPrefix(b.text, "#!"):
				f := filepath.Join(t.TempDir(), "lims.sh")
				if err := os.WriteFile(f, []byte(local(b.text)), 0o755); err != nil {
					t.Fatal(err)
				}
				out, stderr, err := run(t, sh, f, "testdata/demo-glucose.csv")
				if err != nil || !strings.HasPrefix(out, "slope ") || strings.Count(out, "bias at ") != 2 {
					t.Fatalf("the LIMS script: %v\n%s\n%s", err, out, stderr)
				}
				bad := filepath.Join(t.TempDir(), "export.csv")
				if err := os.WriteFile(bad, []byte("x;y\n1;2\n"), 0o644); err != nil {
					t.Fatal(err)
				}
				out, stderr, err = run(t, sh, f, bad)
				if err == nil || !strings.Contains(stderr, "eivfit refused") || !strings.Contains(stderr, "row 1") {
					t.Fatalf("the LIMS script on a bad export: %v\n%s\n%s", err, out, stderr)
				}
				ran["lims"]++
			case b.lang == "sh":
				script, want := splitOutput(t, sh, b.text)
				out, stderr, err := run(t, sh, "-e", "-o", "pipefail", "-c", local(script))
				if err != nil {
					t.Fatalf("%v\n%s\n%s", err, script, stderr)
				}
				if want != "" && strings.TrimSpace(out) != strings.TrimSpace(want) {
					t.Errorf("the README shows\n%s\nthe command prints\n%s", want, out)
				}
				if strings.Contains(out, "urn:eivfit:problem") {
					t.Errorf("an example got a problem: %s", out)
				}
				ran["sh"]++
			}
		})
	}
	for _, f := range []string{"report.html", "data.svg"} {
		if st, err := os.Stat(filepath.Join(dir, f)); err != nil || st.Size() < 1000 {
			t.Errorf("the README's plot example wrote no %s: %v", f, err)
		}
	}
	if ran["lims"] != 1 || ran["sh"] < 6 {
		t.Errorf("examples run: %v; the README lost some", ran)
	}
	if len(pyOut) == 2 && pyOut[0] != pyOut[1] {
		t.Errorf("the requests and urllib snippets print different answers:\n%s\n%s", pyOut[0], pyOut[1])
	}
}

// splitOutput splits a README block into its commands and the output it
// shows: the output starts at the first line that opens at column 0 with
// '"', '{' or '[' after complete commands (bash -n accepts them).
func splitOutput(t *testing.T, sh, text string) (script, output string) {
	t.Helper()
	lines := strings.SplitAfter(text, "\n")
	for i := 1; i < len(lines); i++ {
		if l := lines[i]; l == "" || !strings.ContainsAny(l[:1], `"{[`) {
			continue
		}
		cmd := strings.Join(lines[:i], "")
		if exec.Command(sh, "-n", "-c", cmd).Run() == nil {
			return cmd, strings.Join(lines[i:], "")
		}
	}
	return text, ""
}
