package wire

import (
	"fmt"
	"io"
	"math"
	"net/url"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"

	"eivfit/eiv"
	"eivfit/eiv/study"
)

// CalibrationRequest is the body of POST /v1/calibration; `eivfit
// calibrate` builds the same value from a CSV file and its flags.
type CalibrationRequest struct {
	Data study.CalibrationData
	// Names and units of the axes (x: the standards' assigned values, y:
	// the instrument's response).
	XName, YName, XUnit, YUnit string

	Model               string
	OnInconsistent      string
	CoverageFactor      *float64
	CoverageProbability *float64
	Confidence          *float64
	MonteCarlo          *study.CalMonteCarlo
	Forward             []study.CalForward

	csv              bool
	stdRows, unkRows []int
}

var calKeys = []string{"standards", "shared_components", "x_covariance", "unknowns", "x_name", "y_name", "x_unit", "y_unit",
	"model", "on_inconsistent", "coverage_factor", "coverage_probability", "confidence", "monte_carlo", "forward"}

var (
	calStandardKeys = []string{"id", "x", "ux", "y", "uy", "r"}
	calUnknownKeys  = []string{"id", "y", "uy"}
	sharedKeys      = []string{"name", "relative_u", "standards"}
	forwardKeys     = []string{"x", "ux"}
	monteCarloKeys  = []string{"trials", "seed"}
)

// DecodeCalibrationJSON reads a CalibrationRequest strictly, in one pass:
// unknown, repeated or case-variant keys, non-numbers and numbers outside
// the double range are errors naming the field's JSON pointer, and every
// list (standards, unknowns, replicate readings, shared components and
// their members, covariance rows and columns, forward evaluations) is
// counted against its limit as it is read.
func DecodeCalibrationJSON(r io.Reader) (*CalibrationRequest, error) {
	req := &CalibrationRequest{}
	if err := readDocument(r, calKeys, func(p *pointParser, key []byte) error { return p.calMember(req, key) }); err != nil {
		return nil, err
	}
	return req, nil
}

// calMember reads the value of one member of a calibration request.
func (p *pointParser) calMember(req *CalibrationRequest, key []byte) error {
	d := &req.Data
	var err error
	switch string(key) {
	case "standards":
		d.Standards = nil
		return p.array("/standards", p.lim.MaxPoints, KindTooLarge, "standards", func(i int) error {
			s, err := p.calStandard(i)
			d.Standards = append(d.Standards, s)
			return err
		})
	case "unknowns":
		d.Unknowns = nil
		return p.array("/unknowns", p.lim.MaxPoints, KindTooLarge, "unknowns", func(i int) error {
			u, err := p.calUnknown(i)
			d.Unknowns = append(d.Unknowns, u)
			return err
		})
	case "shared_components":
		d.Shared = nil
		return p.array("/shared_components", study.MaxSharedComponents, KindTooLarge, "shared components", func(k int) error {
			c, err := p.calShared(fmt.Sprintf("/shared_components/%d", k))
			d.Shared = append(d.Shared, c)
			return err
		})
	case "x_covariance":
		d.XCovariance = nil
		if p.null() {
			return nil
		}
		d.XCovariance = [][]float64{}
		return p.array("/x_covariance", study.MaxCovarianceStandards, KindTooLarge, "rows (standards with an x covariance)", func(i int) error {
			row := []float64{}
			err := p.array(fmt.Sprintf("/x_covariance/%d", i), study.MaxCovarianceStandards, KindTooLarge, "columns (standards with an x covariance)", func(j int) error {
				v, err := p.lazyNumber(func() string { return fmt.Sprintf("/x_covariance/%d/%d", i, j) })
				row = append(row, v)
				return err
			})
			d.XCovariance = append(d.XCovariance, row)
			return err
		})
	case "forward":
		req.Forward = nil
		return p.array("/forward", p.lim.MaxAt, KindTooLarge, "forward evaluations", func(i int) error {
			f, err := p.calForward(fmt.Sprintf("/forward/%d", i))
			req.Forward = append(req.Forward, f)
			return err
		})
	case "monte_carlo":
		req.MonteCarlo = nil
		if p.null() {
			return nil
		}
		req.MonteCarlo = &study.CalMonteCarlo{}
		return p.monteCarlo("/monte_carlo", req.MonteCarlo)
	case "x_name":
		req.XName, err = p.text("/x_name", true)
	case "y_name":
		req.YName, err = p.text("/y_name", true)
	case "x_unit":
		req.XUnit, err = p.text("/x_unit", true)
	case "y_unit":
		req.YUnit, err = p.text("/y_unit", true)
	case "model":
		req.Model, err = p.text("/model", true)
	case "on_inconsistent":
		req.OnInconsistent, err = p.text("/on_inconsistent", true)
	case "coverage_factor":
		err = p.optNumber("/coverage_factor", &req.CoverageFactor)
	case "coverage_probability":
		err = p.optNumber("/coverage_probability", &req.CoverageProbability)
	case "confidence":
		err = p.optNumber("/confidence", &req.Confidence)
	default:
		return p.unknownKey("", key, calKeys)
	}
	return err
}

