package wire

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"
)

// CSV input: a header row naming the columns, then one row per point.
// Columns (matched case-insensitively, in any order): x and y required;
// sx, sy (standard uncertainties, 1 SD), r (error correlation), id and
// order optional. Lines starting with '#' are comments; a UTF-8 byte-order
// mark is skipped. Any other column is an error, so that a misspelt
// uncertainty column is never dropped silently.
var csvColumns = []string{"x", "y", "sx", "sy", "r", "id", "order"}

// DecodeCSV reads a dataset from CSV. Errors are *Problem values whose
// pointers read "row N, column C".
// Rows are counted against the limits (the server's, for a *Body it read)
// as they are read.
func DecodeCSV(r io.Reader) (*Dataset, error) {
	lim := limitsOf(r)
	body, err := csvBody(r)
	if err != nil {
		return nil, err
	}
	if bytes.IndexByte(body, '"') < 0 {
		return decodeCSVPlain(body, lim.MaxPoints)
	}
	return decodeCSVReader(body, lim.MaxPoints)
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

// decodeCSVReader is the general path, through encoding/csv (quoted fields).
func decodeCSVReader(body []byte, maxRows int) (*Dataset, error) {
	cr := newCSVReader(body)
	cr.ReuseRecord = true

	header, err := cr.Read()
	if err == io.EOF {
		return nil, Invalid("row 1", "the CSV body is empty: a header row (x,y[,sx,sy,r,id,order]) and data rows are needed")
	}
	if err != nil {
		return nil, csvReadError(err)
	}
	line, _ := cr.FieldPos(0)
	cols, seen, err := csvHeader(header, line)
	if err != nil {
		return nil, err
	}
	d := newCSVDataset(seen, 0)
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvReadError(err)
		}
		row, _ := cr.FieldPos(0)
		if maxRows > 0 && d.Len() >= maxRows {
			return nil, tooManyRows(row, maxRows, "points per dataset")
		}
		if err := d.addRecord(rec, cols, row); err != nil {
			return nil, err
		}
	}
	return d.finishCSV()
}

// csvHeader maps header fields to column ids (indices into csvColumns).
func csvHeader(header []string, line int) ([]int, [7]bool, error) {
	cols := make([]int, len(header))
	var seen [7]bool
	for j, h := range header {
		if !utf8.ValidString(h) {
			return nil, seen, Invalid(fmt.Sprintf("row %d, column %d", line, j+1), "the header is not valid UTF-8 text")
		}
		name := strings.ToLower(strings.TrimSpace(h))
		k := indexOf(csvColumns, name)
		if k < 0 {
			if len(header) == 1 && strings.Contains(h, ";") {
				return nil, seen, Invalid(fmt.Sprintf("row %d", line),
					"the header looks semicolon-separated; eivfit reads comma-separated values with '.' as the decimal mark")
			}
			if _, perr := strconv.ParseFloat(name, 64); perr == nil {
				return nil, seen, Invalid(fmt.Sprintf("row %d", line),
					"the first row must be a header naming the columns, e.g. x,y,sx,sy")
			}
			return nil, seen, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(h)), fmt.Sprintf(
				"unknown column %q (known: x, y, sx, sy, r, id, order)", Truncate(h)))
		}
		if seen[k] {
			return nil, seen, Invalid(fmt.Sprintf("row %d, column %s", line, name), fmt.Sprintf("column %q appears twice", name))
		}
		seen[k] = true
		cols[j] = k
	}
	if !seen[0] || !seen[1] {
		return nil, seen, Invalid(fmt.Sprintf("row %d", line), "the header must name columns x and y")
	}
	return cols, seen, nil
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
	if seen[5] {
		d.ID = []string{}
	}
	if seen[6] {
		d.Order = make([]float64, 0, n)
	}
	if seen[5] {
		d.ID = make([]string, 0, n)
	}
	return d
}

// addRecord appends one CSV record.
func (d *Dataset) addRecord(rec []string, cols []int, row int) error {
	for j, f := range rec {
		k := cols[j]
		if k == 5 {
			if err := csvID([]byte(f), row); err != nil {
				return err
			}
			d.ID = append(d.ID, strings.Clone(f))
			continue
		}
		v, err := parseCell(f)
		if err != nil {
			return Invalid(fmt.Sprintf("row %d, column %s", row, csvColumns[k]), err.Error())
		}
		d.put(k, v)
	}
	d.rows = append(d.rows, row)
	return nil
}

func (d *Dataset) put(k int, v float64) {
	switch k {
	case 0:
		d.X = append(d.X, v)
	case 1:
		d.Y = append(d.Y, v)
	case 2:
		d.SX = append(d.SX, v)
	case 3:
		d.SY = append(d.SY, v)
	case 4:
		d.R = append(d.R, v)
	case 6:
		d.Order = append(d.Order, v)
	}
}

func (d *Dataset) finishCSV() (*Dataset, error) {
	if d.R != nil && (d.SX == nil || d.SY == nil) {
		return nil, Invalid("row 1, column r", "r (error correlation) needs columns sx and sy")
	}
	return d, nil
}

// decodeCSVPlain is the fast path for CSV without quotes: one scan of the
// body, numbers parsed in place, the columns sized once from the line count.
func decodeCSVPlain(body []byte, maxRows int) (*Dataset, error) {
	var d *Dataset
	var cols []int
	line := 0
	var fields [][]byte
	var strs []string
	for len(body) > 0 {
		line++
		var l []byte
		if i := bytes.IndexByte(body, '\n'); i >= 0 {
			l, body = body[:i], body[i+1:]
		} else {
			l, body = body, nil
		}
		l = bytes.TrimSuffix(l, []byte{'\r'})
		if len(l) == 0 || l[0] == '#' {
			continue
		}
		fields = fields[:0]
		for {
			i := bytes.IndexByte(l, ',')
			if i < 0 {
				fields = append(fields, l)
				break
			}
			fields = append(fields, l[:i])
			l = l[i+1:]
		}
		if d == nil {
			strs = strs[:0]
			for _, f := range fields {
				strs = append(strs, string(bytes.TrimLeftFunc(f, unicode.IsSpace)))
			}
			var seen [7]bool
			var err error
			if cols, seen, err = csvHeader(strs, line); err != nil {
				return nil, err
			}
			d = newCSVDataset(seen, min(bytes.Count(body, []byte{'\n'})+1, capLimit(maxRows)))
			continue
		}
		if maxRows > 0 && d.Len() >= maxRows {
			return nil, tooManyRows(line, maxRows, "points per dataset")
		}
		if len(fields) != len(cols) {
			return nil, Invalid(fmt.Sprintf("row %d, column 1", line), "this row has a different number of fields from the header")
		}
		for j, f := range fields {
			k := cols[j]
			if k == 5 {
				f = bytes.TrimLeftFunc(f, unicode.IsSpace)
				if err := csvID(f, line); err != nil {
					return nil, err
				}
				d.ID = append(d.ID, string(f))
				continue
			}
			v, ok := parseFloat(bytes.TrimSpace(f))
			if !ok {
				var err error
				v, err = parseCell(string(f)) // the slow path names the fault
				if err != nil {
					return nil, Invalid(fmt.Sprintf("row %d, column %s", line, csvColumns[k]), err.Error())
				}
			}
			d.put(k, v)
		}
		d.rows = append(d.rows, line)
	}
	if d == nil {
		return nil, Invalid("row 1", "the CSV body is empty: a header row (x,y[,sx,sy,r,id,order]) and data rows are needed")
	}
	return d.finishCSV()
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
