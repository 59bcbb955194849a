package api

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"html"
	"os"
	"regexp"
	"strings"
	"testing"

	"eivfit/api/report"
	"eivfit/api/store/storetest"
	"eivfit/api/wire"
)

// tagOrSVG is markup and inline plots, to read a report as its text.
var tagOrSVG = regexp.MustCompile(`(?s)<svg.*?</svg>|<style>.*?</style>|<[^>]*>`)

// pageText is a report as a reader sees it: text without markup or plots.
func pageText(b []byte) string {
	return strings.Join(strings.Fields(html.UnescapeString(tagOrSVG.ReplaceAllString(string(b), " "))), " ")
}

// section returns the HTML of the section with the given id.
func section(t *testing.T, page, id string) string {
	t.Helper()
	i := strings.Index(page, ` id="`+id+`"`)
	if i < 0 {
		t.Fatalf("no section %q", id)
	}
	j := strings.Index(page[i:], "</section>")
	return page[i : i+j]
}

// commentOrBlank counts the lines a CSV reader skips, independently of the
// report's own count.
func commentOrBlank(b []byte) int {
	n := 0
	for _, l := range strings.Split(strings.TrimSuffix(string(b), "\n"), "\n") {
		if t := strings.TrimSpace(l); t == "" || strings.HasPrefix(t, "#") {
			n++
		}
	}
	return n
}

// Every report kind records how it was made: the software and its VCS
// revision, the time, the input's SHA-256, the rows read and skipped, and
// every setting that changes a number; the appendix lists the data as
// analysed with excluded rows and flagged outliers marked.
func TestReportProvenance(t *testing.T) {
	h := newHarness(t, Config{Version: "1.2.3", VCSRevision: "0123abcd"})
	for _, c := range []struct {
		name, target, file string
		rows               int
		settings           []string // provenance lines the settings must produce
		appendix           []string // marks in the appendix
	}{
		{"fit", "/v1/fit?at=7,11.1&resamples=300&seed=77&methods=deming,york,ols", "../testdata/demo-glucose.csv", 60,
			[]string{"Methods", "OLS, Deming, York (as requested)", "λ (Deming fits)", "Deming: λ = ", "from the stated uncertainties sx, sy",
				"Confidence", "95 % for every interval", "Bootstrap", "300 resamples, pairs scheme, seed 77", "Requested x values (at)", "7, 11.1", "Columns given"},
			[]string{"Points", "row", "sx", "sy"}},
		{"compare", "/v1/method-comparison?decision_levels=3.9,7,11.1&allowable_percent=5&allowable_absolute=0.2&unit=mmol/L&resamples=200&seed=78&confidence=0.9&exclude=D042,D007", "../testdata/demo-glucose-duplicates.csv", 80,
			[]string{"Methods", "OLS, Deming, weighted Deming, Passing–Bablok", "Error model", "proportional (replicates)", "λ", "(from the replicates)",
				"90 % for every interval", "200 resamples, pairs scheme, seed 78", "Decision levels", "3.9, 7, 11.1 mmol/L",
				"Allowable bias", "±0.2 mmol/L or ±5 % of the level, whichever is greater", "Limits of agreement", "mean ± 1.96 SD",
				"Exclusions", "D042, D007: named in the request's exclude", "Outlier test", "Unit"},
			[]string{"D042", "excluded (analysed with and without); flagged outlier", "D007", "excluded (analysed with and without)", "x readings (mmol/L)"}},
		{"calibration", "/v1/calibration?coverage_probability=0.9&trials=20000&seed=5&model=gdr&on_inconsistent=inflate", "../testdata/demo-gas-sensor.csv", 15,
			[]string{"Model", "generalized distance regression (gdr), as requested. Why:", "Correlated x errors", "Validation", "on inconsistency: inflate",
				"Coverage", "coverage probability 90 %", "Monte Carlo (JCGM 101)", "20000 per unknown, seed 5"},
			[]string{"Standards", "Unknowns", "M09", "flagged: standardized residual beyond ±2"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			body, err := os.ReadFile(c.file)
			if err != nil {
				t.Fatal(err)
			}
			rec := h.do("POST", c.target, "text/csv", string(body), "Accept", "text/html")
			if rec.Code != 200 {
				t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
			}
			page := rec.Body.String()
			prov := pageText([]byte(section(t, page, "provenance")))
			sum := sha256.Sum256(body)
			want := append([]string{"Software", "eivfit 1.2.3 (revision 0123abcd)", "Input", fmt.Sprintf("CSV, %d bytes, SHA-256 %s", len(body), hex.EncodeToString(sum[:])),
				"Rows read", fmt.Sprintf("%d comment or blank lines skipped; no data row skipped", commentOrBlank(body))}, c.settings...)
			for _, w := range want {
				if !strings.Contains(prov, w) {
					t.Errorf("the provenance lacks %q:\n%s", w, prov)
				}
			}
			if !strings.Contains(prov, fmt.Sprintf("%d ", c.rows)) {
				t.Errorf("the provenance does not count %d rows", c.rows)
			}
			head := pageText([]byte(page[:strings.Index(page, "</header>")]))
			for _, w := range []string{"eivfit 1.2.3 (revision 0123abcd)", hex.EncodeToString(sum[:]), "Produced (UTC)"} {
				if !strings.Contains(head, w) {
					t.Errorf("the head lacks %q", w)
				}
			}
			if !regexp.MustCompile(`Produced \(UTC\)\s+\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ`).MatchString(head) {
				t.Errorf("the head has no UTC time: %s", head)
			}
			app := section(t, page, "appendix")
			for _, w := range c.appendix {
				if !strings.Contains(app, w) {
					t.Errorf("the appendix lacks %q", w)
				}
			}
			if n := strings.Count(app, "<tr") - strings.Count(app, "<thead>"); n != c.rows {
				t.Errorf("the appendix lists %d rows, want %d", n, c.rows)
			}
		})
	}
}