// notObject is the problem for a list entry that is not an object; the
// value is read over first, so that a syntax error is named as such.
func (p *pointParser) notObject(ptr, example string) error {
	if _, err := p.skip(0); err != nil {
		return err
	}
	return Invalid(ptr, "each entry must be an object such as "+example)
}

// calStandard reads one standard: {"id", "x", "ux", "y", "uy", "r"}.
func (p *pointParser) calStandard(i int) (study.CalStandard, error) {
	var s study.CalStandard
	ptr := samplePtr{i: i, list: "standards"}
	if p.pos >= len(p.b) || p.b[p.pos] != '{' {
		return s, p.notObject(ptr.String(), `{"x": 1.0, "y": [2.01, 2.03]}`)
	}
	var x *float64
	err := p.object(ptr.String(), func(key []byte) error {
		fp := samplePtr{i: i, field: string(key), list: "standards"}
		var err error
		switch string(key) {
		case "id":
			s.ID, err = p.sampleID(fp)
		case "x":
			x, err = p.optLazyNumber(fp.String)
		case "ux":
			var v *float64
			v, err = p.optLazyNumber(fp.String)
			if v != nil {
				s.UX = *v
			}
		case "y":
			s.Y, err = p.values(fp)
		case "uy":
			s.UY, err = p.optLazyNumber(fp.String)
		case "r":
			var v *float64
			v, err = p.optLazyNumber(fp.String)
			if v != nil {
				s.R = *v
			}
		default:
			return p.unknownKey(ptr.String(), key, calStandardKeys)
		}
		return err
	}, calStandardKeys)
	if err != nil {
		return s, err
	}
	if x == nil {
		return s, Invalid(ptr.String()+"/x", "required: the standard's assigned value")
	}
	s.X = *x
	if s.Y == nil {
		return s, Invalid(ptr.String()+"/y", "required: a number, or an array of replicate numbers")
	}
	return s, nil
}

// calUnknown reads one unknown: {"id", "y", "uy"}.
func (p *pointParser) calUnknown(i int) (study.CalUnknown, error) {
	var u study.CalUnknown
	ptr := samplePtr{i: i, list: "unknowns"}
	if p.pos >= len(p.b) || p.b[p.pos] != '{' {
		return u, p.notObject(ptr.String(), `{"id": "U1", "y": [5.1, 5.2]}`)
	}
	err := p.object(ptr.String(), func(key []byte) error {
		fp := samplePtr{i: i, field: string(key), list: "unknowns"}
		var err error
		switch string(key) {
		case "id":
			u.ID, err = p.sampleID(fp)
		case "y":
			u.Y, err = p.values(fp)
		case "uy":
			u.UY, err = p.optLazyNumber(fp.String)
		default:
			return p.unknownKey(ptr.String(), key, calUnknownKeys)
		}
		return err
	}, calUnknownKeys)
	if err != nil {
		return u, err
	}
	if u.Y == nil {
		return u, Invalid(ptr.String()+"/y", "required: a number, or an array of replicate numbers")
	}
	return u, nil
}

