package wire

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/url"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"

	"eivfit/eiv/study"
)

// CompareRequest is the body of POST /v1/method-comparison: a study of a
// candidate method (y) against the comparative method in service (x).
type CompareRequest struct {
	Samples []Sample `json:"samples"`
	XName   string   `json:"x_name,omitempty"`
	YName   string   `json:"y_name,omitempty"`
	Unit    string   `json:"unit,omitempty"`
	// DecisionLevels are the x values at which bias is judged; each may
	// carry its own allowable bias.
	DecisionLevels []DecisionLevel `json:"decision_levels,omitempty"`
	// AllowableBias applies to every level that has none of its own.
	AllowableBias *Allowable `json:"allowable_bias,omitempty"`
	// ErrorModel is "constant", "proportional" or "auto" (default: from
	// the replicates, else constant).
	ErrorModel string            `json:"error_model,omitempty"`
	Lambda     *float64          `json:"lambda,omitempty"`
	Confidence *float64          `json:"confidence,omitempty"`
	Bootstrap  *BootstrapOptions `json:"bootstrap,omitempty"`
	// Exclude lists sample ids to leave out; the answer then shows the
	// analysis with and without them.
	Exclude []string `json:"exclude,omitempty"`

	csv  bool
	rows []int
}

// Sample is one patient sample: one value or replicates per method. In
// JSON: {"id": "S1", "x": [5.1, 5.2], "y": 5.4, "sx": …, "sy": …, "order": …}.
type Sample = study.Sample

// Options are the study's options with the server's settings.
func (req *CompareRequest) Options(set study.Settings) *study.CompareOptions {
	o := &study.CompareOptions{Allowable: req.AllowableBias.allowable(), ErrorModel: req.ErrorModel,
		Lambda: req.Lambda, Confidence: req.Confidence, Bootstrap: req.Bootstrap.options(), Exclude: req.Exclude, Unit: req.Unit, Settings: set}
	for _, l := range req.DecisionLevels {
		o.DecisionLevels = append(o.DecisionLevels, study.DecisionLevel{Level: l.Level, Allowable: l.AllowableBias.allowable()})
	}
	return o
}

// Source says how the request came, to locate its errors.
func (req *CompareRequest) Source() *Source {
	if req.csv {
		return &Source{Form: FormCSV, Root: "/samples", Rows: req.rows}
	}
	return &Source{Form: FormJSON, Root: "/samples"}
}

// AsFlags makes the request's errors name command-line flags.
func (s *Source) AsFlags() *Source {
	c := *s
	c.Form = FormFlags
	return &c
}

// DecisionLevel is an x value with an optional allowable bias of its own.
// In JSON it is a number or {"level": 7, "allowable_bias": {...}}.
type DecisionLevel struct {
	Level         float64
	AllowableBias *Allowable
}

// Allowable is an allowable bias: absolute (units of x), percent of the
// level, or both, in which case the larger limit applies (common practice,
// "±a or ±p %, whichever is greater").
type Allowable struct {
	Absolute *float64 `json:"absolute,omitempty"`
	Percent  *float64 `json:"percent,omitempty"`
}

func (a *Allowable) allowable() *study.Allowable {
	if a == nil {
		return nil
	}
	return &study.Allowable{Absolute: a.Absolute, Percent: a.Percent}
}

// UnmarshalJSON decodes an allowable bias strictly.
func (a *Allowable) UnmarshalJSON(b []byte) error {
	type plain Allowable
	var p plain
	if err := decodeStrict(bytes.NewReader(b), &p); err != nil {
		return err
	}
	*a = Allowable(p)
	return nil
}

// UnmarshalJSON takes a number or an object.
func (l *DecisionLevel) UnmarshalJSON(b []byte) error {
	b = bytes.TrimSpace(b)
	if len(b) > 0 && b[0] != '{' {
		if err := json.Unmarshal(b, &l.Level); err != nil {
			return Invalid("", "a decision level is a number or {\"level\": ..., \"allowable_bias\": {...}}")
		}
		return nil
	}
	var o struct {
		Level         *float64   `json:"level"`
		AllowableBias *Allowable `json:"allowable_bias"`
	}
	if err := decodeStrict(bytes.NewReader(b), &o); err != nil {
		return err
	}
	if o.Level == nil {
		return Invalid("/level", "level is required")
	}
	l.Level, l.AllowableBias = *o.Level, o.AllowableBias
	return nil
}

