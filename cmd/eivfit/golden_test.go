package main

import (
	"flag"
	"os"
	"path/filepath"
	"strconv"
	"testing"
)

// update rewrites the golden files from the current output:
// go test ./cmd/eivfit -run Golden -update (then read the diff).
var update = flag.Bool("update", false, "rewrite the golden files in testdata/golden")

// The text output of the demo data, byte for byte. A change to a number,
// a sentence or the layout shows here as a diff of the golden file; the
// numbers themselves are checked against outside sources elsewhere (the
// eiv reference tests), so a golden file only guards what they do not: the
// text a user reads.
func TestGoldenText(t *testing.T) {
	for _, c := range []struct {
		name   string
		args   []string
		golden string
	}{
		{"fit glucose", []string{"fit", "--format", "text", "--at", "7,11.1", "../../testdata/demo-glucose.csv"}, "fit-glucose.txt"},
		{"calibrate gas sensor", []string{"calibrate", "--format", "text", "--coverage-probability", "0.95", "--trials", "20000", "--seed", "1", "--forward", "500", "../../testdata/demo-gas-sensor.csv"}, "calibrate-gas-sensor.txt"},
		{"compare glucose duplicates", []string{"compare", "--format", "text", "--decision-levels", "7,11.1",
			"--allowable-absolute", "0.3", "--allowable-percent", "5", "--unit", "mmol/L", "../../testdata/demo-glucose-duplicates.csv"}, "compare-glucose-duplicates.txt"},
	} {
		t.Run(c.name, func(t *testing.T) {
			out, stderr, err := runCmd(t, "", c.args...)
			if err != nil {
				t.Fatalf("%v\n%s", err, stderr)
			}
			checkGolden(t, filepath.Join("testdata", "golden", c.golden), []byte(out))
		})
	}
}

// checkGolden compares got with the golden file, or rewrites it under -update.
func checkGolden(t *testing.T, path string, got []byte) {
	t.Helper()
	if *update {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run with -update to create it)", err)
	}
	if string(got) != string(want) {
		t.Errorf("output differs from %s (run with -update and read the diff):\n%s", path, firstDiff(string(want), string(got)))
	}
}

// firstDiff shows the first line where want and got differ.
func firstDiff(want, got string) string {
	line := 1
	for i := 0; i < len(want) && i < len(got); i++ {
		if want[i] != got[i] {
			return lineAt(want, i, line, "want") + "\n" + lineAt(got, i, line, "got ")
		}
		if want[i] == '\n' {
			line++
		}
	}
	return "one is a prefix of the other"
}

func lineAt(s string, i, line int, label string) string {
	start, end := i, i
	for start > 0 && s[start-1] != '\n' {
		start--
	}
	for end < len(s) && s[end] != '\n' {
		end++
	}
	return label + " line " + strconv.Itoa(line) + ": " + s[start:end]
}