// calShared reads one shared component: {"name", "relative_u", "standards"}.
func (p *pointParser) calShared(ptr string) (study.CalShared, error) {
	var c study.CalShared
	if p.pos >= len(p.b) || p.b[p.pos] != '{' {
		return c, p.notObject(ptr, `{"name": "balance", "relative_u": 0.001, "standards": ["S1", "S2"]}`)
	}
	var ru *float64
	err := p.object(ptr, func(key []byte) error {
		var err error
		switch string(key) {
		case "name":
			c.Name, err = p.text(ptr+"/name", true)
		case "relative_u":
			err = p.optNumber(ptr+"/relative_u", &ru)
		case "standards":
			c.Standards = nil
			return p.array(ptr+"/standards", study.MaxCovarianceStandards, KindTooLarge, "standards per shared component", func(j int) error {
				id, err := p.text(fmt.Sprintf("%s/standards/%d", ptr, j), false)
				c.Standards = append(c.Standards, id)
				return err
			})
		default:
			return p.unknownKey(ptr, key, sharedKeys)
		}
		return err
	}, sharedKeys)
	if err != nil {
		return c, err
	}
	if ru == nil {
		return c, Invalid(ptr+"/relative_u", "required: the component's relative standard uncertainty")
	}
	c.RelativeU = *ru
	return c, nil
}

// calForward reads a forward evaluation: a number x, or {"x", "ux"}.
func (p *pointParser) calForward(ptr string) (study.CalForward, error) {
	var f study.CalForward
	if p.pos < len(p.b) && p.b[p.pos] != '{' {
		v, err := p.number(ptr)
		f.X = v
		return f, err
	}
	var x, ux *float64
	err := p.object(ptr, func(key []byte) error {
		switch string(key) {
		case "x":
			return p.optNumber(ptr+"/x", &x)
		case "ux":
			return p.optNumber(ptr+"/ux", &ux)
		}
		return p.unknownKey(ptr, key, forwardKeys)
	}, forwardKeys)
	if err != nil {
		return f, err
	}
	if x == nil {
		return f, Invalid(ptr+"/x", "required: the x value at which to evaluate the line")
	}
	f.X = *x
	if ux != nil {
		f.UX = *ux
	}
	return f, nil
}

// monteCarlo reads {"trials", "seed"}.
func (p *pointParser) monteCarlo(ptr string, m *study.CalMonteCarlo) error {
	return p.object(ptr, func(key []byte) error {
		switch string(key) {
		case "trials":
			if p.null() {
				m.Trials = 0
				return nil
			}
			v, err := p.integer(ptr+"/trials", false)
			m.Trials = int(v)
			return err
		case "seed":
			if p.null() {
				m.Seed = nil
				return nil
			}
			v, err := p.integer(ptr+"/seed", true)
			u := uint64(v)
			m.Seed = &u
			return err
		}
		return p.unknownKey(ptr, key, monteCarloKeys)
	}, monteCarloKeys)
}

// Options are the study's options with the server's settings.
func (req *CalibrationRequest) Options(set study.Settings) *study.CalibrationOptions {
	return &study.CalibrationOptions{Model: req.Model, OnInconsistent: req.OnInconsistent,
		CoverageFactor: req.CoverageFactor, CoverageProbability: req.CoverageProbability, Confidence: req.Confidence,
		MonteCarlo: req.MonteCarlo, Forward: req.Forward, Settings: set}
}

// Source says how the request came, to locate its errors.
func (req *CalibrationRequest) Source() *Source {
	s := &Source{Form: FormJSON, paths: &calRows{}}
	if req.csv {
		s.Form = FormCSV
		s.paths = &calRows{standards: req.stdRows, unknowns: req.unkRows}
	}
	return s
}

// SetOptions copies every option of o (all but the data) into req.
func (req *CalibrationRequest) SetOptions(o *CalibrationRequest) {
	d, csv, sr, ur := req.Data, req.csv, req.stdRows, req.unkRows
	*req = *o
	req.Data, req.csv, req.stdRows, req.unkRows = d, csv, sr, ur
}

// calRows locates the errors of a calibration: their fields are slash
// paths into the request in which "*" stands for the index.
type calRows struct {
	standards, unknowns []int // CSV lines
}

