package api

import (
	"bytes"
	"crypto/sha256"
	"encoding/base64"
	"encoding/hex"
	"encoding/xml"
	"io"
	"net/url"
	"os"
	"strings"
	"testing"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// svgOK parses the SVG as XML and returns its text content and the number
// of point markers (filled with the data colour).
func svgOK(t *testing.T, b []byte) (text string, markers int) {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(b))
	var sb strings.Builder
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("SVG is not well-formed XML: %v", err)
		}
		switch v := tok.(type) {
		case xml.CharData:
			sb.Write(v)
			sb.WriteByte('\n')
		case xml.StartElement:
			for _, a := range v.Attr {
				if a.Name.Local == "style" && a.Value == "fill:#0072B2" {
					markers++
				}
			}
		}
	}
	return sb.String(), markers
}

func TestPlots(t *testing.T) {
	h := newHarness(t, Config{})
	csv, _ := gasSensorFitCSV(t)
	const n = 12
	cases := []struct {
		kind    string
		labels  []string
		markers int // data points (+1 where the legend shows a sample glyph)
	}{
		{"data", []string{"Data and fitted lines", "x", "y", "identity y = x", "OLS", "York"}, n + 1},
		{"residuals", []string{"Residuals against level", "level, mean of x and y", "residual / stated SD"}, n},
		{"run-order", []string{"Residuals in run order", "run order"}, n},
		{"qq", []string{"Normal Q-Q plot", "standard normal quantile", "standardized residual"}, n},
		{"difference", []string{"Difference plot", "mean of x and y", "difference y − x", "limits of agreement"}, n},
		{"bootstrap", []string{"Bootstrap distribution of the slope", "slope", "resamples", "BCa interval"}, 0},
	}
	for _, c := range cases {
		t.Run(c.kind, func(t *testing.T) {
			h.t = t
			rec := h.do("POST", "/v1/plots/"+c.kind+"?resamples=300&seed=2", "text/csv", string(csv))
			if rec.Code != 200 || rec.Header().Get("Content-Type") != "image/svg+xml" {
				t.Fatalf("status %d %s: %s", rec.Code, rec.Header().Get("Content-Type"), wire.Truncate(rec.Body.String()))
			}
			text, markers := svgOK(t, rec.Body.Bytes())
			for _, l := range c.labels {
				if !strings.Contains(text, l) {
					t.Errorf("no label %q", l)
				}
			}
			if markers != c.markers {
				t.Errorf("%d markers, want %d", markers, c.markers)
			}
		})
	}
	h.t = t
	if rec := h.do("POST", "/v1/plots/pie", "text/csv", string(csv)); rec.Code != 404 {
		t.Errorf("unknown kind: %d", rec.Code)
	}
	if rec := h.do("POST", "/v1/plots/bootstrap", "text/csv", string(csv)); rec.Code != 400 {
		t.Errorf("bootstrap plot without resamples: %d", rec.Code)
	}
	if rec := h.do("POST", "/v1/plots/data?method=york", "text/csv", "x,y\n1,2\n2,3\n3,5\n"); rec.Code != 400 {
		t.Errorf("unfitted method: %d", rec.Code)
	}
	// JSON bodies take only "method" from the query.
	if rec := h.do("POST", "/v1/plots/qq?method=ols", "application/json", smallJSON+`}`); rec.Code != 200 {
		t.Errorf("json plot: %d", rec.Code)
	}
}

// The HTML report is self-contained (inline SVG and CSS, nothing loaded),
// carries a strict CSP, the caution, the software version, the input's
// SHA-256 and the seed.
func TestHTMLReports(t *testing.T) {
	h := newHarness(t, Config{Version: "9.9.9"})
	_, gasPath := gasSensorFitCSV(t)
	for _, c := range []struct {
		name, target, file string
		want               []string
	}{
		{"fit", "/v1/fit?at=500&resamples=400&seed=77", gasPath,
			[]string{"Straight-line fit", "0.84465", "How far OLS would have been off", "Checks of the assumptions", "Decision levels"}},
		{"compare", "/v1/method-comparison?decision_levels=3.9,7,11.1&allowable_percent=5&unit=mmol/L&resamples=200&seed=77", "../testdata/demo-glucose-duplicates.csv",
			[]string{"Method comparison", "Report the Passing–Bablok fit", "Bias y − x at the decision levels", "limits of agreement", "D042", "Error model"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			body, err := os.ReadFile(c.file)
			if err != nil {
				t.Fatal(err)
			}
			rec := h.do("POST", c.target, "text/csv", string(body), "Accept", "text/html")
			if rec.Code != 200 || !strings.HasPrefix(rec.Header().Get("Content-Type"), "text/html") {
				t.Fatalf("status %d %s", rec.Code, rec.Header().Get("Content-Type"))
			}
			if csp := rec.Header().Get("Content-Security-Policy"); !strings.Contains(csp, "default-src 'none'") {
				t.Errorf("CSP %q", csp)
			}
			html := rec.Body.String()
			sum := sha256.Sum256(body)
			for _, w := range append(c.want, study.Caution[:60], "eivfit 9.9.9", hex.EncodeToString(sum[:]), "77", "@media print") {
				if !strings.Contains(html, w) {
					t.Errorf("report lacks %q", w)
				}
			}
			if n := strings.Count(html, "<svg"); n != 6 {
				t.Errorf("%d plots, want 6", n)
			}
			for _, bad := range []string{"<script", "<link", "src=\"http", "href=\"http", "url(http", "@import"} {
				if strings.Contains(html, bad) {
					t.Errorf("report loads from the network: %q", bad)
				}
			}
		})
	}
}

// The page works as a plain form post, with the pasted demo data.
func TestFormPage(t *testing.T) {
	h := newHarness(t, Config{})
	rec := h.do("GET", "/", "", "")
	if rec.Code != 200 || !strings.Contains(rec.Body.String(), `<form method="post" action="/report"`) {
		t.Fatalf("form: %d", rec.Code)
	}
	demo, _ := os.ReadFile("../testdata/demo-glucose.csv")
	form := url.Values{"csv": {string(demo)}, "analysis": {"fit"}, "at": {"7, 11.1"}, "resamples": {"200"}, "seed": {"5"}}
	rec = h.do("POST", "/report", "application/x-www-form-urlencoded", form.Encode())
	if rec.Code != 200 || strings.Count(rec.Body.String(), "<svg") < 5 {
		t.Fatalf("report: %d, %d plots", rec.Code, strings.Count(rec.Body.String(), "<svg"))
	}
	form = url.Values{"csv": {"x,y\n1,2\n"}, "analysis": {"fit"}}
	rec = h.do("POST", "/report", "application/x-www-form-urlencoded", form.Encode())
	if rec.Code != 422 || !strings.Contains(rec.Body.String(), "too few points") || !strings.Contains(rec.Body.String(), `id="form-error"`) {
		t.Errorf("bad form: %d", rec.Code)
	}
	keyed := newHarness(t, Config{APIKeys: []string{"k1"}})
	form = url.Values{"csv": {string(demo)}, "analysis": {"compare"}}
	if rec := keyed.do("POST", "/report", "application/x-www-form-urlencoded", form.Encode()); rec.Code != 401 {
		t.Errorf("keyless form with keys configured: %d", rec.Code)
	}
	basic := "Basic " + base64.StdEncoding.EncodeToString([]byte("any:k1"))
	if rec := keyed.do("POST", "/report", "application/x-www-form-urlencoded", form.Encode(), "Authorization", basic); rec.Code != 200 {
		t.Errorf("keyed form: %d %s", rec.Code, wire.Truncate(rec.Body.String()))
	}
}
