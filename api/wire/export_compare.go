package wire

import (
	"bytes"
	"fmt"
	"io"
	"slices"
	"strings"
	"unicode/utf8"
)

// compareRoles are the roles of a comparison's columns.
// run (or a header named time) labels each row's replicates with their
// run or time: an x and a y with equal labels are one pair.
var compareRoles = []string{"id", "order", "x", "y", "sx", "sy", "method", "value", "run"}

const (
	cmpID = iota
	cmpOrder
	cmpX
	cmpY
	cmpSX
	cmpSY
	cmpMethod
	cmpValue
	cmpRun
)

// CompareGroup is one group of a comparison CSV split by group_by (the
// whole file when not split).
type CompareGroup struct {
	Name string
	Req  *CompareRequest
}

// DecodeCompareCSVWith reads a comparison study in the dialect and layout
// of o (nil: eivfit's own wide CSV). Rows with the same id are replicates
// of one sample: wide (x1, x2, y1, y2), long (id, x, y repeated), or long
// by method (id, method, value with o.XMethod and o.YMethod).
func DecodeCompareCSVWith(r io.Reader, o *CSVOptions) (*CompareRequest, error) {
	g, err := DecodeCompareCSVGroups(r, o)
	if err != nil {
		return nil, err
	}
	return g[0].Req, nil
}

// sampleAcc gathers the rows of one sample.
type sampleAcc struct {
	s    Sample
	row  int // first row
	rows int
}

// compareAcc gathers one group's samples.
type compareAcc struct {
	samples []*sampleAcc
	byID    map[string]*sampleAcc
	skipped []SkippedRow
	rows    int
}