func (s *Source) locatePath(e *study.Error) string {
	parts := strings.Split(e.Field, "/")
	if s.Form == FormJSON {
		for k, p := range parts {
			if p == "*" {
				parts[k] = strconv.Itoa(e.Index)
			}
		}
		return "/" + strings.Join(parts, "/")
	}
	var rows []int
	switch parts[0] {
	case "standards":
		rows = s.paths.standards
	case "unknowns":
		rows = s.paths.unknowns
	}
	if rows != nil {
		if len(parts) < 2 || e.Index < 0 || e.Index >= len(rows) {
			return "body"
		}
		if len(parts) < 3 {
			return fmt.Sprintf("row %d", rows[e.Index])
		}
		return fmt.Sprintf("row %d, column %s", rows[e.Index], parts[2])
	}
	name := e.Field
	switch {
	case strings.HasPrefix(name, "shared_components"):
		name = "shared_standards"
		if strings.HasSuffix(e.Field, "relative_u") {
			name = "shared_relative_u"
		}
	case strings.HasPrefix(name, "forward"):
		name = "forward"
	case strings.HasPrefix(name, "monte_carlo/"):
		name = strings.TrimPrefix(name, "monte_carlo/")
	case name == "standards":
		return "body"
	}
	if s.Form == FormFlags {
		return "--" + strings.ReplaceAll(name, "_", "-")
	}
	return "query parameter " + name
}

var unitHeader = regexp.MustCompile(`^([a-z_0-9]+)\s*\((.*)\)$`)

// DecodeCalibrationCSV reads a calibration from CSV: a header naming role
// (standard or unknown), id (optional), x and ux (standards only), the
// readings y or y1, y2, … (replicates; empty cells allowed), uy and r
// (optional). A unit in parentheses after x or y ("x (mg/kg)") is taken
// as the axis's unit. Lines starting with '#' are comments.
func DecodeCalibrationCSV(r io.Reader) (*CalibrationRequest, error) {
	lim := limitsOf(r)
	body, err := csvBody(r)
	if err != nil {
		return nil, err
	}
	cr := newCSVReader(body)
	header, err := cr.Read()
	if err != nil {
		if err == io.EOF {
			return nil, Invalid("row 1", "the CSV body is empty: a header (role,id,x,ux,y,uy) and one row per standard or unknown are needed")
		}
		return nil, csvReadError(err)
	}
	line, _ := cr.FieldPos(0)
	req := &CalibrationRequest{csv: true}
	cols := make([]string, len(header))
	names := make([]string, len(header))
	seen := map[string]bool{}
	for j, h := range header {
		name := strings.ToLower(strings.TrimSpace(h))
		if !utf8.ValidString(name) {
			return nil, Invalid(fmt.Sprintf("row %d, column %d", line, j+1), "the header is not valid UTF-8 text")
		}
		unit := ""
		if m := unitHeader.FindStringSubmatch(name); m != nil {
			orig := unitHeader.FindStringSubmatch(strings.TrimSpace(h))
			name = m[1]
			if orig != nil {
				unit = strings.TrimSpace(orig[2])
			}
		}
		if seen[name] {
			return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(name)), fmt.Sprintf("column %q appears twice", name))
		}
		seen[name] = true
		names[j] = name
		switch {
		case slices.Contains([]string{"role", "id", "x", "ux", "y", "uy", "r"}, name):
			cols[j] = name
		case replicateColumn.MatchString(name) && replicateColumn.FindStringSubmatch(name)[1] == "y":
			cols[j] = "y"
		default:
			return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(h)), fmt.Sprintf(
				"unknown column %q (known: role, id, x, ux, y or y1, y2, …, uy, r)", Truncate(h)))
		}
		if unit != "" {
			if err := nameLength(fmt.Sprintf("row %d, column %s", line, name), unit); err != nil {
				return nil, err
			}
			switch cols[j] {
			case "x":
				req.XUnit = unit
			case "y":
				req.YUnit = unit
			}
		}
	}
	ny := 0
	for j, c := range cols {
		if c == "y" {
			ny++
		}
		if ny > maxReplicates {
			return nil, Invalid(fmt.Sprintf("row %d, column %s", line, Truncate(header[j])),
				fmt.Sprintf("at most %d replicate columns y1, y2, …", maxReplicates))
		}
	}
	for _, need := range []string{"role", "x", "y"} {
		if !slices.Contains(cols, need) {
			return nil, Invalid(fmt.Sprintf("row %d", line), "the header must name the columns role, x and y (or y1, y2, …)")
		}
	}
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvReadError(err)
		}
		row, _ := cr.FieldPos(0)
		var role, id string
		var x, ux, uy, rr *float64
		var ys []float64
		for j, f := range rec {
			f = strings.TrimSpace(f)
			where := fmt.Sprintf("row %d, column %s", row, names[j])
			switch cols[j] {
			case "role":
				role = strings.ToLower(f)
			case "id":
				if err := csvID([]byte(f), row); err != nil {
					return nil, err
				}
				id = f
			default:
				if f == "" {
					continue
				}
				v, err := parseCell(f)
				if err != nil {
					return nil, Invalid(where, err.Error())
				}
				switch cols[j] {
				case "x":
					x = &v
				case "ux":
					ux = &v
				case "uy":
					uy = &v
				case "r":
					rr = &v
				case "y":
					ys = append(ys, v)
				}
			}
		}
		switch role {
		case "standard":
			if x == nil {
				return nil, Invalid(fmt.Sprintf("row %d, column x", row), "a standard needs its assigned value x")
			}
			if len(ys) == 0 {
				return nil, Invalid(fmt.Sprintf("row %d, column y", row), "a standard needs at least one reading y")
			}
			if lim.MaxPoints > 0 && len(req.Data.Standards) >= lim.MaxPoints {
				return nil, tooManyRows(row, lim.MaxPoints, "standards")
			}
			s := study.CalStandard{ID: id, X: *x, Y: ys, UY: uy}
			if ux != nil {
				s.UX = *ux
			}
			if rr != nil {
				s.R = *rr
			}
			req.Data.Standards = append(req.Data.Standards, s)
			req.stdRows = append(req.stdRows, row)
		case "unknown":
			if len(ys) == 0 {
				return nil, Invalid(fmt.Sprintf("row %d, column y", row), "an unknown needs at least one reading y")
			}
			for _, c := range []struct {
				name string
				v    *float64
			}{{"x", x}, {"ux", ux}, {"r", rr}} {
				if c.v != nil {
					return nil, Invalid(fmt.Sprintf("row %d, column %s", row, c.name), "an unknown has no "+c.name+": leave the cell empty")
				}
			}
			if lim.MaxPoints > 0 && len(req.Data.Unknowns) >= lim.MaxPoints {
				return nil, tooManyRows(row, lim.MaxPoints, "unknowns")
			}
			req.Data.Unknowns = append(req.Data.Unknowns, study.CalUnknown{ID: id, Y: ys, UY: uy})
			req.unkRows = append(req.unkRows, row)
		default:
			return nil, Invalid(fmt.Sprintf("row %d, column role", row), fmt.Sprintf("the role must be standard or unknown, not %q", Truncate(role)))
		}
	}
	return req, nil
}

