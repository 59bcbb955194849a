package api

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"eivfit/api/wire"

	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"
)

// pdftotext returns Debian poppler-utils' pdftotext, or skips; under
// EIVFIT_REQUIRE_BROWSER=1 (CI) a missing one fails.
func pdftotext(t *testing.T) string {
	if p, err := exec.LookPath("pdftotext"); err == nil {
		return p
	}
	if os.Getenv("EIVFIT_REQUIRE_BROWSER") == "1" {
		t.Fatal("pdftotext not found (apt-get install poppler-utils; EIVFIT_REQUIRE_BROWSER=1 forbids skipping)")
	}
	t.Skip("pdftotext not found")
	return ""
}

// The three report kinds on the demo data, as a reviewer prints them:
// on screen no table, figure or plot is wider than its container; printed
// on A4 and on Letter (the page size from the report's CSS), every page
// carries "page n of N" and the input's SHA-256 in its margin, the page
// count is that of a report (2 to 12 pages) and no heading is the last
// line of a page. EIVFIT_SCREENSHOT_DIR keeps the screenshots and PDFs.
func TestBrowserPrint(t *testing.T) {
	if testing.Short() || raceEnabled {
		t.Skip("browser test: runs in the plain test pass")
	}
	path := chromium(t)
	p2t := pdftotext(t)
	h := newHarness(t, Config{Version: "print-test"})
	dir := os.Getenv("EIVFIT_SCREENSHOT_DIR")
	if dir == "" {
		dir = t.TempDir()
	}
	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(path), chromedp.NoSandbox, chromedp.UserDataDir(t.TempDir()),
		chromedp.Flag("disable-gpu", true), chromedp.Flag("disable-quic", true),
		chromedp.Flag("disable-component-update", true), chromedp.WindowSize(1200, 1600))
	ctx, cancel := context.WithTimeout(context.Background(), 180*time.Second)
	defer cancel()
	actx, acancel := chromedp.NewExecAllocator(ctx, opts...)
	defer acancel()
	bctx, bcancel := chromedp.NewContext(actx)
	defer bcancel()
	footer := regexp.MustCompile(`page (\d+) of (\d+)`)
	for _, c := range []struct {
		name, path, demo string
	}{
		{"fit", "/v1/fit?at=7,11.1", "demo-glucose.csv"},
		{"compare", "/v1/method-comparison?decision_levels=7,11.1&allowable_absolute=0.3&allowable_percent=5&unit=mmol/L", "demo-glucose-duplicates.csv"},
		{"calibration", "/v1/calibration?coverage_probability=0.95&trials=20000&seed=5", "demo-gas-sensor.csv"},
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
			html := filepath.Join(dir, c.name+".html")
			if err := os.WriteFile(html, rec.Body.Bytes(), 0o644); err != nil {
				t.Fatal(err)
			}
			if err := chromedp.Do(bctx, chromedp.Navigate("file://"+html), chromedp.WaitVisible(chromedp.CSS("footer"))); err != nil {
				t.Fatal(err)
			}
			// scrollWidth ≤ clientWidth for every table, figure and plot,
			// and none reaches past its parent's right edge (1 px: rounding
			// of fractional layout).
			over, err := chromedp.Run(bctx, chromedp.Evaluate[[]string](`(() => {
				const out = [];
				for (const el of document.querySelectorAll("table, figure, figure svg, .figs, dl, .summary, .sign")) {
					const name = el.tagName + (el.querySelector("caption") ? " " + el.querySelector("caption").textContent : "");
					if (el.scrollWidth > el.clientWidth + 1 && el.tagName !== "svg") out.push(name + ": scrollWidth " + el.scrollWidth + " > clientWidth " + el.clientWidth);
					const r = el.getBoundingClientRect(), p = el.parentElement.getBoundingClientRect();
					if (r.right > p.right + 1) out.push(name + ": right edge " + r.right + " past its container's " + p.right);
				}
				return out;
			})()`))
			if err != nil {
				t.Fatal(err)
			}
			for _, o := range over {
				t.Errorf("overflow: %s", o)
			}
			headings, err := chromedp.Run(bctx, chromedp.Evaluate[[]string](`[...document.querySelectorAll("h1, h2, h3, caption")].map(e => e.textContent.trim())`))
			if err != nil {
				t.Fatal(err)
			}
			if len(headings) < 3 {
				t.Fatalf("%d headings", len(headings))
			}
			png, err := chromedp.Run(bctx, chromedp.FullScreenshot(90))
			if err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(filepath.Join(dir, c.name+".png"), png, 0o644); err != nil {
				t.Fatal(err)
			}
			sha := regexp.MustCompile(`[0-9a-f]{64}`).Find(rec.Body.Bytes())
			for _, paper := range []struct {
				name string
				size chromedp.PaperSize
			}{{"A4", chromedp.PaperA4}, {"Letter", chromedp.PaperLetter}} {
				pdf, err := chromedp.Run(bctx, chromedp.PrintToPDF(chromedp.PDFPaper(paper.size), chromedp.PDFPrintBackground(),
					func(p *page.PrintToPDFParams) { css := true; p.PreferCSSPageSize = &css }))
				if err != nil {
					t.Fatal(err)
				}
				file := filepath.Join(dir, c.name+"-"+paper.name+".pdf")
				if err := os.WriteFile(file, pdf, 0o644); err != nil {
					t.Fatal(err)
				}
				out, err := exec.Command(p2t, "-layout", file, "-").Output()
				if err != nil {
					t.Fatal(err)
				}
				pages := strings.Split(strings.TrimRight(string(out), "\f"), "\f")
				if len(pages) < 2 || len(pages) > 12 {
					t.Errorf("%s: %d pages, want 2 to 12", paper.name, len(pages))
				}
				for i, pg := range pages {
					var lines []string
					for _, l := range strings.Split(pg, "\n") {
						if l = strings.TrimSpace(l); l != "" {
							lines = append(lines, l)
						}
					}
					if len(lines) < 2 {
						t.Errorf("%s page %d is empty", paper.name, i+1)
						continue
					}
					// The margin line: "page n of N" and the input's hash.
					margin := lines[len(lines)-1]
					m := footer.FindStringSubmatch(margin)
					if m == nil || m[1] != fmt.Sprint(i+1) || m[2] != fmt.Sprint(len(pages)) {
						t.Errorf("%s page %d: margin line %q, want page %d of %d", paper.name, i+1, margin, i+1, len(pages))
					}
					if !strings.Contains(margin, string(sha)) {
						t.Errorf("%s page %d: the margin does not name the input SHA-256 %s", paper.name, i+1, sha)
					}
					last := lines[len(lines)-2]
					for _, hd := range headings {
						if hd != "" && last == hd {
							t.Errorf("%s page %d ends with the heading %q", paper.name, i+1, hd)
						}
					}
				}
				t.Logf("%s %s: %d pages (%s)", c.name, paper.name, len(pages), file)
			}
		})
	}
}