// compareJSON is the wire form, decoded field by field so that every
// error names its place.
type compareJSON struct {
	Samples        []json.RawMessage `json:"samples"`
	XName          string            `json:"x_name"`
	YName          string            `json:"y_name"`
	Unit           string            `json:"unit"`
	DecisionLevels []json.RawMessage `json:"decision_levels"`
	AllowableBias  json.RawMessage   `json:"allowable_bias"`
	ErrorModel     string            `json:"error_model"`
	Lambda         *float64          `json:"lambda"`
	Confidence     *float64          `json:"confidence"`
	Bootstrap      *BootstrapOptions `json:"bootstrap"`
	Exclude        []string          `json:"exclude"`
}

type sampleJSON struct {
	ID    json.RawMessage `json:"id"`
	X     json.RawMessage `json:"x"`
	Y     json.RawMessage `json:"y"`
	SX    *float64        `json:"sx"`
	SY    *float64        `json:"sy"`
	Order *float64        `json:"order"`
}

// DecodeCompareJSON reads a CompareRequest strictly.
func DecodeCompareJSON(r io.Reader) (*CompareRequest, error) {
	var w compareJSON
	if err := decodeStrict(r, &w); err != nil {
		return nil, err
	}
	req := &CompareRequest{XName: w.XName, YName: w.YName, Unit: w.Unit, ErrorModel: w.ErrorModel,
		Lambda: w.Lambda, Confidence: w.Confidence, Bootstrap: w.Bootstrap, Exclude: w.Exclude}
	for i, raw := range w.Samples {
		ptr := fmt.Sprintf("/samples/%d", i)
		var sj sampleJSON
		if err := decodeStrict(bytes.NewReader(raw), &sj); err != nil {
			return nil, prefixedErr(err, ptr)
		}
		s := Sample{SX: sj.SX, SY: sj.SY, Order: sj.Order}
		var err error
		if s.ID, err = parseID(sj.ID); err != nil {
			return nil, Invalid(ptr+"/id", err.Error())
		}
		if s.X, err = parseValues(sj.X, ptr+"/x"); err != nil {
			return nil, err
		}
		if s.Y, err = parseValues(sj.Y, ptr+"/y"); err != nil {
			return nil, err
		}
		req.Samples = append(req.Samples, s)
	}
	for i, raw := range w.DecisionLevels {
		var l DecisionLevel
		if err := l.UnmarshalJSON(raw); err != nil {
			return nil, prefixedErr(err, fmt.Sprintf("/decision_levels/%d", i))
		}
		req.DecisionLevels = append(req.DecisionLevels, l)
	}
	if len(w.AllowableBias) > 0 && string(w.AllowableBias) != "null" {
		var a Allowable
		if err := a.UnmarshalJSON(w.AllowableBias); err != nil {
			return nil, prefixedErr(err, "/allowable_bias")
		}
		req.AllowableBias = &a
	}
	return req, nil
}

func prefixedErr(err error, prefix string) error {
	var p *Problem
	if errors.As(err, &p) {
		return Prefixed(p, prefix)
	}
	return err
}

func parseID(raw json.RawMessage) (string, error) {
	if len(raw) == 0 || string(raw) == "null" {
		return "", nil
	}
	var s string
	if json.Unmarshal(raw, &s) == nil {
		return s, nil
	}
	var f float64
	if json.Unmarshal(raw, &f) == nil {
		return strconv.FormatFloat(f, 'g', -1, 64), nil
	}
	return "", errors.New("id must be a string or a number")
}