// CalibrationQueryParameters are the options of a CSV calibration.
var CalibrationQueryParameters = []string{"model", "on_inconsistent", "coverage_factor", "coverage_probability",
	"confidence", "trials", "seed", "forward", "x_name", "y_name", "x_unit", "y_unit",
	"shared_name", "shared_relative_u", "shared_standards"}

// calibrationParams are CalibrationQueryParameters by kind.
var calibrationParams = paramSpec{single: slices.DeleteFunc(slices.Clone(CalibrationQueryParameters), func(s string) bool {
	return s == "forward" || s == "shared_standards"
}), lists: []string{"forward", "shared_standards"}, numeric: []string{"forward"}}

// CalibrationOptionsFromQuery fills the options of a CSV calibration from
// query parameters (see CalibrationQueryParameters). Monte Carlo runs when
// trials or seed is given; one shared component is shared_name,
// shared_relative_u and shared_standards (a comma list of ids).
func CalibrationOptionsFromQuery(q url.Values, req *CalibrationRequest) error {
	if err := calibrationParams.check(q); err != nil {
		return err
	}
	for _, f := range []struct {
		name string
		to   *string
	}{{"model", &req.Model}, {"on_inconsistent", &req.OnInconsistent}, {"x_name", &req.XName}, {"y_name", &req.YName}} {
		*f.to = q.Get(f.name)
	}
	for _, name := range []string{"x_name", "y_name", "x_unit", "y_unit", "shared_name"} {
		if err := nameLength("query parameter "+name, q.Get(name)); err != nil {
			return err
		}
	}
	for _, f := range []struct {
		name string
		to   *string
	}{{"x_unit", &req.XUnit}, {"y_unit", &req.YUnit}} {
		if v := q.Get(f.name); v != "" {
			*f.to = v
		}
	}
	var err error
	for _, f := range []struct {
		name string
		to   **float64
	}{{"coverage_factor", &req.CoverageFactor}, {"coverage_probability", &req.CoverageProbability}, {"confidence", &req.Confidence}} {
		if *f.to, err = queryFloat(q, f.name); err != nil {
			return err
		}
	}
	if q.Get("trials") != "" || q.Get("seed") != "" {
		req.MonteCarlo = &study.CalMonteCarlo{}
		if s := q.Get("trials"); s != "" {
			n, err := QueryInt("query parameter trials", s)
			if err != nil {
				return err
			}
			req.MonteCarlo.Trials = n
		}
		if s := q.Get("seed"); s != "" {
			v, err := strconv.ParseUint(s, 10, 64)
			if err != nil {
				return Invalid("query parameter seed", fmt.Sprintf("%q is not a non-negative integer", Truncate(s)))
			}
			req.MonteCarlo.Seed = &v
		}
	}
	xs, err := queryFloats(q, "forward")
	if err != nil {
		return err
	}
	for _, x := range xs {
		req.Forward = append(req.Forward, study.CalForward{X: x})
	}
	ru, err := queryFloat(q, "shared_relative_u")
	if err != nil {
		return err
	}
	members := queryList(q, "shared_standards")
	switch {
	case ru != nil && len(members) > 0:
		req.Data.Shared = append(req.Data.Shared, study.CalShared{Name: q.Get("shared_name"), RelativeU: *ru, Standards: members})
	case ru != nil || len(members) > 0 || q.Get("shared_name") != "":
		return Invalid("query parameter shared_relative_u", "a shared component needs both shared_relative_u and shared_standards")
	}
	return nil
}

