package wire

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"strings"
	"unicode"
	"unicode/utf8"
)

// Reading instruments' and LIMS's exports: one record reader for every
// dialect (the plain scan when the body has no quote, encoding/csv
// otherwise), one header matcher, one classifier of missing and censored
// cells. The fit and comparison decoders build on them.

// InputOut says how an export was read: which header gave each role and
// its unit, the columns left unread, the rows dropped and why, and the
// replicates found per sample. Present when there is something to say.
type InputOut struct {
	// Group is the value of the group_by column this study was split on.
	Group string `json:"group,omitempty"`
	// Columns maps each role read to its header as written.
	Columns []ColumnOut `json:"columns,omitempty"`
	// IgnoredColumns are the headers of columns not read
	// (extra_columns=ignore).
	IgnoredColumns []string `json:"ignored_columns,omitempty"`
	// SkippedRows lists every row left out (missing=skip) with its reason.
	SkippedRows []SkippedRow `json:"skipped_rows,omitempty"`
	// Replicates counts the samples by their number of replicates per
	// method (method comparison).
	Replicates *ReplicatesOut `json:"replicates,omitempty"`
}

// ColumnOut is one role and the header that carried it.
type ColumnOut struct {
	Role   string `json:"role"`
	Header string `json:"header"`
	Unit   string `json:"unit,omitempty"`
}

// SkippedRow is a row left out, the cell that caused it and why.
type SkippedRow struct {
	Row    int    `json:"row"`
	Column string `json:"column"`
	Value  string `json:"value"`
	Reason string `json:"reason"`
}

// ReplicatesOut counts samples by replicates per method.
type ReplicatesOut struct {
	// Rows is the number of data rows the samples came from.
	Rows    int              `json:"rows"`
	Samples int              `json:"samples"`
	X       []ReplicateCount `json:"x"`
	Y       []ReplicateCount `json:"y"`
}

// ReplicateCount is the number of samples with a given replicate count.
type ReplicateCount struct {
	Replicates int `json:"replicates"`
	Samples    int `json:"samples"`
}

// empty says whether there is nothing to report.
func (in *InputOut) empty() bool {
	return in == nil || (in.Group == "" && len(in.Columns) == 0 && len(in.IgnoredColumns) == 0 &&
		len(in.SkippedRows) == 0 && in.Replicates == nil)
}

// records reads a CSV body record by record in the options' dialect.
type records struct {
	body   []byte
	comma  byte
	std    *csv.Reader
	fields [][]byte
	line   int
	// chunk is the chunk size in bytes of the parallel row reader
	// (csv_chunks.go): 0 for the default, negative to read row by row.
	chunk int
	// base is the number of lines before body (a body resumed after the
	// rows the streaming reader took, csv_stream.go).
	base int
}

func newRecords(body []byte, o *CSVOptions) *records {
	r := &records{body: body, comma: o.comma()}
	if hasQuote(body) {
		r.useStd()
	}
	return r
}

// useStd reads the body through encoding/csv (quoted fields).
func (r *records) useStd() {
	r.std = csv.NewReader(bytes.NewReader(r.body))
	r.std.Comment = '#'
	r.std.Comma = rune(r.comma)
	r.std.TrimLeadingSpace = r.comma != '\t' // encoding/csv would eat empty tab-separated fields
	r.std.ReuseRecord = true
	r.std.FieldsPerRecord = -1
}

// next returns the next record and its line; io.EOF at the end. The
// fields are valid until the next call.
func (r *records) next() ([][]byte, int, error) {
	if r.std != nil {
		rec, err := r.std.Read()
		if err != nil {
			if err == io.EOF {
				return nil, 0, err
			}
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				pe.StartLine += r.base
				pe.Line += r.base
			}
			return nil, 0, csvReadError(err)
		}
		r.line, _ = r.std.FieldPos(0)
		r.line += r.base
		r.fields = r.fields[:0]
		for _, f := range rec {
			r.fields = append(r.fields, []byte(f))
		}
		return r.fields, r.line, nil
	}
	for len(r.body) > 0 {
		r.line++
		var l []byte
		if i := bytes.IndexByte(r.body, '\n'); i >= 0 {
			l, r.body = r.body[:i], r.body[i+1:]
		} else {
			l, r.body = r.body, nil
		}
		l = bytes.TrimSuffix(l, []byte{'\r'})
		if len(l) == 0 || l[0] == '#' {
			continue
		}
		r.fields = r.fields[:0]
		for {
			i := bytes.IndexByte(l, r.comma)
			if i < 0 {
				r.fields = append(r.fields, l)
				break
			}
			r.fields = append(r.fields, l[:i])
			l = l[i+1:]
		}
		return r.fields, r.line, nil
	}
	return nil, 0, io.EOF
}