// DecodeCompareCSVGroups reads a comparison CSV split by o.GroupBy into
// one study per value, in order of first appearance.
func DecodeCompareCSVGroups(r io.Reader, o *CSVOptions) ([]CompareGroup, error) {
	lim := limitsOf(r)
	body, err := csvBody(r)
	if err != nil {
		return nil, err
	}
	rs := newRecords(body, o)
	if rs.std == nil {
		rs.useStd() // the comparison reads few rows: one path
	}
	long := o != nil && o.XMethod != ""
	known := func(key string) int {
		switch {
		case key == "method" && long:
			return cmpMethod
		case key == "value" && long:
			return cmpValue
		case key == "method" || key == "value":
			return -1
		case replicateColumn.MatchString(key):
			return indexOf(compareRoles, replicateColumn.FindStringSubmatch(key)[1])
		case key == "time":
			return cmpRun
		}
		return indexOf(compareRoles, key)
	}
	roleIndex := func(role string) int { return indexOf(compareRoles, role) }
	fields, line, err := rs.next()
	if err == io.EOF {
		return nil, Invalid("row 1", "the CSV body is empty: a header (id,x1,x2,y1,y2) and one row per sample are needed")
	}
	if err != nil {
		return nil, err
	}
	what := "id, order, x or x1, x2, …, y or y1, y2, …, sx, sy, run or time"
	if long {
		what = "id, method, value, order, sx, sy, run or time"
	}
	lay, err := readHeader(fields, line, o, known, roleIndex, what)
	if err != nil {
		return nil, err
	}
	var count [9]int
	for j, k := range lay.roles {
		if k < 0 {
			continue
		}
		count[k]++
		if (k == cmpX || k == cmpY) && count[k] > maxReplicates {
			return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(lay.names[j])), fmt.Sprintf("at most %d replicate columns per method", maxReplicates))
		}
		if k != cmpX && k != cmpY && count[k] > 1 {
			return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(lay.names[j])), fmt.Sprintf("a second %s column", compareRoles[k]))
		}
	}
	switch {
	case long && (count[cmpMethod] == 0 || count[cmpValue] == 0 || count[cmpID] == 0):
		return nil, Invalid(fmt.Sprintf("row %d", line), "x_method and y_method need columns id, method and value (map others with columns=method:NAME,value:NAME)")
	case long && (count[cmpX] > 0 || count[cmpY] > 0):
		return nil, Invalid(fmt.Sprintf("row %d", line), "with x_method and y_method the values come from the value column: no x or y columns")
	case !long && (count[cmpX] == 0 || count[cmpY] == 0):
		return nil, Invalid(fmt.Sprintf("row %d", line), "the header must name x (or x1, x2, …) and y (or y1, y2, …) columns")
	case count[cmpRun] > 0 && (count[cmpX] > 1 || count[cmpY] > 1):
		return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(lay.names[slices.Index(lay.roles, cmpRun)])),
			"a run column labels one x and one y per row: give the replicates as rows (id, x, y, run repeated) or as id, method, value, run")
	}
	dec, skip := o.decimal(), o.skip()
	runColumn := ""
	if j := slices.Index(lay.roles, cmpRun); j >= 0 {
		runColumn = lay.names[j]
	}
	var missing missingRows
	accs := []*compareAcc{}
	names := []string{}
	index := map[string]int{}
	acc := func(g string) *compareAcc {
		i, ok := index[g]
		if !ok {
			i = len(accs)
			index[g] = i
			accs = append(accs, &compareAcc{byID: map[string]*sampleAcc{}})
			names = append(names, g)
		}
		return accs[i]
	}
	first, rows := true, 0
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
		if lim.MaxPoints > 0 && rows >= 2*maxReplicates*lim.MaxPoints {
			return nil, tooManyRows(line, 2*maxReplicates*lim.MaxPoints, "rows")
		}
		rows++
		if len(fields) != len(lay.roles) {
			return nil, Invalid(fmt.Sprintf("row %d, column 1", line), "this row has a different number of fields from the header")
		}
		group := ""
		if lay.group >= 0 {
			g := bytes.TrimSpace(fields[lay.group])
			if len(g) == 0 || !utf8.Valid(g) || len(g) > maxNameBytes {
				return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(lay.names[lay.group])), "every row needs a group: UTF-8 text of at most 256 bytes")
			}
			group = string(g)
		}
		a := acc(group)
		var s Sample
		var method, run string
		bad, badReason := -1, ""
		for j, f := range fields {
			k := lay.roles[j]
			if k < 0 {
				continue
			}
			f = bytes.TrimSpace(f)
			switch k {
			case cmpID:
				if err := csvID(f, line); err != nil {
					return nil, err
				}
				s.ID = string(f)
				continue
			case cmpMethod:
				method = string(f)
				continue
			case cmpRun:
				if len(f) == 0 || !utf8.Valid(f) || len(f) > maxNameBytes {
					return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(lay.names[j])), "every row needs its run or time: UTF-8 text of at most 256 bytes")
				}
				run = string(f)
				continue
			}
			if len(f) == 0 && (k == cmpX || k == cmpY) {
				continue // a wide row may lack a replicate; a sample without any is named below
			}
			if len(f) == 0 && !long && (k == cmpOrder || k == cmpSX || k == cmpSY) {
				continue // optional per sample
			}
			v, ok := cellFloat(f, dec)
			if !ok {
				reason, isMissing := missingCell(f, dec)
				if !isMissing {
					if first && looksLikeUnits(f) {
						return nil, unitsRowHint(line, o, lay.names[j], f)
					}
					return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(lay.names[j])), cellError(f, o).Error())
				}
				if bad < 0 {
					bad, badReason = j, reason
				}
				continue
			}
			switch k {
			case cmpX:
				s.X = append(s.X, v)
			case cmpY:
				s.Y = append(s.Y, v)
			case cmpValue:
				s.X = append(s.X, v) // placed by method below
			case cmpOrder:
				s.Order = &v
			case cmpSX:
				s.SX = &v
			case cmpSY:
				s.SY = &v
			}
		}
		first = false
		if long && bad < 0 {
			switch method {
			case o.XMethod:
			case o.YMethod:
				s.X, s.Y = nil, s.X
			default:
				return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(lay.names[slices.Index(lay.roles, cmpMethod)])),
					fmt.Sprintf("method %q is neither x_method (%s) nor y_method (%s)", Truncate(method), Truncate(o.XMethod), Truncate(o.YMethod)))
			}
		}
		if bad >= 0 {
			if !skip {
				missing.add(line, lay.names[bad], badReason)
				continue
			}
			a.skipped = append(a.skipped, SkippedRow{Row: line, Column: lay.names[bad], Value: Truncate(string(bytes.TrimSpace(fields[bad]))), Reason: badReason})
			continue
		}
		if !long && (len(s.X) == 0 || len(s.Y) == 0) {
			c := "x"
			if len(s.X) > 0 {
				c = "y"
			}
			header := lay.names[slices.Index(lay.roles, map[string]int{"x": cmpX, "y": cmpY}[c])]
			if skip {
				a.skipped = append(a.skipped, SkippedRow{Row: line, Column: header, Reason: fmt.Sprintf("no %s value (blank cells)", c)})
				continue
			}
			missing.add(line, c, fmt.Sprintf("every sample needs at least one %s value", c))
			continue
		}
		if count[cmpRun] > 0 {
			s.Runs = &Runs{X: runLabels(run, len(s.X)), Y: runLabels(run, len(s.Y))}
		}
		if err := a.add(s, line, count[cmpID] > 0, runColumn); err != nil {
			return nil, err
		}
		if lim.MaxPoints > 0 && len(a.samples) > lim.MaxPoints {
			return nil, tooManyRows(line, lim.MaxPoints, "samples")
		}
	}
	if err := missing.problem(o); err != nil {
		if missing.n == 1 {
			e := missing.errs[0]
			return nil, Invalid(e.Pointer, e.Detail+"; "+missingOption(o)+" would leave the row out and list it")
		}
		return nil, err
	}
	if len(accs) == 0 {
		return nil, Invalid(fmt.Sprintf("row %d", lay.line), "the file has a header but no data rows")
	}
	unit, err := compareUnit(lay)
	if err != nil {
		return nil, err
	}
	cols := lay.columns(compareRoles)
	out := make([]CompareGroup, len(accs))
	for i, a := range accs {
		req, err := a.request(o, long)
		if err != nil {
			return nil, err
		}
		req.unit = unit
		in := &InputOut{Group: names[i], Columns: cols, IgnoredColumns: lay.ignored, SkippedRows: a.skipped, Replicates: a.replicates()}
		if !in.empty() {
			req.input = in
		}
		out[i] = CompareGroup{Name: names[i], Req: req}
	}
	return out, nil
}