// CalibrationFromCSV decodes a CSV calibration and takes its options from
// the query parameters: POST /v1/calibration with a text/csv body.
func CalibrationFromCSV(r io.Reader, q url.Values) (*CalibrationRequest, error) {
	req, err := DecodeCalibrationCSV(r)
	if err != nil {
		return nil, err
	}
	return req, CalibrationOptionsFromQuery(q, req)
}

// CalibrationResponse is the answer of POST /v1/calibration and of
// `eivfit calibrate --format json`. A number of degrees of freedom that is
// infinite (every uncertainty stated, none estimated from few readings)
// is left out.
type CalibrationResponse struct {
	XName          string           `json:"x_name,omitempty"`
	YName          string           `json:"y_name,omitempty"`
	XUnit          string           `json:"x_unit,omitempty"`
	YUnit          string           `json:"y_unit,omitempty"`
	Line           CalLine          `json:"line"`
	Validation     CalValidation    `json:"validation"`
	Standards      []CalStandardOut `json:"standards"`
	Pooled         *PooledOut       `json:"pooled_replicates,omitempty"`
	Unknowns       []UnknownOut     `json:"unknowns"`
	Forward        []ForwardOut     `json:"forward,omitempty"`
	MonteCarloSeed *uint64          `json:"monte_carlo_seed,omitempty"`
	Warnings       []CalWarningOut  `json:"warnings"`
	Caution        string           `json:"caution"`
}

// UValueOut is an estimate with its standard uncertainty.
type UValueOut struct {
	Estimate float64 `json:"estimate"`
	U        float64 `json:"u"`
}

// CalLine is the calibration line y = a + b·x.
type CalLine struct {
	// Model is wls, gdr or gmr; Reason says why.
	Model     string    `json:"model"`
	Reason    string    `json:"reason"`
	Intercept UValueOut `json:"intercept"`
	Slope     UValueOut `json:"slope"`
	// CovSlopeIntercept is cov(a, b); Correlation is cov/(u(a)·u(b)).
	CovSlopeIntercept float64 `json:"cov_slope_intercept"`
	Correlation       float64 `json:"correlation"`
	// Centre is the centred form y = centre.y + b·(x − centre.x), where the
	// line's value and slope are uncorrelated.
	Centre CentreOut `json:"centre"`
	// DOF is the degrees of freedom of the line's uncertainty; absent when
	// infinite.
	DOF        *float64 `json:"dof,omitempty"`
	Standards  int      `json:"standards"`
	XMin       float64  `json:"x_min"`
	XMax       float64  `json:"x_max"`
	Iterations int      `json:"iterations"`
}