// lines left, a bound on the data rows, for sizing columns.
func (r *records) linesLeft() int {
	if r.std != nil {
		return 0
	}
	return bytes.Count(r.body, []byte{'\n'}) + 1
}

// headerKey normalises a header for matching: case, surrounding spaces and
// a trailing unit in parentheses or brackets are ignored; the unit is
// returned.
func headerKey(h string) (key, unit string) {
	h = strings.TrimSpace(h)
	for _, p := range [][2]byte{{'(', ')'}, {'[', ']'}} {
		if strings.HasSuffix(h, string(p[1])) {
			if i := strings.LastIndexByte(h, p[0]); i > 0 {
				unit = strings.TrimSpace(h[i+1 : len(h)-1])
				h = strings.TrimSpace(h[:i])
				break
			}
		}
	}
	return strings.ToLower(h), unit
}

// layout is what a header says: each field's role (-1: not read) and
// unit, the group column, the headers left unread.
type layout struct {
	line    int
	roles   []int    // index into the decoder's role names, or -1
	names   []string // headers as written (trimmed)
	units   []string
	group   int // field of the group_by column, or -1
	ignored []string
}

// readHeader matches a header against the decoder's roles. known maps a
// normalised header to a role index (the decoder's default names); the
// options' columns map headers to roles by name (roleIndex). what lists
// the known names for the error message.
func readHeader(fields [][]byte, line int, o *CSVOptions, known func(key string) int, roleIndex func(role string) int, what string) (*layout, error) {
	lay := &layout{line: line, group: -1, roles: make([]int, len(fields)), names: make([]string, len(fields)), units: make([]string, len(fields))}
	mapped := map[string]int{}
	var groupKey string
	if o != nil {
		for _, c := range o.Columns {
			k, _ := headerKey(c.Header)
			i := roleIndex(c.Role)
			if i < 0 {
				return nil, Invalid(o.where("columns"), fmt.Sprintf("role %s does not apply to this kind of study", c.Role))
			}
			mapped[k] = i
		}
		groupKey, _ = headerKey(o.GroupBy)
	}
	if o != nil {
		present := map[string]bool{}
		for _, f := range fields {
			k, _ := headerKey(string(f))
			present[k] = true
		}
		for _, c := range o.Columns {
			if k, _ := headerKey(c.Header); !present[k] {
				return nil, Invalid(o.where("columns"), fmt.Sprintf("no column %q in the header (row %d)", Truncate(c.Header), line))
			}
		}
	}
	found := map[string]bool{}
	for j, f := range fields {
		if !utf8.Valid(f) {
			return nil, Invalid(fmt.Sprintf("row %d, column %d", line, j+1), "the header is not valid UTF-8 text")
		}
		h := strings.TrimSpace(string(f))
		key, unit := headerKey(h)
		lay.names[j], lay.units[j] = h, unit
		if found[key] {
			return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(h)), fmt.Sprintf("column %q appears twice", Truncate(key)))
		}
		found[key] = true
		if o != nil && o.GroupBy != "" && key == groupKey {
			lay.roles[j], lay.group = -1, j
			continue
		}
		if i, ok := mapped[key]; ok {
			lay.roles[j] = i
			continue
		}
		i := known(key)
		if i >= 0 && o != nil && o.mapsRole(i, roleIndex) {
			i = -1 // the role comes from another column: this one is extra
		}
		if i >= 0 {
			lay.roles[j] = i
			continue
		}
		if len(fields) == 1 && o.comma() == ',' {
			if err := dialectHint(h, line, o); err != nil {
				return nil, err
			}
		}
		if _, perr := parseCell(key); perr == nil {
			return nil, Invalid(fmt.Sprintf("row %d", line), "the first row must be a header naming the columns, e.g. x,y,sx,sy")
		}
		if !o.ignore() {
			return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(h)), fmt.Sprintf(
				"unknown column %q (known: %s); map it with %s, or read past it with %s", Truncate(h), what, o.optionText("columns", "ROLE:"+Truncate(h)), o.optionText("extra_columns", "ignore")))
		}
		lay.roles[j] = -1
		lay.ignored = append(lay.ignored, h)
	}
	if o != nil {
		if o.GroupBy != "" && lay.group < 0 {
			return nil, Invalid(o.where("group_by"), fmt.Sprintf("no column %q in the header (row %d)", Truncate(o.GroupBy), line))
		}
	}
	return lay, nil
}