// add merges a row into its sample: rows with the same id are replicates.
func (a *compareAcc) add(s Sample, line int, hasID bool, runColumn string) error {
	a.rows++
	if !hasID || s.ID == "" {
		a.samples = append(a.samples, &sampleAcc{s: s, row: line, rows: 1})
		return nil
	}
	p, ok := a.byID[s.ID]
	if !ok {
		p = &sampleAcc{s: s, row: line, rows: 1}
		a.byID[s.ID] = p
		a.samples = append(a.samples, p)
		return nil
	}
	p.rows++
	if s.Runs != nil {
		for _, m := range []struct {
			name      string
			runs, new []string
		}{{"x", p.s.Runs.X, s.Runs.X}, {"y", p.s.Runs.Y, s.Runs.Y}} {
			for _, r := range m.new {
				if slices.Contains(m.runs, r) {
					return Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(runColumn)), fmt.Sprintf("sample %q has a %s value for run %q already: each replicate of a method needs its own run", Truncate(s.ID), m.name, Truncate(r)))
				}
			}
		}
		p.s.Runs.X = append(p.s.Runs.X, s.Runs.X...)
		p.s.Runs.Y = append(p.s.Runs.Y, s.Runs.Y...)
	}
	p.s.X = append(p.s.X, s.X...)
	p.s.Y = append(p.s.Y, s.Y...)
	for _, c := range []struct {
		name      string
		into, add **float64
	}{{"sx", &p.s.SX, &s.SX}, {"sy", &p.s.SY, &s.SY}, {"order", &p.s.Order, &s.Order}} {
		switch {
		case *c.add == nil:
		case *c.into == nil:
			*c.into = *c.add
		case c.name != "order" && **c.into != **c.add:
			return Invalid(fmt.Sprintf("row %d, column %s", line, c.name), fmt.Sprintf(
				"sample %q has %s %v at row %d and %v here: one value per sample", Truncate(s.ID), c.name, **c.into, p.row, **c.add))
		}
	}
	if len(p.s.X) > maxReplicates || len(p.s.Y) > maxReplicates {
		return Invalid(fmt.Sprintf("row %d, column id", line), fmt.Sprintf("sample %q has more than %d replicates of a method", Truncate(s.ID), maxReplicates))
	}
	return nil
}

