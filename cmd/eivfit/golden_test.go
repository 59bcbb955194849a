package main

import (
	"flag"
	"path/filepath"
	"testing"

	"eivfit/api/wire/wiretest"
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
			wiretest.CheckGolden(t, filepath.Join("testdata", "golden", c.golden), []byte(out), *update)
		})
	}
}