// mapsRole says whether the options map role i to some column.
func (o *CSVOptions) mapsRole(i int, roleIndex func(string) int) bool {
	for _, c := range o.Columns {
		if roleIndex(c.Role) == i {
			return true
		}
	}
	return false
}

// optionText writes an option with its value as the caller gives it:
// name=value in a query, --name value on the command line.
func (o *CSVOptions) optionText(name, value string) string {
	if o != nil && o.flags {
		return FlagName(name) + " " + value
	}
	return name + "=" + value
}

// where names an option for an error: a query parameter unless the
// options came from flags.
func (o *CSVOptions) where(name string) string {
	if o != nil && o.flags {
		return FlagName(name)
	}
	return QueryName(name)
}

// dialectHint refuses a one-field header that is clearly separated by
// semicolons or tabs, naming the option that reads it.
func dialectHint(h string, line int, o *CSVOptions) error {
	for _, d := range []struct {
		sep  string
		name string
	}{{";", "semicolon"}, {"\t", "tab"}} {
		if strings.Contains(h, d.sep) {
			set, extra := "delimiter="+d.name, " (and decimal=comma if the numbers use a decimal comma)"
			if o != nil && o.flags {
				set, extra = "--delimiter "+d.name, " (and --decimal comma if the numbers use a decimal comma)"
			}
			if d.sep != ";" {
				extra = ""
			}
			return Invalid(fmt.Sprintf("row %d", line), fmt.Sprintf(
				"the header looks %s-separated: set %s%s; eivfit does not guess the dialect, so that no number is misread", d.name, set, extra))
		}
	}
	return nil
}

// units reads the units row into the layout.
func (lay *layout) readUnits(fields [][]byte, line int) error {
	if len(fields) != len(lay.roles) {
		return Invalid(fmt.Sprintf("row %d, column 1", line), "the units row has a different number of fields from the header")
	}
	for j, f := range fields {
		if u := strings.TrimSpace(string(f)); u != "" {
			if !utf8.ValidString(u) || len(u) > maxNameBytes {
				return Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(lay.names[j])), "a unit is UTF-8 text of at most 256 bytes")
			}
			lay.units[j] = u
		}
	}
	return nil
}

// unitOf is the unit of the first column with role i ("" if none).
func (lay *layout) unitOf(i int) string {
	for j, r := range lay.roles {
		if r == i && lay.units[j] != "" {
			return lay.units[j]
		}
	}
	return ""
}

// columns lists the roles read with their headers and units; nil when
// every header is a plain role name without a unit (eivfit's own CSV).
func (lay *layout) columns(names []string) []ColumnOut {
	var out []ColumnOut
	plain := true
	for j, r := range lay.roles {
		if r < 0 {
			continue
		}
		out = append(out, ColumnOut{Role: names[r], Header: lay.names[j], Unit: lay.units[j]})
		if k, _ := headerKey(lay.names[j]); lay.units[j] != "" || (k != names[r] && !replicateColumn.MatchString(k)) {
			plain = false
		}
	}
	if plain {
		return nil
	}
	return out
}

// missingTokens are the cells read as "no value" (lower case).
var missingTokens = []string{"na", "n/a", "n.a.", "nd", "n.d.", "-", "--", "null", "missing"}

// missingCell classifies a cell that is not a number: blank, a missing
// marker, or a censored value (below or above a limit). ok is false for
// anything else (an error in the number).
func missingCell(b []byte, dec byte) (reason string, ok bool) {
	b = bytes.TrimSpace(b)
	if len(b) == 0 {
		return "blank cell", true
	}
	low := strings.ToLower(string(b))
	for _, t := range missingTokens {
		if low == t {
			return fmt.Sprintf("missing value (%s)", Truncate(string(b))), true
		}
	}
	for _, c := range []struct{ prefix, side string }{{"<=", "below"}, {">=", "above"}, {"≤", "below"}, {"≥", "above"}, {"<", "below"}, {">", "above"}} {
		if rest, found := strings.CutPrefix(string(b), c.prefix); found {
			if _, ok := cellFloat(bytes.TrimSpace([]byte(rest)), dec); ok {
				return fmt.Sprintf("censored value (%s: %s a limit)", Truncate(string(b)), c.side), true
			}
		}
	}
	return "", false
}