// parseValues takes a number or an array of 1 to 20 numbers (replicates).
func parseValues(raw json.RawMessage, ptr string) ([]float64, error) {
	raw = bytes.TrimSpace(raw)
	if len(raw) == 0 || string(raw) == "null" {
		return nil, Invalid(ptr, "required: a number, or an array of replicate numbers")
	}
	if raw[0] == '[' {
		var items []json.RawMessage
		if err := json.Unmarshal(raw, &items); err != nil {
			return nil, Invalid(ptr, "must be a number or an array of numbers")
		}
		if len(items) == 0 || len(items) > 20 {
			return nil, Invalid(ptr, "give 1 to 20 replicate values")
		}
		out := make([]float64, len(items))
		for k, it := range items {
			v, err := parseNumber(it)
			if err != nil {
				return nil, Invalid(fmt.Sprintf("%s/%d", ptr, k), err.Error())
			}
			out[k] = v
		}
		return out, nil
	}
	v, err := parseNumber(raw)
	if err != nil {
		return nil, Invalid(ptr, err.Error())
	}
	return []float64{v}, nil
}

func parseNumber(raw json.RawMessage) (float64, error) {
	var v float64
	if err := json.Unmarshal(raw, &v); err != nil {
		var te *json.UnmarshalTypeError
		if errors.As(err, &te) && strings.HasPrefix(te.Value, "number") {
			return 0, errors.New("the number is outside the double-precision range")
		}
		return 0, fmt.Errorf("must be a number, not %s", truncate(string(raw)))
	}
	return v, nil
}

var replicateColumn = regexp.MustCompile(`^([xy])_?([0-9]{1,2})$`)

// DecodeCompareCSV reads a comparison study in wide form: a header naming
// id (optional), order (optional), the x replicates (x, or x1, x2, … / x_1,
// …) and the y replicates likewise, and optionally sx and sy. Empty
// replicate cells are allowed as long as each sample keeps one value per
// method.
func DecodeCompareCSV(r io.Reader) (*CompareRequest, error) {
	body, err := csvBody(r)
	if err != nil {
		return nil, err
	}
	cr := newCSVReader(body)
	header, err := cr.Read()
	if err == io.EOF {
		return nil, Invalid("row 1", "the CSV body is empty: a header (id,x1,x2,y1,y2) and one row per sample are needed")
	}
	if err != nil {
		return nil, csvReadError(err)
	}
	line, _ := cr.FieldPos(0)
	type col struct {
		kind string // "id", "order", "x", "y", "sx", "sy"
	}
	cols := make([]col, len(header))
	seen := map[string]bool{}
	for j, h := range header {
		name := strings.ToLower(strings.TrimSpace(h))
		if !utf8.ValidString(name) {
			return nil, Invalid(fmt.Sprintf("row %d, column %d", line, j+1), "the header is not valid UTF-8 text")
		}
		if seen[name] {
			return nil, Invalid(fmt.Sprintf("row %d, column %s", line, truncate(name)), fmt.Sprintf("column %q appears twice", name))
		}
		seen[name] = true
		switch {
		case slices.Contains([]string{"id", "order", "x", "y", "sx", "sy"}, name):
			cols[j] = col{name}
		case replicateColumn.MatchString(name):
			cols[j] = col{replicateColumn.FindStringSubmatch(name)[1]}
		default:
			if len(header) == 1 && strings.Contains(h, ";") {
				return nil, Invalid(fmt.Sprintf("row %d", line), "the header looks semicolon-separated; eivfit reads comma-separated values with '.' as the decimal mark")
			}
			return nil, Invalid(fmt.Sprintf("row %d, column %s", line, truncate(h)), fmt.Sprintf(
				"unknown column %q (known: id, order, x or x1, x2, …, y or y1, y2, …, sx, sy)", truncate(h)))
		}
	}
	hasX, hasY := false, false
	for _, c := range cols {
		hasX = hasX || c.kind == "x"
		hasY = hasY || c.kind == "y"
	}
	if !hasX || !hasY {
		return nil, Invalid(fmt.Sprintf("row %d", line), "the header must name x (or x1, x2, …) and y (or y1, y2, …) columns")
	}
	req := &CompareRequest{csv: true}
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvReadError(err)
		}
		row, _ := cr.FieldPos(0)
		var s Sample
		for j, f := range rec {
			f = strings.TrimSpace(f)
			where := fmt.Sprintf("row %d, column %s", row, strings.ToLower(strings.TrimSpace(header[j])))
			switch k := cols[j].kind; k {
			case "id":
				if !utf8.ValidString(f) {
					return nil, Invalid(where, "the id is not valid UTF-8 text")
				}
				s.ID = f
			case "x", "y":
				if f == "" {
					continue
				}
				v, err := parseCell(f)
				if err != nil {
					return nil, Invalid(where, err.Error())
				}
				if k == "x" {
					s.X = append(s.X, v)
				} else {
					s.Y = append(s.Y, v)
				}
			default: // order, sx, sy
				if f == "" {
					continue
				}
				v, err := parseCell(f)
				if err != nil {
					return nil, Invalid(where, err.Error())
				}
				switch k {
				case "order":
					s.Order = &v
				case "sx":
					s.SX = &v
				case "sy":
					s.SY = &v
				}
			}
		}
		if len(s.X) == 0 {
			return nil, Invalid(fmt.Sprintf("row %d, column x", row), "every sample needs at least one x value")
		}
		if len(s.Y) == 0 {
			return nil, Invalid(fmt.Sprintf("row %d, column y", row), "every sample needs at least one y value")
		}
		req.Samples = append(req.Samples, s)
		req.rows = append(req.rows, row)
	}
	return req, nil
}

