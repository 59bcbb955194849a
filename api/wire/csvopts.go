package wire

import (
	"fmt"
	"io"
	"net/url"
	"slices"
	"strings"
)

// CSVOptions say how to read an instrument's or a LIMS's export. The zero
// value (or nil) is eivfit's own CSV: comma-separated, '.' as the decimal
// mark, eivfit's column names, every other column, a units row and a
// missing or censored cell refused.
//
// Option values themselves (decision levels, at, lambda, …) always use a
// point as the decimal mark, whatever Decimal says about the file.
type CSVOptions struct {
	// Columns maps a role (x, y, sx, sy, r, id, order, method, value, run) to
	// the header that carries it, matched like every header: ignoring
	// case, surrounding spaces and a trailing unit in brackets. In a
	// method comparison x and y may be mapped to several columns
	// (replicates).
	Columns []ColumnMap `json:"columns,omitempty"`
	// ExtraColumns is "refuse" (default: a column eivfit does not read is
	// an error) or "ignore" (listed in the answer's input.ignored_columns).
	ExtraColumns string `json:"extra_columns,omitempty"`
	// UnitsRow reads the row after the header as the columns' units.
	UnitsRow bool `json:"units_row,omitempty"`
	// Delimiter is "comma" (default), "semicolon" or "tab".
	Delimiter string `json:"delimiter,omitempty"`
	// Decimal is "point" (default) or "comma" (not with delimiter=comma).
	Decimal string `json:"decimal,omitempty"`
	// Missing is "refuse" (default) or "skip": drop a row with a blank,
	// missing (NA, n.d.) or censored (<0.5, >100) cell and list it in the
	// answer's input.skipped_rows.
	Missing string `json:"missing,omitempty"`
	// XMethod and YMethod name the two methods of a long-format
	// comparison (columns id, method, value).
	XMethod string `json:"x_method,omitempty"`
	YMethod string `json:"y_method,omitempty"`
	// GroupBy names a column that splits the file into one study per
	// value (analyte), answered as a batch.
	GroupBy string `json:"group_by,omitempty"`
	// Groups holds per-group options: query parameters written
	// name[group]=value (decision_levels[glucose]=3.9,7), which replace the
	// shared option of that name for that group.
	Groups map[string]url.Values `json:"-"`

	flags bool // given as command-line flags: errors name them
}

// ColumnMap is one role mapped to a header.
type ColumnMap struct {
	Role   string `json:"role"`
	Header string `json:"header"`
}

// CSVQueryParameters are the query parameters (and, spelt with '-', the
// command-line flags) that CSVOptions take.
var CSVQueryParameters = []string{"columns", "extra_columns", "units_row", "delimiter", "decimal", "missing",
	"x_method", "y_method", "group_by"}

// csvRoles are the roles a column may be mapped to.
var csvRoles = []string{"x", "y", "sx", "sy", "r", "id", "order", "method", "value", "run"}

// csvOptionNamer names an option where it was given: "query parameter
// columns" or "--columns".
type csvOptionNamer func(name string) string

// QueryName names a query parameter.
func QueryName(name string) string { return "query parameter " + name }

// FlagName names a command-line flag.
func FlagName(name string) string { return "--" + strings.ReplaceAll(name, "_", "-") }

// TakeCSVOptions takes the export-reading options out of the query and
// returns them with the rest of the query, for the endpoint's own options.
// Per-group options (name[group]) need group_by.
func TakeCSVOptions(q url.Values) (*CSVOptions, url.Values, error) {
	rest := url.Values{}
	mine := url.Values{}
	groups := map[string]url.Values{}
	for k, v := range q {
		switch {
		case slices.Contains(CSVQueryParameters, k):
			mine[k] = v
		case strings.HasSuffix(k, "]") && strings.Contains(k, "["):
			i := strings.IndexByte(k, '[')
			name, group := k[:i], k[i+1:len(k)-1]
			if name == "" || group == "" || slices.Contains(CSVQueryParameters, name) {
				return nil, nil, Invalid(QueryName(k), fmt.Sprintf("%q is not a per-group option: write name[group]=value, e.g. decision_levels[glucose]=3.9,7", Truncate(k)))
			}
			if groups[group] == nil {
				groups[group] = url.Values{}
			}
			groups[group][name] = v
		default:
			rest[k] = v
		}
	}
	o, err := ParseCSVOptions(mine, QueryName)
	if err != nil {
		return nil, nil, err
	}
	if len(groups) > 0 {
		if o.GroupBy == "" {
			for g := range groups {
				return nil, nil, Invalid(QueryName("group_by"), fmt.Sprintf("options for group %q need group_by naming the column that splits the file", Truncate(g)))
			}
		}
		o.Groups = groups
	}
	return o, rest, nil
}

// CSVOptionsFromFlags reads the export options given as command-line
// flags, gathered under their query names; errors name the flags.
func CSVOptionsFromFlags(v url.Values) (*CSVOptions, error) {
	o, err := ParseCSVOptions(v, FlagName)
	if o != nil {
		o.flags = true
	}
	return o, err
}

