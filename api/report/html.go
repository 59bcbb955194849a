package report

import (
	"bytes"
	_ "embed"
	"html/template"
	"io"
)

// Page is a report: a validation record a reviewer can read, print and sign.
type Page struct {
	Title    string
	Subtitle string
	// Meta lines name the software version, the input's SHA-256 and the
	// time of the report.
	Meta    []KV
	Summary []string // the outcome first: plain sentences at the top
	// Alerts are the warnings that change how the summary reads
	// (extrapolated levels, a verdict that rests on one fit, York's χ²
	// rejecting the stated uncertainties, failed checks, outliers).
	Alerts   []string
	Sections []Section
	Warnings []string
	Caution  string
	// Provenance is every setting that changes a number, with the input
	// and the software (the section "How this report was made").
	Provenance []KV
	// Appendix is the raw data as analysed.
	Appendix Section
	// Signed holds the signatures of a stored study's revision shown; the
	// signature block shows them, else lines for review and approval.
	Signed []RecordSignature
}

// KV is a labelled value.
type KV struct{ Key, Value string }

// Section is a heading with prose, tables and figures.
type Section struct {
	Heading string
	ID      string // the section's HTML id, when it has one
	Text    []string
	Tables  []Table
	Figures []Figure
}

// Table is a captioned table; a Row's Class marks it ("good", "bad", "warn").
// Numeric lists the columns (0-based) that hold numbers, aligned right.
type Table struct {
	Caption string
	Header  []string
	Rows    []Row
	Numeric []int
}

// Num reports whether column i is numeric (for the template).
func (t Table) Num(i int) bool {
	for _, c := range t.Numeric {
		if c == i {
			return true
		}
	}
	return false
}

// Row is one table row.
type Row struct {
	Cells []string
	Class string
}

// Figure is an inline SVG plot with a caption.
type Figure struct {
	Caption string
	SVG     template.HTML // from this package's plot functions only
}

//go:embed report.html.tmpl
var reportTmpl string

//go:embed form.html.tmpl
var formTmpl string

var (
	reportT = template.Must(template.New("report").Parse(reportTmpl))
	formT   = template.Must(template.New("form").Parse(formTmpl))
)

// SVG marks plot output as safe HTML. Only bytes produced by this
// package's plot functions may be passed.
func SVG(b []byte) template.HTML { return template.HTML(b) } //nolint:gosec // our own renderer's output

// Write renders the page as a self-contained HTML document.
func (p *Page) Write(w io.Writer) error {
	var b bytes.Buffer
	if err := reportT.Execute(&b, p); err != nil {
		return err
	}
	_, err := w.Write(b.Bytes())
	return err
}

// Form is the data entry page.
type Form struct {
	Version    string
	NeedsKey   bool
	Error      string
	DemoFit    string // the demo CSV to offer in the text area
	DemoFields []KV
}

// WriteForm renders the data entry page.
func WriteForm(w io.Writer, f *Form) error {
	var b bytes.Buffer
	if err := formT.Execute(&b, f); err != nil {
		return err
	}
	_, err := w.Write(b.Bytes())
	return err
}

// ContentSecurityPolicy is sent with every HTML page: nothing is loaded
// from the network, no script runs, forms post only here.
const ContentSecurityPolicy = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; form-action 'self'; base-uri 'none'; frame-ancestors 'none'"