// CentreOut is the centre of the line.
type CentreOut struct {
	X float64   `json:"x"`
	Y UValueOut `json:"y"`
}

// CalValidation is the χ² check of the line against the stated uncertainties.
type CalValidation struct {
	Chi2       float64 `json:"chi2"`
	DOF        int     `json:"dof"`
	Level      float64 `json:"level"`
	Quantile   float64 `json:"quantile"`
	P          float64 `json:"p"`
	Consistent bool    `json:"consistent"`
	// Policy applied (report, inflate, refuse) and the factor applied to
	// the line's uncertainties (1 unless inflated).
	Policy string  `json:"on_inconsistent"`
	Scale  float64 `json:"scale"`
}

// CalStandardOut is one standard as the calibration saw it.
type CalStandardOut struct {
	ID string  `json:"id"`
	X  float64 `json:"x"`
	// UX is the total standard uncertainty of x (shared components included).
	UX       float64   `json:"ux"`
	Y        UValueOut `json:"y"`
	Readings int       `json:"readings"`
	// Basis of u(ȳ): stated, pooled.
	Basis        string  `json:"basis"`
	XAdjusted    float64 `json:"x_adjusted"`
	Residual     float64 `json:"residual"`
	Standardized float64 `json:"standardized_residual"`
	Flagged      bool    `json:"flagged"`
}

// PooledOut is the pooled replicate SD of one reading over the standards.
type PooledOut struct {
	SD  float64 `json:"sd"`
	DOF int     `json:"dof"`
}

// UnknownOut is x₀ for one unknown.
type UnknownOut struct {
	ID         string         `json:"id"`
	Readings   int            `json:"readings"`
	Y          ReadingOut     `json:"y"`
	X          XOut           `json:"x"`
	Budget     []BudgetOut    `json:"budget"`
	ULine      float64        `json:"u_line"`
	UReading   float64        `json:"u_reading"`
	MonteCarlo *MonteCarloOut `json:"monte_carlo,omitempty"`
}

// ReadingOut is the mean reading ȳ₀ with u(ȳ₀), where u came from, and
// its degrees of freedom (absent when infinite).
type ReadingOut struct {
	Estimate float64  `json:"estimate"`
	U        float64  `json:"u"`
	Basis    string   `json:"basis"`
	DOF      *float64 `json:"dof,omitempty"`
}

// XOut is x₀ with its standard uncertainty, effective degrees of freedom
// (absent when infinite), coverage factor, expanded uncertainty and
// coverage interval.
type XOut struct {
	Estimate            float64  `json:"estimate"`
	U                   float64  `json:"u"`
	DOF                 *float64 `json:"dof,omitempty"`
	K                   float64  `json:"k"`
	CoverageProbability *float64 `json:"coverage_probability,omitempty"`
	Expanded            float64  `json:"expanded"`
	Interval            Bounds   `json:"interval"`
}

// BudgetOut is one line of the uncertainty budget of x₀.
type BudgetOut struct {
	Source       string   `json:"source"`
	Sensitivity  float64  `json:"sensitivity"`
	U            float64  `json:"u"`
	Contribution float64  `json:"contribution"`
	DOF          *float64 `json:"dof,omitempty"`
}

// MonteCarloOut is the JCGM 101 check of x₀.
type MonteCarloOut struct {
	Trials              int     `json:"trials"`
	Seed                uint64  `json:"seed"`
	Mean                float64 `json:"mean"`
	SD                  float64 `json:"sd"`
	CoverageProbability float64 `json:"coverage_probability"`
	// Interval is the shortest coverage interval; LinearInterval the
	// law-of-propagation one at the same probability.
	Interval       Bounds  `json:"interval"`
	LinearInterval Bounds  `json:"linear_interval"`
	Tolerance      float64 `json:"tolerance"`
	DLow           float64 `json:"d_low"`
	DHigh          float64 `json:"d_high"`
	Validated      bool    `json:"validated"`
}

// ForwardOut is the line evaluated at one x.
type ForwardOut struct {
	X     float64   `json:"x"`
	UX    float64   `json:"ux"`
	Y     UValueOut `json:"y"`
	ULine float64   `json:"u_line"`
}

