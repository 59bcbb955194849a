package api

import (
	"flag"
	"os"
	"path/filepath"
	"regexp"
	"testing"

	"eivfit/api/wire"
)

// update rewrites the golden files from the current output:
// go test ./api -run Golden -update (then read the diff).
var update = flag.Bool("update", false, "rewrite the golden files in testdata/golden")

// produced is the report's timestamp, the one part that changes per run.
var produced = regexp.MustCompile(`\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ`)

// The HTML reports of the demo data, byte for byte but for the timestamp:
// a change to the page (its tables, sentences, plots or markup) shows as a
// diff of the golden file. The numbers are checked against outside sources
// elsewhere; this guards what a reader sees.
func TestGoldenHTMLReport(t *testing.T) {
	h := newHarness(t, Config{Version: "golden"})
	for _, c := range []struct {
		name, path, demo, golden string
	}{
		{"fit glucose", "/v1/fit?at=7,11.1", "demo-glucose.csv", "report-fit-glucose.html"},
		{"compare glucose duplicates", "/v1/method-comparison?decision_levels=7,11.1&allowable_absolute=0.3&allowable_percent=5&unit=mmol/L",
			"demo-glucose-duplicates.csv", "report-compare-glucose-duplicates.html"},
	} {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			body, err := os.ReadFile(filepath.Join("..", "testdata", c.demo))
			if err != nil {
				t.Fatal(err)
			}
			rec := h.do("POST", c.path, "text/csv", string(body), "Accept", "text/html")
			if rec.Code != 200 {
				t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
			}
			got := produced.ReplaceAll(rec.Body.Bytes(), []byte("2000-01-01T00:00:00Z"))
			path := filepath.Join("testdata", "golden", c.golden)
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
				t.Errorf("the report differs from %s (run with -update and read the diff)", path)
			}
		})
	}
}