// cellFloat reads a number written with the decimal mark dec.
func cellFloat(b []byte, dec byte) (float64, bool) {
	if dec == '.' {
		return parseFloat(b)
	}
	var buf [64]byte
	if len(b) > len(buf) || bytes.IndexByte(b, '.') >= 0 || bytes.Count(b, []byte{','}) > 1 {
		return 0, false
	}
	n := copy(buf[:], b)
	if i := bytes.IndexByte(buf[:n], ','); i >= 0 {
		buf[i] = '.'
	}
	return parseFloat(buf[:n])
}

// cellError says why cellFloat refused b: a thousands separator, a decimal
// mark other than the option's, or numberError's reasons.
func cellError(b []byte, o *CSVOptions) error {
	s := Truncate(string(b))
	dec := o.decimal()
	switch {
	case thousands(b):
		return fmt.Errorf("%q has a thousands separator, which eivfit never guesses: write the number without it", s)
	case dec == ',' && bytes.IndexByte(b, '.') >= 0:
		return fmt.Errorf("%q has a '.', but decimal=comma: write the decimal mark as ',' and no thousands separator", s)
	case dec == '.' && o.comma() != ',' && bytes.Count(b, []byte{','}) == 1:
		return fmt.Errorf("%q has a decimal comma: set decimal=comma to read it", s)
	case dec == ',':
		c := bytes.Replace(b, []byte{','}, []byte{'.'}, 1)
		return numberError(c)
	}
	return numberError(b)
}

// thousands says whether b looks like a number with a thousands separator:
// digit groups of three after '.', ',', ' ' or '\” with another mark (or
// none) after them, as in 1,234.5, 1.234,5, 1 234 or 1'234.
func thousands(b []byte) bool {
	s := strings.TrimPrefix(string(b), "-")
	for _, sep := range []string{" ", "'", "\u00a0", "\u202f"} {
		if strings.Contains(s, sep) && digitsAround(s, sep) {
			return true
		}
	}
	return (strings.Contains(s, ".") && strings.Contains(s, ",")) || strings.Count(s, ".") > 1 || strings.Count(s, ",") > 1
}

func digitsAround(s, sep string) bool {
	parts := strings.Split(s, sep)
	for i, p := range parts {
		if p == "" || !unicode.IsDigit(rune(p[0])) || (i > 0 && len(p) < 3) {
			return false
		}
	}
	return true
}

// missingRows gathers the rows refused for a missing or censored cell, to
// name each one in one problem.
type missingRows struct {
	errs []FieldError
	n    int
}

const maxNamedRows = 200

func (m *missingRows) add(line int, column, reason string) {
	m.n++
	if len(m.errs) < maxNamedRows {
		m.errs = append(m.errs, FieldError{Pointer: fmt.Sprintf("row %d, column %s", line, Truncate(column)), Detail: reason})
	}
}

func (m *missingRows) problem(o *CSVOptions) error {
	if m.n == 0 {
		return nil
	}
	errs := m.errs
	if m.n > len(errs) {
		errs = append(errs, FieldError{Pointer: "body", Detail: fmt.Sprintf("and %d more rows", m.n-len(errs))})
	}
	return NewProblem(KindInvalid, fmt.Sprintf("%d rows have a blank, missing or censored value; nothing is dropped unless asked: %s leaves such rows out and lists each in input.skipped_rows",
		m.n, missingOption(o)), errs...)
}

func missingOption(o *CSVOptions) string {
	if o != nil && o.flags {
		return "--missing skip"
	}
	return "missing=skip"
}

// unitsRowHint is the error for a non-numeric second row without
// units_row.
func unitsRowHint(line int, o *CSVOptions, column string, cell []byte) error {
	opt := "units_row=true"
	if o != nil && o.flags {
		opt = "--units-row"
	}
	return Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(column)), fmt.Sprintf(
		"%q is not a number, and this is the first row after the header: if the row holds the columns' units, set %s", Truncate(string(cell)), opt))
}

// looksLikeUnits says whether a cell that is not a number may be a unit.
func looksLikeUnits(b []byte) bool {
	b = bytes.TrimSpace(b)
	if len(b) == 0 || len(b) > 40 {
		return false
	}
	r, _ := utf8.DecodeRune(b)
	return unicode.IsLetter(r) || r == '%' || r == 'µ' || r == '(' || r == '['
}