// The appendix of the comparison marks exactly the excluded samples (red
// row) and the flagged outliers; a row is otherwise unmarked.
func TestReportAppendixMarks(t *testing.T) {
	h := newHarness(t, Config{})
	body, err := os.ReadFile("../testdata/demo-glucose-duplicates.csv")
	if err != nil {
		t.Fatal(err)
	}
	page := h.do("POST", "/v1/method-comparison?exclude=D005", "text/csv", string(body), "Accept", "text/html").Body.String()
	rows := regexp.MustCompile(`<tr( class="(\w+)")?><td class="num">\d+</td><td>(D\d+)</td>.*?<td>([^<]*)</td></tr>`).FindAllStringSubmatch(section(t, page, "appendix"), -1)
	if len(rows) != 80 {
		t.Fatalf("%d sample rows, want 80", len(rows))
	}
	for _, r := range rows {
		class, id, mark := r[2], r[3], r[4]
		switch id {
		case "D005":
			if class != "bad" || !strings.HasPrefix(mark, "excluded") {
				t.Errorf("%s: class %q mark %q", id, class, mark)
			}
		case "D042": // the demo's flagged outlier (generalized ESD)
			if class != "warn" || mark != "flagged outlier" {
				t.Errorf("%s: class %q mark %q", id, class, mark)
			}
		default:
			if class != "" || mark != "" {
				t.Errorf("%s is marked: class %q mark %q", id, class, mark)
			}
		}
	}
}

// Above report.MaxAppendixRows the appendix names the input by its hash
// instead of listing it.
func TestReportAppendixLarge(t *testing.T) {
	h := newHarness(t, Config{})
	var b bytes.Buffer
	b.WriteString("x,y\n")
	for i := range report.MaxAppendixRows + 1 {
		fmt.Fprintf(&b, "%d,%g\n", i, float64(i)*1.01+float64(i%7)*0.1)
	}
	rec := h.do("POST", "/v1/fit?methods=ols,deming", "text/csv", b.String(), "Accept", "text/html")
	if rec.Code != 200 {
		t.Fatalf("%d", rec.Code)
	}
	sum := sha256.Sum256(b.Bytes())
	app := pageText([]byte(section(t, rec.Body.String(), "appendix")))
	for _, w := range []string{fmt.Sprintf("The input has %d rows, more than the %d", report.MaxAppendixRows+1, report.MaxAppendixRows), hex.EncodeToString(sum[:])} {
		if !strings.Contains(app, w) {
			t.Errorf("the appendix lacks %q: %s", w, app)
		}
	}
	if strings.Contains(section(t, rec.Body.String(), "appendix"), "<table") {
		t.Error("the appendix lists the rows above the limit")
	}
}

// methodIdentifier is a method's name in requests (weighted_deming) where a
// reader should see its display name (weighted Deming).
var methodIdentifier = regexp.MustCompile(`\b(ols|deming|weighted_deming|passing_bablok|york)\b`)

