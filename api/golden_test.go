package api

import (
	"flag"
	"os"
	"path/filepath"
	"regexp"
	"testing"

	"eivfit/api/wire"
	"eivfit/api/wire/wiretest"
)

// update rewrites the golden files from the current output:
// go test ./api -run Golden -update (then read the diff).
var update = flag.Bool("update", false, "rewrite the golden files in testdata/golden")

// produced is the report's timestamp, the one part that changes per run.
var produced = regexp.MustCompile(`\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ`)

// goIdentifier is a package-qualified Go name (wire.CI, study.Fits) where a
// reader should see words: a rename in the code must not reach the page.
var goIdentifier = regexp.MustCompile(`\b(wire|study|report|eiv|api)\.[A-Z]`)

// The HTML reports of the demo data, byte for byte but for the timestamp:
// a change to the page (its tables, sentences, plots or markup) shows as a
// diff of the golden file. The numbers are checked against outside sources
// elsewhere; this guards what a reader sees.
func TestGoldenHTMLReport(t *testing.T) {
	h := newHarness(t, Config{Version: "golden"})
	for _, c := range []struct {
		name, path, demo, golden string
	}{
		{"fit glucose", "/v1/fit?at=7,11.1", "demo-glucose.csv", "report-fit-glucose.html.golden"},
		{"compare glucose duplicates", "/v1/method-comparison?decision_levels=7,11.1&allowable_absolute=0.3&allowable_percent=5&unit=mmol/L",
			"demo-glucose-duplicates.csv", "report-compare-glucose-duplicates.html.golden"},
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
			if m := goIdentifier.Find(got); m != nil {
				t.Errorf("the report shows a Go identifier %q", m)
			}
			wiretest.CheckGolden(t, filepath.Join("testdata", "golden", c.golden), got, *update)
		})
	}
}
