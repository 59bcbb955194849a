package wire

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strings"
	"unicode"
	"unicode/utf8"
)

// CSV input: a header row naming the columns, then one row per point.
// Columns (matched case-insensitively, in any order, a trailing unit in
// brackets taken as the axis unit): x and y required; sx, sy (standard
// uncertainties, 1 SD), r (error correlation), id and order optional.
// Lines starting with '#' are comments; a UTF-8 byte-order mark is
// skipped. Any other column is an error unless extra_columns=ignore, so
// that a misspelt uncertainty column is never dropped silently. CSVOptions
// read other dialects and layouts.
var csvColumns = []string{"x", "y", "sx", "sy", "r", "id", "order"}

const csvIDColumn = 5

// DecodeCSV reads a dataset from eivfit's own CSV. Errors are *Problem
// values whose pointers read "row N, column C".
// Rows are counted against the limits (the server's, for a *Body it read)
// as they are read.
func DecodeCSV(r io.Reader) (*Dataset, error) { return DecodeCSVWith(r, nil) }

// DecodeCSVWith reads a dataset from CSV in the dialect and layout of o
// (nil: eivfit's own CSV). With o.GroupBy set, use DecodeCSVGroups.
func DecodeCSVWith(r io.Reader, o *CSVOptions) (*Dataset, error) {
	groups, err := DecodeCSVGroups(r, o)
	if err != nil {
		return nil, err
	}
	return groups[0].Data, nil
}

// CSVGroup is one group of a CSV split by group_by (the whole file when
// not split).
type CSVGroup struct {
	Name string
	Data *Dataset
}

// DecodeCSVGroups reads a CSV fit dataset, split by o.GroupBy into one
// dataset per value in order of first appearance.
func DecodeCSVGroups(r io.Reader, o *CSVOptions) ([]CSVGroup, error) {
	lim := limitsOf(r)
	body, err := csvBody(r)
	if err != nil {
		return nil, err
	}
	return decodeFitCSV(newRecords(body, o), lim.MaxPoints, o)
}

// decodeCSVPlain and decodeCSVReader read one dataset by the plain scan
// and by encoding/csv: the two paths FuzzCSVDifferential holds together.
func decodeCSVPlain(body []byte, maxRows int, o *CSVOptions) (*Dataset, error) {
	return decodeCSVChunked(body, maxRows, o, 0)
}

// decodeCSVChunked reads one dataset by the plain scan with the parallel
// row reader's chunks of the given size (negative: row by row).
func decodeCSVChunked(body []byte, maxRows int, o *CSVOptions, chunk int) (*Dataset, error) {
	rs := newRecords(body, o)
	rs.std, rs.chunk = nil, chunk
	return firstGroup(decodeFitCSV(rs, maxRows, o))
}

func decodeCSVReader(body []byte, maxRows int, o *CSVOptions) (*Dataset, error) {
	rs := newRecords(body, o)
	rs.useStd()
	return firstGroup(decodeFitCSV(rs, maxRows, o))
}

func firstGroup(g []CSVGroup, err error) (*Dataset, error) {
	if err != nil {
		return nil, err
	}
	return g[0].Data, nil
}

// tooManyRows is the problem for the data row past the limit.
func tooManyRows(line, limit int, what string) *Problem {
	return tooMany(fmt.Sprintf("row %d", line), limit, what, KindTooLarge)
}

// csvID checks an id cell.
func csvID(f []byte, line int) error {
	if !utf8.Valid(f) {
		return Invalid(fmt.Sprintf("row %d, column id", line), "the id is not valid UTF-8 text")
	}
	if len(f) > maxNameBytes {
		return Invalid(fmt.Sprintf("row %d, column id", line), fmt.Sprintf("an id has at most %d bytes, not %d", maxNameBytes, len(f)))
	}
	return nil
}

// csvBody reads a CSV body and drops a UTF-8 byte-order mark.
func csvBody(r io.Reader) ([]byte, error) {
	body, err := readBody(r)
	if err != nil {
		return nil, err
	}
	return bytes.TrimPrefix(body, []byte("\xef\xbb\xbf")), nil
}

// newCSVReader reads eivfit's CSV: '#' comment lines, leading spaces
// trimmed from fields.
func newCSVReader(body []byte) *csv.Reader {
	cr := csv.NewReader(bytes.NewReader(body))
	cr.Comment = '#'
	cr.TrimLeadingSpace = true
	return cr
}