// CompareRequestFromQuery fills the options of a CSV study from query
// parameters: x_name, y_name, unit, decision_levels (comma list),
// allowable_absolute, allowable_percent, error_model, lambda, confidence,
// resamples, seed, scheme, exclude (comma list of ids).
func CompareRequestFromQuery(q url.Values, req *CompareRequest) error {
	known := []string{"x_name", "y_name", "unit", "decision_levels", "allowable_absolute", "allowable_percent",
		"error_model", "lambda", "confidence", "resamples", "seed", "scheme", "exclude"}
	for k := range q {
		if !slices.Contains(known, k) {
			return Invalid("query parameter "+k, fmt.Sprintf("unknown query parameter %q", k))
		}
	}
	num := func(name string) (*float64, error) { return queryFloat(q, name) }
	req.XName, req.YName, req.Unit, req.ErrorModel = q.Get("x_name"), q.Get("y_name"), q.Get("unit"), q.Get("error_model")
	var err error
	if req.Lambda, err = num("lambda"); err != nil {
		return err
	}
	if req.Confidence, err = num("confidence"); err != nil {
		return err
	}
	abs, err := num("allowable_absolute")
	if err != nil {
		return err
	}
	pct, err := num("allowable_percent")
	if err != nil {
		return err
	}
	if abs != nil || pct != nil {
		req.AllowableBias = &Allowable{Absolute: abs, Percent: pct}
	}
	levels, err := queryFloats(q, "decision_levels")
	if err != nil {
		return err
	}
	for _, v := range levels {
		req.DecisionLevels = append(req.DecisionLevels, DecisionLevel{Level: v})
	}
	req.Exclude = SplitList(q.Get("exclude"))
	fq := url.Values{}
	for _, k := range []string{"resamples", "seed", "scheme"} {
		if v := q.Get(k); v != "" {
			fq.Set(k, v)
		}
	}
	fr, err := FitRequestFromQuery(fq, &Dataset{csv: true})
	if err != nil {
		return err
	}
	req.Bootstrap = fr.Bootstrap
	return nil
}

// CompareFromCSV decodes a CSV study and takes its options from the query
// parameters: POST /v1/method-comparison with a text/csv body.
func CompareFromCSV(r io.Reader, q url.Values) (*CompareRequest, error) {
	req, err := DecodeCompareCSV(r)
	if err != nil {
		return nil, err
	}
	return req, CompareRequestFromQuery(q, req)
}

// SetOptions copies every option of o (all but the samples) into req.
func (req *CompareRequest) SetOptions(o *CompareRequest) {
	samples, csv, rows := req.Samples, req.csv, req.rows
	*req = *o
	req.Samples, req.csv, req.rows = samples, csv, rows
}