// ParseCSVOptions reads the export options from v (query parameters, or
// flags gathered under their query names); name says where each was given.
func ParseCSVOptions(v url.Values, name csvOptionNamer) (*CSVOptions, error) {
	o := &CSVOptions{}
	one := func(k string) (string, error) {
		vs := v[k]
		if len(vs) > 1 {
			return "", Invalid(name(k), fmt.Sprintf("%s is given %d times; give it once", name(k), len(vs)))
		}
		if len(vs) == 0 {
			return "", nil
		}
		if err := nameLength(name(k), vs[0]); err != nil {
			return "", err
		}
		return strings.TrimSpace(vs[0]), nil
	}
	choice := func(k string, dst *string, allowed ...string) error {
		s, err := one(k)
		if err != nil || s == "" {
			return err
		}
		if !slices.Contains(allowed, s) {
			return Invalid(name(k), fmt.Sprintf("%q is not one of %s", Truncate(s), strings.Join(allowed, ", ")))
		}
		*dst = s
		return nil
	}
	for _, c := range []struct {
		k       string
		dst     *string
		allowed []string
	}{
		{"extra_columns", &o.ExtraColumns, []string{"refuse", "ignore"}},
		{"delimiter", &o.Delimiter, []string{"comma", "semicolon", "tab"}},
		{"decimal", &o.Decimal, []string{"point", "comma"}},
		{"missing", &o.Missing, []string{"refuse", "skip"}},
	} {
		if err := choice(c.k, c.dst, c.allowed...); err != nil {
			return nil, err
		}
	}
	var units string
	if err := choice("units_row", &units, "true", "false"); err != nil {
		return nil, err
	}
	o.UnitsRow = units == "true"
	if o.Decimal == "comma" && o.comma() == ',' {
		return nil, Invalid(name("decimal"), "decimal=comma needs delimiter=semicolon or delimiter=tab: with commas between columns a decimal comma cannot be told from a column break")
	}
	var err error
	for _, k := range []string{"x_method", "y_method", "group_by"} {
		s, err := one(k)
		if err != nil {
			return nil, err
		}
		switch k {
		case "x_method":
			o.XMethod = s
		case "y_method":
			o.YMethod = s
		case "group_by":
			o.GroupBy = s
		}
	}
	if (o.XMethod == "") != (o.YMethod == "") {
		return nil, Invalid(name("x_method"), "give both x_method and y_method (the methods' names in the method column)")
	}
	if o.XMethod != "" && o.XMethod == o.YMethod {
		return nil, Invalid(name("y_method"), "x_method and y_method must name two different methods")
	}
	cols, err := one("columns")
	if err != nil {
		return nil, err
	}
	if o.Columns, err = parseColumns(cols, name("columns")); err != nil {
		return nil, err
	}
	return o, o.check(name)
}

// parseColumns reads role:header pairs separated by commas.
func parseColumns(s, where string) ([]ColumnMap, error) {
	var out []ColumnMap
	for _, pair := range SplitList(s) {
		role, header, ok := strings.Cut(pair, ":")
		role, header = strings.ToLower(strings.TrimSpace(role)), strings.TrimSpace(header)
		if !ok || header == "" {
			return nil, Invalid(where, fmt.Sprintf("%q is not role:header (e.g. x:Reference,y:Candidate,id:SampleID)", Truncate(pair)))
		}
		out = append(out, ColumnMap{Role: role, Header: header})
	}
	return out, nil
}

// check refuses an unknown role, a header mapped twice, and a single-valued
// role given twice.
func (o *CSVOptions) check(name csvOptionNamer) error {
	seen := map[string]string{}
	roles := map[string]int{}
	for _, c := range o.Columns {
		if !slices.Contains(csvRoles, c.Role) {
			return Invalid(name("columns"), fmt.Sprintf("unknown role %q (roles: %s)", Truncate(c.Role), strings.Join(csvRoles, ", ")))
		}
		h, _ := headerKey(c.Header)
		if r, ok := seen[h]; ok {
			return Invalid(name("columns"), fmt.Sprintf("column %q is mapped twice (to %s and %s)", Truncate(c.Header), r, c.Role))
		}
		seen[h] = c.Role
		roles[c.Role]++
		if roles[c.Role] > 1 && c.Role != "x" && c.Role != "y" {
			return Invalid(name("columns"), fmt.Sprintf("role %s is mapped twice", c.Role))
		}
	}
	return nil
}

// comma is the delimiter byte.
func (o *CSVOptions) comma() byte {
	if o == nil {
		return ','
	}
	switch o.Delimiter {
	case "semicolon":
		return ';'
	case "tab":
		return '\t'
	}
	return ','
}

// decimal is the decimal mark.
func (o *CSVOptions) decimal() byte {
	if o != nil && o.Decimal == "comma" {
		return ','
	}
	return '.'
}

// skip says whether rows with missing or censored cells are dropped.
func (o *CSVOptions) skip() bool { return o != nil && o.Missing == "skip" }

// ignore says whether unknown columns are ignored.
func (o *CSVOptions) ignore() bool { return o != nil && o.ExtraColumns == "ignore" }