// newCSVDataset makes the columns the header names, with room for n rows.
func newCSVDataset(seen [7]bool, n int) *Dataset {
	d := &Dataset{csv: true, rows: make([]int, 0, n)}
	d.X, d.Y = make([]float64, 0, n), make([]float64, 0, n)
	if seen[2] {
		d.SX = make([]float64, 0, n)
	}
	if seen[3] {
		d.SY = []float64{}
	}
	if seen[4] {
		d.R = []float64{}
	}
	if seen[6] {
		d.Order = make([]float64, 0, n)
	}
	if seen[5] {
		d.ID = make([]string, 0, n)
	}
	return d
}

func (d *Dataset) put(k int, v float64) {
	if c := d.column(k); c != nil {
		*c = append(*c, v)
	}
}

// column is the numeric column of CSV role k (csvColumns: x, y, sx, sy, r,
// id, order); nil for the id.
func (d *Dataset) column(k int) *[]float64 {
	switch k {
	case 0:
		return &d.X
	case 1:
		return &d.Y
	case 2:
		return &d.SX
	case 3:
		return &d.SY
	case 4:
		return &d.R
	case 6:
		return &d.Order
	}
	return nil
}

func (d *Dataset) finishCSV() (*Dataset, error) {
	if d.R != nil && (d.SX == nil || d.SY == nil) {
		return nil, Invalid("row 1, column r", "r (error correlation) needs columns sx and sy")
	}
	return d, nil
}

func fitRoleIndex(role string) int { return indexOf(csvColumns, role) }

// decodeFitCSV reads a fit dataset record by record: the header (and units
// row), then each row's numbers, parsed in place, into its group's
// dataset. A missing or censored cell is refused with every such row
// named, or (missing=skip) the row is left out and listed.
func decodeFitCSV(rs *records, maxRows int, o *CSVOptions) ([]CSVGroup, error) {
	var lay *layout
	var seen [7]bool
	for {
		fields, line, err := rs.next()
		if err == io.EOF {
			return nil, Invalid("row 1", "the CSV body is empty: a header row (x,y[,sx,sy,r,id,order]) and data rows are needed")
		}
		if err != nil {
			return nil, err
		}
		if lay, err = readHeader(fields, line, o, func(k string) int { return indexOf(csvColumns, k) }, fitRoleIndex, "x, y, sx, sy, r, id, order"); err != nil {
			return nil, err
		}
		break
	}
	for _, r := range lay.roles {
		if r >= 0 {
			if seen[r] {
				return nil, Invalid(fmt.Sprintf("row %d, column %s", lay.line, csvColumns[r]), fmt.Sprintf("column %q appears twice", csvColumns[r]))
			}
			seen[r] = true
		}
	}
	if !seen[0] || !seen[1] {
		return nil, Invalid(fmt.Sprintf("row %d", lay.line), "the header must name columns x and y")
	}
	if d := chunkFitRows(rs, lay, seen, maxRows, o); d != nil {
		return finishFitCSV([]CSVGroup{{Data: d}}, lay, nil)
	}
	var d *Dataset
	if lay.group < 0 {
		d = newCSVDataset(seen, min(rs.linesLeft(), capLimit(maxRows)))
	}
	return fitRows(rs, lay, seen, maxRows, o, d)
}