// The reports name methods by their display names, put the outcome first
// and carry #18's figures; headers with a unit show it.
func TestReportWords(t *testing.T) {
	h := newHarness(t, Config{})
	for _, c := range []struct {
		name, target, file string
		want               []string
	}{
		{"fit", "/v1/fit?at=7,11.1,40&x_unit=mmol/L&y_unit=mmol/L", "../testdata/demo-glucose.csv",
			[]string{"Reported line: York, because", "Read with care: x = 40 mmol/L lies outside the range of the data", "40 (extrapolated)", "York: χ² = ", "MSWD = ", "degrees of freedom", "weighted Deming", "intercept a (mmol/L)", "bias (mmol/L)"}},
		{"compare", "/v1/method-comparison?decision_levels=3.9,7,11.1,30&allowable_percent=5&unit=mmol/L&exclude=D042", "../testdata/demo-glucose-duplicates.csv",
			[]string{"Report the Passing–Bablok fit", "Outcome at the decision levels: Passing–Bablok:", "Without D042:", "Agreement: mean difference y − x",
				"Read with care:", "Decision level 30 mmol/L lies outside the range of the data", "Flagged as outliers: D042",
				"30 (extrapolated)", "verdict without D042", "level (mmol/L)", "bias (mmol/L)", "intercept a (mmol/L)",
				"single measurements", "Lin's concordance correlation", "precision ρ", "accuracy C_b",
				"Repeatability of each method", "repeatability coefficient (mmol/L)", "Regression-based limits",
				"Does each verdict hold under every fit", "weighted Deming", "Passing–Bablok"}},
		{"calibration", "/v1/calibration", "../testdata/demo-gas-sensor.csv",
			[]string{"x (umol/mol)", "ȳ (mV)", "u(x₀) (umol/mol)"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			body, err := os.ReadFile(c.file)
			if err != nil {
				t.Fatal(err)
			}
			rec := h.do("POST", c.target, "text/csv", string(body), "Accept", "text/html")
			if rec.Code != 200 {
				t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
			}
			text := pageText(rec.Body.Bytes())
			for _, w := range c.want {
				if !strings.Contains(text, w) {
					t.Errorf("the report lacks %q", w)
				}
			}
			if m := methodIdentifier.FindString(text); m != "" {
				i := strings.Index(text, m)
				t.Errorf("the report names a method by its identifier %q: …%s…", m, text[max(0, i-80):min(len(text), i+80)])
			}
			sum := section(t, rec.Body.String(), "summary")
			if c.name == "compare" && strings.Index(rec.Body.String(), sum) > strings.Index(rec.Body.String(), "<h2>") {
				t.Error("the summary is not first")
			}
		})
	}
}

// A stored study's report shows its id, the revision and the exclusions
// with their reasons in the provenance, and its signatures in the
// signature block instead of blank lines.
func TestStoredReportRecord(t *testing.T) {
	eng := storetest.Engines[0]
	h, _ := studyHarness(t, eng, []string{"ann analyse a-key", "sam sign s-key"}, nil)
	ann, sam := []string{"Authorization", "Bearer a-key"}, []string{"Authorization", "Bearer s-key"}
	rec := h.do("POST", "/v1/fit", "application/json", savedFitJSON, ann...)
	if rec.Code != 201 {
		t.Fatalf("%d %s", rec.Code, rec.Body)
	}
	id := decodeJSON[wire.Created](t, rec.Body.Bytes()).ID
	if r := h.do("POST", "/v1/studies/"+id+"/revisions", "application/json", `{"reason":"clot","based_on":0,"exclude":[{"id":"G","reason":"clotted sample"}]}`, ann...); r.Code != 201 {
		t.Fatalf("revise: %d %s", r.Code, r.Body)
	}
	blank := h.do("GET", "/v1/studies/"+id+"?revision=1", "", "", append([]string{"Accept", "text/html"}, ann...)...).Body.String()
	if s := section(t, blank, "signatures"); !strings.Contains(s, "Reviewed by (name, date, signature)") {
		t.Errorf("an unsigned revision has no lines for review: %s", s)
	}
	if r := h.do("POST", "/v1/studies/"+id+"/revisions/1/signatures", "application/json", `{"meaning":"reviewed","comment":"figures checked"}`, sam...); r.Code != 201 {
		t.Fatalf("sign: %d %s", r.Code, r.Body)
	}
	page := h.do("GET", "/v1/studies/"+id+"?revision=1", "", "", append([]string{"Accept", "text/html"}, ann...)...).Body.String()
	prov := pageText([]byte(section(t, page, "provenance")))
	for _, w := range []string{"Study", id, "Revision shown", "1", "Saved by", "eivfit test-1", "G: clotted sample (revision 1)"} {
		if !strings.Contains(prov, w) {
			t.Errorf("the provenance lacks %q: %s", w, prov)
		}
	}
	sig := pageText([]byte(section(t, page, "signatures")))
	if !strings.Contains(sig, "reviewed by sam") || !strings.Contains(sig, "figures checked") || strings.Contains(sig, "Reviewed by (name") {
		t.Errorf("the signature block: %s", sig)
	}
}

// Rows an export leaves out (missing=skip) are counted in the provenance
// and listed with their reasons in the appendix.
func TestReportSkippedRows(t *testing.T) {
	h := newHarness(t, Config{})
	csv := "# export\nx,y\n1,2.1\n2,3.9\n3,NA\n4,7.8\n5,10.1\n6,12.2\n"
	rec := h.do("POST", "/v1/fit?missing=skip&methods=ols,deming", "text/csv", csv, "Accept", "text/html")
	if rec.Code != 200 {
		t.Fatalf("%d %s", rec.Code, wire.Truncate(rec.Body.String()))
	}
	page := rec.Body.String()
	prov := pageText([]byte(section(t, page, "provenance")))
	if !strings.Contains(prov, "5 data rows (points); 1 comment or blank lines skipped; 1 data rows left out (missing=skip)") {
		t.Errorf("the provenance does not count the skipped row: %s", prov)
	}
	app := section(t, page, "appendix")
	if !strings.Contains(app, "Rows left out") || !regexp.MustCompile(`<tr class="bad"><td class="num">5</td><td>y</td><td>NA</td>`).MatchString(app) {
		t.Errorf("the appendix does not list row 5 as left out: %s", pageText([]byte(app)))
	}
}