// plain says whether the options are eivfit's own CSV in every respect but
// the dialect, so that the fast path may read it.
func (o *CSVOptions) plain() bool {
	return o == nil || (len(o.Columns) == 0 && !o.UnitsRow && o.Missing != "skip" && o.ExtraColumns != "ignore" && o.GroupBy == "")
}

// Query gives the options back as query parameters (the command line
// gathers its flags this way, so that both read one parser).
func (o *CSVOptions) Query() url.Values {
	q := url.Values{}
	if o == nil {
		return q
	}
	set := func(k, v string) {
		if v != "" {
			q.Set(k, v)
		}
	}
	var cols []string
	for _, c := range o.Columns {
		cols = append(cols, c.Role+":"+c.Header)
	}
	set("columns", strings.Join(cols, ","))
	set("extra_columns", o.ExtraColumns)
	if o.UnitsRow {
		q.Set("units_row", "true")
	}
	set("delimiter", o.Delimiter)
	set("decimal", o.Decimal)
	set("missing", o.Missing)
	set("x_method", o.XMethod)
	set("y_method", o.YMethod)
	set("group_by", o.GroupBy)
	return q
}

// groupByElsewhere refuses group_by where one study is decoded.
func groupByElsewhere() error {
	return Invalid(QueryName("group_by"), "group_by splits the file into one study per group, answered as a batch: send it with a text/csv body")
}

// Grouped is one study of a CSV split by group_by: its request, or the
// problem that stops it (its options did not apply).
type Grouped[Req any] struct {
	Name string
	Req  Req
	Err  error
}

// groupQuery is the shared query with a group's own options in place.
func groupQuery(rest url.Values, o *CSVOptions, group string) url.Values {
	own := o.Groups[group]
	if len(own) == 0 {
		return rest
	}
	q := url.Values{}
	for k, v := range rest {
		q[k] = v
	}
	for k, v := range own {
		q[k] = v
	}
	return q
}

// checkGroups refuses per-group options for a group the file lacks.
func checkGroups(o *CSVOptions, names []string) error {
	for g, v := range o.Groups {
		if !slices.Contains(names, g) {
			for k := range v {
				return Invalid(o.where(k+"["+g+"]"), fmt.Sprintf("no group %q in column %s (groups: %s)", Truncate(g), Truncate(o.GroupBy), Truncate(strings.Join(names, ", "))))
			}
		}
	}
	return nil
}

// FitGroupsFromCSV reads a CSV split by group_by into one fit request per
// group, each with the shared query options and its own (name[group]).
// The shared options are checked once: a fault there refuses the request.
func FitGroupsFromCSV(r io.Reader, q url.Values) ([]Grouped[*FitRequest], error) {
	o, rest, err := TakeCSVOptions(q)
	if err != nil {
		return nil, err
	}
	if _, err := FitRequestFromQuery(rest, &Dataset{csv: true}); err != nil {
		return nil, err
	}
	groups, err := DecodeCSVGroups(r, o)
	if err != nil {
		return nil, err
	}
	return fitGroups(groups, rest, o, func(q url.Values, d *Dataset) (*FitRequest, error) { return FitRequestFromQuery(q, d) })
}

// FitGroups makes one fit request per group from options built by opts
// (the command line's flags, or the query).
func fitGroups(groups []CSVGroup, rest url.Values, o *CSVOptions, opts func(url.Values, *Dataset) (*FitRequest, error)) ([]Grouped[*FitRequest], error) {
	names := make([]string, len(groups))
	for i, g := range groups {
		names[i] = g.Name
	}
	if err := checkGroups(o, names); err != nil {
		return nil, err
	}
	out := make([]Grouped[*FitRequest], len(groups))
	for i, g := range groups {
		req, err := opts(groupQuery(rest, o, g.Name), g.Data)
		if err == nil {
			req.TakeUnits()
		}
		out[i] = Grouped[*FitRequest]{Name: g.Name, Req: req, Err: err}
	}
	return out, nil
}

// CompareGroupsFromCSV reads a comparison CSV split by group_by into one
// study per group, each with the shared options and its own
// (decision_levels[glucose]=3.9,7).
func CompareGroupsFromCSV(r io.Reader, q url.Values) ([]Grouped[*CompareRequest], error) {
	o, rest, err := TakeCSVOptions(q)
	if err != nil {
		return nil, err
	}
	if err := CompareRequestFromQuery(rest, &CompareRequest{csv: true}); err != nil {
		return nil, err
	}
	groups, err := DecodeCompareCSVGroups(r, o)
	if err != nil {
		return nil, err
	}
	names := make([]string, len(groups))
	for i, g := range groups {
		names[i] = g.Name
	}
	if err := checkGroups(o, names); err != nil {
		return nil, err
	}
	out := make([]Grouped[*CompareRequest], len(groups))
	for i, g := range groups {
		err := CompareRequestFromQuery(groupQuery(rest, o, g.Name), g.Req)
		if err == nil {
			err = g.Req.TakeUnit(QueryName("unit"))
		}
		out[i] = Grouped[*CompareRequest]{Name: g.Name, Req: g.Req, Err: err}
	}
	return out, nil
}