// runLabels is a row's run label once per value it carries (nil for none).
func runLabels(run string, n int) []string {
	if n == 0 {
		return nil
	}
	out := make([]string, n)
	for i := range out {
		out[i] = run
	}
	return out
}

// request makes the group's study; a sample left without x or y (its
// other rows skipped, or a method missing in long form) is an error.
func (a *compareAcc) request(o *CSVOptions, long bool) (*CompareRequest, error) {
	req := &CompareRequest{csv: true}
	for _, p := range a.samples {
		if len(p.s.X) == 0 || len(p.s.Y) == 0 {
			m, c := "x", "x_method"
			if len(p.s.X) > 0 {
				m, c = "y", "y_method"
			}
			detail := fmt.Sprintf("sample %q has no %s value", Truncate(p.s.ID), m)
			if long {
				detail += fmt.Sprintf(" (no row with method %s)", Truncate(o.methodOf(c)))
			}
			return nil, Invalid(fmt.Sprintf("row %d, column id", p.row), detail)
		}
		req.Samples = append(req.Samples, p.s)
		req.rows = append(req.rows, p.row)
	}
	return req, nil
}

func (o *CSVOptions) methodOf(c string) string {
	if c == "x_method" {
		return o.XMethod
	}
	return o.YMethod
}

// replicates counts samples by replicates per method; nil when every
// sample is one row (the wide form, whose replicates are its columns).
func (a *compareAcc) replicates() *ReplicatesOut {
	hx, hy := map[int]int{}, map[int]int{}
	multi := false
	for _, p := range a.samples {
		hx[len(p.s.X)]++
		hy[len(p.s.Y)]++
		multi = multi || p.rows > 1
	}
	if !multi {
		return nil
	}
	hist := func(h map[int]int) []ReplicateCount {
		var out []ReplicateCount
		for k, n := range h {
			out = append(out, ReplicateCount{Replicates: k, Samples: n})
		}
		slices.SortFunc(out, func(a, b ReplicateCount) int { return a.Replicates - b.Replicates })
		return out
	}
	return &ReplicatesOut{Rows: a.rows, Samples: len(a.samples), X: hist(hx), Y: hist(hy)}
}

// compareUnit is the unit the header or units row gives x and y: one unit,
// since a method comparison compares like with like.
func compareUnit(lay *layout) (string, error) {
	ux, uy := lay.unitOf(cmpX), lay.unitOf(cmpY)
	if ux == "" {
		ux = lay.unitOf(cmpValue)
	}
	switch {
	case ux != "" && uy != "" && !strings.EqualFold(ux, uy):
		return "", Invalid(fmt.Sprintf("row %d", lay.line), fmt.Sprintf(
			"x is in %s and y in %s: a method comparison needs both methods in one unit (fit them with /v1/fit, which leaves out the bias)", Truncate(ux), Truncate(uy)))
	case ux != "":
		return ux, nil
	}
	return uy, nil
}