// CalWarningOut is a calibration warning; Unknown names the unknown it
// concerns.
type CalWarningOut struct {
	Code    string `json:"code"`
	Unknown string `json:"unknown,omitempty"`
	Message string `json:"message"`
}

func dofOut(v float64) *float64 {
	if math.IsInf(v, 1) {
		return nil
	}
	return &v
}

func uv(v eiv.UValue) UValueOut { return UValueOut{Estimate: v.Value, U: v.U} }

// NewCalibrationResponse is the answer to a calibration study.
func NewCalibrationResponse(req *CalibrationRequest, r *study.CalibrationResult) *CalibrationResponse {
	c := r.Line
	out := &CalibrationResponse{XName: req.XName, YName: req.YName, XUnit: req.XUnit, YUnit: req.YUnit,
		Line: CalLine{Model: string(c.Model), Reason: c.Reason, Intercept: uv(c.Intercept), Slope: uv(c.Slope),
			CovSlopeIntercept: c.Cov, Correlation: c.Corr, Centre: CentreOut{X: c.XRef, Y: uv(c.YRef)},
			DOF: dofOut(c.LineDOF), Standards: c.M, XMin: c.XMin, XMax: c.XMax, Iterations: c.Iterations},
		Validation: CalValidation{Chi2: c.Validation.Chi2, DOF: c.Validation.DOF, Level: c.Validation.Level,
			Quantile: c.Validation.Quantile, P: c.Validation.P, Consistent: c.Validation.Consistent,
			Policy: string(c.Validation.Policy), Scale: c.Validation.Scale},
		Unknowns: []UnknownOut{}, Warnings: []CalWarningOut{}, Caution: study.CalibrationCaution, MonteCarloSeed: r.Seed}
	if c.PooledDOF > 0 {
		out.Pooled = &PooledOut{SD: c.PooledSD, DOF: c.PooledDOF}
	}
	for i, s := range c.Standards {
		out.Standards = append(out.Standards, CalStandardOut{ID: r.StandardIDs[i], X: r.Data.Standards[i].X, UX: s.UX,
			Y: uv(s.Y), Readings: s.Readings, Basis: string(s.Basis), XAdjusted: s.XAdjusted, Residual: s.Residual,
			Standardized: s.Standardized, Flagged: s.Flagged})
	}
	for _, u := range r.Unknowns {
		x := u.Inverse
		uo := UnknownOut{ID: u.ID, Readings: x.Readings,
			Y: ReadingOut{Estimate: x.Y.Value, U: x.Y.U, Basis: string(x.Basis), DOF: dofOut(x.YDOF)},
			X: XOut{Estimate: x.X.Value, U: x.X.U, DOF: dofOut(x.DOF), K: x.K, Expanded: x.Expanded,
				Interval: Bounds{Lower: x.Lower, Upper: x.Upper}},
			ULine: x.ULine, UReading: x.UReading}
		if x.CoverageProbability != 0 {
			p := x.CoverageProbability
			uo.X.CoverageProbability = &p
		}
		for _, b := range x.Budget {
			uo.Budget = append(uo.Budget, BudgetOut{Source: b.Source, Sensitivity: b.Sensitivity, U: b.U,
				Contribution: b.Contribution, DOF: dofOut(b.DOF)})
		}
		if m := u.MonteCarlo; m != nil {
			uo.MonteCarlo = &MonteCarloOut{Trials: m.Trials, Seed: m.Seed, Mean: m.Mean, SD: m.SD,
				CoverageProbability: m.CoverageProbability, Interval: Bounds{Lower: m.Lower, Upper: m.Upper},
				LinearInterval: Bounds{Lower: m.LinearLower, Upper: m.LinearUpper}, Tolerance: m.Tolerance,
				DLow: m.DLow, DHigh: m.DHigh, Validated: m.Validated}
		}
		out.Unknowns = append(out.Unknowns, uo)
	}
	for _, f := range r.Forward {
		out.Forward = append(out.Forward, ForwardOut{X: f.X.Value, UX: f.X.U, Y: uv(f.Y), ULine: f.ULine})
	}
	for _, w := range r.Warnings {
		out.Warnings = append(out.Warnings, CalWarningOut{Code: w.Code, Unknown: w.Unknown, Message: w.Message})
	}
	return out
}
