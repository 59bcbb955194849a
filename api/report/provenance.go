package report

import (
	"bytes"
	"crypto/sha256"
	"fmt"
	"strconv"
	"strings"
	"time"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// MaxAppendixRows is the most input rows a report lists in its raw-data
// appendix; above it the appendix says how many rows there were and names
// the input by its SHA-256 instead (a table of thousands of rows is not a
// page anyone reads, and the hash identifies the file exactly).
const MaxAppendixRows = 500

// Input is the body a report was computed from, exactly as received.
type Input struct {
	SHA256 string
	Format string // "CSV" or "JSON"
	Bytes  int
	// Skipped counts the CSV lines that are not data: comments ('#') and
	// blank lines. A data row is never skipped: a row that cannot be read
	// is refused with its line and column.
	Skipped int
}

// InputOf describes a body as received; csv says it was read as CSV.
func InputOf(raw []byte, csv bool) Input {
	sum := sha256.Sum256(raw)
	in := Input{SHA256: fmt.Sprintf("%x", sum), Format: "JSON", Bytes: len(raw)}
	if !csv {
		return in
	}
	in.Format = "CSV"
	body := bytes.TrimPrefix(raw, []byte("\xef\xbb\xbf"))
	for len(body) > 0 {
		line := body
		if i := bytes.IndexByte(body, '\n'); i >= 0 {
			line, body = body[:i], body[i+1:]
		} else {
			body = nil
		}
		t := bytes.TrimSpace(line)
		if len(t) == 0 || t[0] == '#' {
			in.Skipped++
		}
	}
	return in
}

// Made is how a report was made: the input and the software.
type Made struct {
	Input Input
	// Version and Revision are the software's version and VCS revision
	// (from the build: -ldflags or runtime/debug.ReadBuildInfo).
	Version, Revision string
}

// softwareText names the software and its revision.
func (m Made) softwareText() string {
	s := "eivfit " + m.Version
	if m.Revision != "" {
		s += " (revision " + m.Revision + ")"
	}
	return s
}

// producedKey names the report's time (UTC) in its head.
const producedKey = "Produced (UTC)"

// header is the report's head: software, input hash and time. The full
// record of settings is the provenance section.
func (m Made) header() []KV {
	return []KV{{Key: "Software", Value: m.softwareText()}, {Key: "Input SHA-256", Value: m.Input.SHA256},
		{Key: producedKey, Value: time.Now().UTC().Format(time.RFC3339)}}
}

// inputKVs are the provenance lines on the input: its hash, form, and the
// rows read and skipped.
func (m Made) inputKVs(rows int, what string, how *wire.InputOut) []KV {
	in := m.Input
	read := fmt.Sprintf("%d %s", rows, what)
	if in.Format == "CSV" {
		read += fmt.Sprintf("; %d comment or blank lines skipped", in.Skipped)
		if n := skippedRows(how); n > 0 {
			read += fmt.Sprintf("; %d data rows left out (missing=skip), each listed with its reason in the appendix", n)
		} else {
			read += "; no data row skipped"
		}
	}
	return []KV{
		{Key: "Software", Value: m.softwareText()},
		{Key: "Input", Value: fmt.Sprintf("%s, %d bytes, SHA-256 %s", in.Format, in.Bytes, in.SHA256)},
		{Key: "Rows read", Value: read},
	}
}

// methodName is a method's display name from the registry ("weighted
// Deming"), the name itself for one the registry does not know.
func methodName(name string) string {
	if m := study.MethodNamed(name); m != nil {
		return m.Display
	}
	return name
}

// capital starts a sentence with a display name ("weighted Deming" →
// "Weighted Deming").
func capital(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

func methodsText(fs wire.Fits) string {
	var names []string
	fs.Each(func(name string, _ *wire.MethodFit) { names = append(names, methodName(name)) })
	return strings.Join(names, ", ")
}

// bootstrapText states the bootstrap settings of the fits, "none" when no
// bootstrap ran.
func bootstrapText(fs wire.Fits) string {
	seen := map[string]bool{}
	var out []string
	fs.Each(func(name string, m *wire.MethodFit) {
		if b := m.Bootstrap; b != nil {
			s := fmt.Sprintf("%d resamples, %s scheme, seed %d", b.Resamples, b.Scheme, b.Seed)
			if b.Failed > 0 {
				s += fmt.Sprintf(" (%d could not be fitted)", b.Failed)
			}
			if !seen[s] {
				seen[s] = true
				out = append(out, s)
			}
		}
	})
	if len(out) == 0 {
		return "none (analytic and jackknife intervals only)"
	}
	return strings.Join(out, "; ")
}

// lambdaText states λ of the Deming fits and where it came from.
func lambdaText(fs wire.Fits) string {
	var out []string
	fs.Each(func(name string, m *wire.MethodFit) {
		if m.Lambda != nil {
			out = append(out, fmt.Sprintf("%s: λ = %s (%s)", methodName(name), g(*m.Lambda), lambdaSourceText(m.LambdaSource)))
		}
	})
	if len(out) == 0 {
		return "not used by the fitted methods"
	}
	return strings.Join(out, "; ")
}

func lambdaSourceText(s string) string {
	switch s {
	case "given":
		return "given in the request"
	case "uncertainties":
		return "from the stated uncertainties sx, sy"
	case "replicates":
		return "from the replicates"
	case "assumed":
		return "assumed equal error variances, none stated"
	}
	return s
}

func percent(v float64) string { return strconv.FormatFloat(100*v, 'g', -1, 64) + " %" }

func listText(v []float64, unit string) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = g(x)
	}
	return strings.Join(s, ", ") + unit
}

// appendixTooLarge is the appendix of an input above MaxAppendixRows.
func appendixTooLarge(rows int, m Made) Section {
	return Section{Heading: "Appendix: the data as analysed", ID: "appendix", Text: []string{fmt.Sprintf(
		"The input has %d rows, more than the %d this report lists. It is identified exactly by its SHA-256 %s (%s, %d bytes); keep that file with this record.",
		rows, MaxAppendixRows, m.Input.SHA256, m.Input.Format, m.Input.Bytes)}}
}

func skippedRows(how *wire.InputOut) int {
	if how == nil {
		return 0
	}
	return len(how.SkippedRows)
}

// appendixText is the appendix's opening sentence.
func appendixText(m Made, how *wire.InputOut, marks string) string {
	s := "The input as analysed, in input order."
	if m.Input.Format == "CSV" {
		switch n := skippedRows(how); n {
		case 0:
			s += fmt.Sprintf(" Every data row was read; %d comment or blank lines were skipped.", m.Input.Skipped)
		default:
			s += fmt.Sprintf(" %d comment or blank lines were skipped, and %d data rows were left out (missing=skip): they are listed under \"Rows left out\" with their reasons.", m.Input.Skipped, n)
		}
	}
	return s + " " + marks
}

// withSkipped adds the rows left out to an appendix.
func withSkipped(sec Section, how *wire.InputOut) Section {
	if t, ok := skippedTable(how); ok {
		sec.Tables = append(sec.Tables, t)
	}
	return sec
}

// exact prints an input value as read, to the last digit (the shortest
// decimal that reads back as the same double).
func exact(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func optExact(p *float64) string {
	if p == nil {
		return ""
	}
	return exact(*p)
}

func valuesText(v []float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = exact(x)
	}
	return strings.Join(s, ", ")
}

// withUnit adds a unit to a header: "bias (mmol/L)".
func withUnit(h, unit string) string {
	if unit == "" {
		return h
	}
	return h + " (" + unit + ")"
}