// fitRows reads the data rows left in rs row by row into d (nil when the
// rows are grouped), which holds the points of the rows before them: the
// reader resumed where the streaming reader met a doubtful row
// (csv_stream.go) continues as if it had read those rows itself.
func fitRows(rs *records, lay *layout, seen [7]bool, maxRows int, o *CSVOptions, d *Dataset) ([]CSVGroup, error) {
	dec := o.decimal()
	skip := o.skip()
	var missing missingRows
	var skipped map[*Dataset][]SkippedRow
	groups := []CSVGroup{}
	index := map[string]int{}
	points := 0
	if d != nil {
		groups = append(groups, CSVGroup{Data: d})
		points = d.Len()
	}
	first := points == 0
	var vals [7]float64
	for {
		fields, line, err := rs.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		if first && o != nil && o.UnitsRow {
			first = false
			if err := lay.readUnits(fields, line); err != nil {
				return nil, err
			}
			continue
		}
		if maxRows > 0 && points >= maxRows {
			return nil, tooManyRows(line, maxRows, "points per dataset")
		}
		if len(fields) != len(lay.roles) {
			return nil, Invalid(fmt.Sprintf("row %d, column 1", line), "this row has a different number of fields from the header")
		}
		if lay.group >= 0 {
			g := bytes.TrimSpace(fields[lay.group])
			if reason, isMissing := missingCell(g, dec); isMissing && len(g) == 0 || !utf8.Valid(g) || len(g) > maxNameBytes {
				if reason == "" {
					reason = "the group is not UTF-8 text of at most 256 bytes"
				}
				return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(lay.names[lay.group])), "the group is "+reason+": every row needs one")
			}
			i, ok := index[string(g)]
			if !ok {
				i = len(groups)
				index[string(g)] = i
				groups = append(groups, CSVGroup{Name: string(g), Data: newCSVDataset(seen, 0)})
			}
			d = groups[i].Data
		}
		var id []byte
		bad := -1
		badReason := ""
		for j, f := range fields {
			k := lay.roles[j]
			switch {
			case k < 0:
				continue
			case k == csvIDColumn:
				id = bytes.TrimLeftFunc(f, unicode.IsSpace)
				if err := csvID(id, line); err != nil {
					return nil, err
				}
				continue
			}
			v, ok := cellFloat(bytes.TrimSpace(f), dec)
			if !ok {
				reason, isMissing := missingCell(f, dec)
				if !isMissing {
					if first && looksLikeUnits(f) {
						return nil, unitsRowHint(line, o, lay.names[j], f)
					}
					return nil, Invalid(fmt.Sprintf("row %d, column %s", line, csvColumns[k]), cellError(bytes.TrimSpace(f), o).Error())
				}
				if bad < 0 {
					bad, badReason = j, reason
				}
				continue
			}
			vals[k] = v
		}
		first = false
		if bad >= 0 {
			if !skip {
				if o.plain() && len(bytes.TrimSpace(fields[bad])) == 0 && lay.group < 0 {
					badReason = "the cell is empty; every row needs a number in this column"
				}
				missing.add(line, csvColumns[lay.roles[bad]], badReason)
				continue
			}
			if skipped == nil {
				skipped = map[*Dataset][]SkippedRow{}
			}
			skipped[d] = append(skipped[d], SkippedRow{Row: line, Column: lay.names[bad], Value: Truncate(strings.TrimSpace(string(fields[bad]))), Reason: badReason})
			continue
		}
		for k, s := range seen {
			if s && k != csvIDColumn {
				d.put(k, vals[k])
			}
		}
		if seen[csvIDColumn] {
			d.ID = append(d.ID, string(id))
		}
		d.rows = append(d.rows, line)
		points++
	}
	if err := missing.problem(o); err != nil {
		if missing.n == 1 && o.plain() {
			e := missing.errs[0]
			return nil, Invalid(e.Pointer, e.Detail)
		}
		return nil, err
	}
	if len(groups) == 0 {
		return nil, Invalid(fmt.Sprintf("row %d", lay.line), "the file has a header but no data rows")
	}
	return finishFitCSV(groups, lay, skipped)
}

// finishFitCSV checks each group's columns and notes how the file was read.
func finishFitCSV(groups []CSVGroup, lay *layout, skipped map[*Dataset][]SkippedRow) ([]CSVGroup, error) {
	cols := lay.columns(csvColumns)
	for i := range groups {
		d := groups[i].Data
		if _, err := d.finishCSV(); err != nil {
			return nil, err
		}
		in := &InputOut{Group: groups[i].Name, Columns: cols, IgnoredColumns: lay.ignored, SkippedRows: skipped[d]}
		if !in.empty() {
			d.input = in
		}
		d.xUnit, d.yUnit = lay.unitOf(0), lay.unitOf(1)
	}
	return groups, nil
}

// parseCell reads a CSV cell or query value: a plain decimal (parseFloat).
func parseCell(f string) (float64, error) {
	b := []byte(strings.TrimSpace(f))
	v, ok := parseFloat(b)
	if !ok {
		return 0, numberError(b)
	}
	return v, nil
}

func csvReadError(err error) error {
	var mbe *http.MaxBytesError
	if errors.As(err, &mbe) {
		return mbe // the handler answers 413
	}
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		detail := pe.Err.Error()
		if errors.Is(pe.Err, csv.ErrFieldCount) {
			detail = "this row has a different number of fields from the header"
		}
		return Invalid(fmt.Sprintf("row %d, column %d", pe.Line, pe.Column), detail)
	}
	return Invalid("body", "the CSV body could not be read: "+err.Error())
}

func indexOf(s []string, v string) int {
	for i, x := range s {
		if x == v {
			return i
		}
	}
	return -1
}
