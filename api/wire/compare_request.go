package wire

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"net/url"
	"regexp"
	"slices"
	"strconv"

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
	// input says how a CSV export was read; unit is the unit its header
	// or units row gave.
	input *InputOut
	unit  string
}

// Input says how a CSV export was read (nil when there is nothing to say).
func (req *CompareRequest) Input() *InputOut { return req.input }

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
	p := &pointParser{b: b}
	*a = Allowable{}
	return p.document("", func(key []byte) error { return p.allowableMember(a, key, "") }, allowableKeys)
}

var allowableKeys = []string{"absolute", "percent"}

func (p *pointParser) allowableMember(a *Allowable, key []byte, ptr string) error {
	switch string(key) {
	case "absolute":
		return p.optNumber(ptr+"/absolute", &a.Absolute)
	case "percent":
		return p.optNumber(ptr+"/percent", &a.Percent)
	}
	return p.unknownKey(ptr, key, allowableKeys)
}

// allowable reads an allowable bias or null.
func (p *pointParser) allowable(ptr string) (*Allowable, error) {
	if p.null() {
		return nil, nil
	}
	a := &Allowable{}
	return a, p.object(ptr, func(key []byte) error { return p.allowableMember(a, key, ptr) }, allowableKeys)
}

var levelKeys = []string{"level", "allowable_bias"}

// decisionLevel reads a number or {"level": ..., "allowable_bias": {...}}.
func (p *pointParser) decisionLevel(ptr string) (DecisionLevel, error) {
	var l DecisionLevel
	if p.pos < len(p.b) && p.b[p.pos] != '{' {
		v, err := p.number(ptr)
		if err != nil {
			err = Invalid(ptr, "a decision level is a number or {\"level\": ..., \"allowable_bias\": {...}}")
		}
		l.Level = v
		return l, err
	}
	var level *float64
	err := p.object(ptr, func(key []byte) error {
		switch string(key) {
		case "level":
			return p.optNumber(ptr+"/level", &level)
		case "allowable_bias":
			a, err := p.allowable(ptr + "/allowable_bias")
			l.AllowableBias = a
			return err
		}
		return p.unknownKey(ptr, key, levelKeys)
	}, levelKeys)
	if err != nil {
		return l, err
	}
	if level == nil {
		return l, Invalid(ptr+"/level", "level is required")
	}
	l.Level = *level
	return l, nil
}

var compareKeys = []string{"samples", "x_name", "y_name", "unit", "decision_levels", "allowable_bias",
	"error_model", "lambda", "confidence", "bootstrap", "exclude"}

var sampleKeys = []string{"id", "x", "y", "sx", "sy", "order", "runs", "x_runs", "y_runs"}

// DecodeCompareJSON reads a CompareRequest strictly, in one pass: every
// list (samples, replicates, decision levels, excluded ids) is counted
// against its limit as it is read.
func DecodeCompareJSON(r io.Reader) (*CompareRequest, error) {
	req := &CompareRequest{}
	if err := readDocument(r, compareKeys, func(p *pointParser, key []byte) error { return p.compareMember(req, key) }); err != nil {
		return nil, err
	}
	return req, nil
}

// compareMember reads the value of one member of a comparison request.
func (p *pointParser) compareMember(req *CompareRequest, key []byte) error {
	var err error
	switch string(key) {
	case "samples":
		req.Samples = nil
		if n := bytes.Count(p.b[p.pos:], []byte{'{'}); n > 0 {
			req.Samples = make([]Sample, 0, min(n, capLimit(p.lim.MaxPoints)))
		}
		return p.array("/samples", p.lim.MaxPoints, KindTooLarge, "samples", func(i int) error {
			s, err := p.sample(i)
			req.Samples = append(req.Samples, s)
			return err
		})
	case "x_name":
		req.XName, err = p.text("/x_name", true)
	case "y_name":
		req.YName, err = p.text("/y_name", true)
	case "unit":
		req.Unit, err = p.text("/unit", true)
	case "error_model":
		req.ErrorModel, err = p.text("/error_model", true)
	case "decision_levels":
		req.DecisionLevels = nil
		return p.array("/decision_levels", p.lim.MaxAt, KindInvalid, "decision levels", func(i int) error {
			l, err := p.decisionLevel(fmt.Sprintf("/decision_levels/%d", i))
			req.DecisionLevels = append(req.DecisionLevels, l)
			return err
		})
	case "allowable_bias":
		req.AllowableBias, err = p.allowable("/allowable_bias")
	case "lambda":
		err = p.optNumber("/lambda", &req.Lambda)
	case "confidence":
		err = p.optNumber("/confidence", &req.Confidence)
	case "bootstrap":
		req.Bootstrap = nil
		if !p.null() {
			req.Bootstrap = &BootstrapOptions{}
			err = p.bootstrap("/bootstrap", req.Bootstrap)
		}
	case "exclude":
		req.Exclude = nil
		return p.array("/exclude", p.lim.MaxPoints, KindTooLarge, "excluded ids", func(i int) error {
			s, err := p.text(fmt.Sprintf("/exclude/%d", i), false)
			req.Exclude = append(req.Exclude, s)
			return err
		})
	default:
		return p.unknownKey("", key, compareKeys)
	}
	return err
}

// capLimit is a limit as a capacity bound (0: none).
func capLimit(n int) int {
	if n <= 0 {
		return math.MaxInt
	}
	return n
}

// samplePtr is /list/i[/field[/k]] (list "samples" when empty), formatted
// only on an error.
type samplePtr struct {
	i     int
	field string
	list  string
}

func (s samplePtr) String() string {
	l := s.list
	if l == "" {
		l = "samples"
	}
	if s.field == "" {
		return fmt.Sprintf("/%s/%d", l, s.i)
	}
	return fmt.Sprintf("/%s/%d/%s", l, s.i, s.field)
}

// sample reads one sample object.
func (p *pointParser) sample(i int) (Sample, error) {
	var s Sample
	ptr := samplePtr{i: i}
	if p.pos >= len(p.b) || p.b[p.pos] != '{' {
		if _, err := p.skip(0); err != nil {
			return s, err
		}
		return s, Invalid(ptr.String(), "each sample must be an object such as {\"id\": \"S1\", \"x\": [1.2, 1.3], \"y\": 1.4}")
	}
	var seen [9]bool // by index in sampleKeys
	var r Runs
	p.pos++
	p.ws()
	if p.pos < len(p.b) && p.b[p.pos] == '}' {
		p.pos++
	} else {
		for {
			p.ws()
			kb, ok := p.key()
			if !ok {
				return s, p.syntax("a quoted key")
			}
			k := -1
			switch string(kb) {
			case "id":
				k = 0
			case "x":
				k = 1
			case "y":
				k = 2
			case "sx":
				k = 3
			case "sy":
				k = 4
			case "order":
				k = 5
			case "runs":
				k = 6
			case "x_runs":
				k = 7
			case "y_runs":
				k = 8
			default:
				return s, p.unknownKey(ptr.String(), kb, sampleKeys)
			}
			if seen[k] {
				return s, Invalid(ptr.String()+"/"+sampleKeys[k], fmt.Sprintf("%q appears twice", sampleKeys[k]))
			}
			seen[k] = true
			p.ws()
			if p.pos >= len(p.b) || p.b[p.pos] != ':' {
				return s, p.syntax("':' after the key")
			}
			p.pos++
			p.ws()
			fp := samplePtr{i: i, field: sampleKeys[k]}
			var err error
			switch k {
			case 0:
				s.ID, err = p.sampleID(fp)
			case 1:
				s.X, err = p.values(fp)
			case 2:
				s.Y, err = p.values(fp)
			case 3:
				s.SX, err = p.optLazyNumber(fp.String)
			case 4:
				s.SY, err = p.optLazyNumber(fp.String)
			case 5:
				s.Order, err = p.optLazyNumber(fp.String)
			case 6:
				r.X, err = p.runs(fp)
				r.Y = r.X
			case 7:
				r.X, err = p.runs(fp)
			case 8:
				r.Y, err = p.runs(fp)
			}
			if err != nil {
				return s, err
			}
			p.ws()
			if p.pos >= len(p.b) {
				return s, p.syntax("',' or '}'")
			}
			if p.b[p.pos] == ',' {
				p.pos++
				continue
			}
			if p.b[p.pos] == '}' {
				p.pos++
				break
			}
			return s, p.syntax("',' or '}'")
		}
	}
	if s.X == nil {
		return s, Invalid(ptr.String()+"/x", "required: a number, or an array of replicate numbers")
	}
	if s.Y == nil {
		return s, Invalid(ptr.String()+"/y", "required: a number, or an array of replicate numbers")
	}
	if seen[6] || seen[7] || seen[8] {
		s.Runs = &r
	}
	return s, checkSampleRuns(&s, ptr, seen[6], seen[7] || seen[8])
}

// Runs label a sample's replicates with their run or time.
type Runs = study.Runs

// checkSampleRuns checks a sample's run labels as read: runs (one label
// per pair, x and y alike) or x_runs and y_runs (one label per value of
// each method), never both, no label twice within a method.
func checkSampleRuns(s *Sample, ptr samplePtr, runs, split bool) error {
	if s.Runs == nil {
		return nil
	}
	r := s.Runs
	fp := func(f string) string { return ptr.String() + "/" + f }
	switch {
	case runs && split:
		return Invalid(fp("runs"), "give runs (the x and y replicates paired in order) or x_runs and y_runs, not both")
	case runs && (len(r.X) != len(s.X) || len(r.X) != len(s.Y)):
		return Invalid(fp("runs"), fmt.Sprintf("runs pairs the replicates in order: %d labels for %d x and %d y values (x_runs and y_runs label each method's replicates apart)", len(r.X), len(s.X), len(s.Y)))
	case split && (r.X == nil) != (r.Y == nil):
		return Invalid(fp(map[bool]string{true: "y_runs", false: "x_runs"}[r.Y == nil]), "x_runs and y_runs go together")
	case split && len(r.X) != len(s.X):
		return Invalid(fp("x_runs"), fmt.Sprintf("%d labels for %d x values: one run per replicate", len(r.X), len(s.X)))
	case split && len(r.Y) != len(s.Y):
		return Invalid(fp("y_runs"), fmt.Sprintf("%d labels for %d y values: one run per replicate", len(r.Y), len(s.Y)))
	}
	for _, f := range []struct {
		name string
		runs []string
	}{{map[bool]string{true: "runs", false: "x_runs"}[runs], r.X}, {"y_runs", r.Y}} {
		if runs && f.name == "y_runs" {
			break
		}
		for k, r := range f.runs {
			if slices.Contains(f.runs[:k], r) {
				return Invalid(fmt.Sprintf("%s/%d", fp(f.name), k), fmt.Sprintf("run %q appears twice in this sample: each replicate of a method needs its own run", Truncate(r)))
			}
		}
	}
	return nil
}

// runs reads an array of 1 to maxReplicates run labels (strings or numbers).
func (p *pointParser) runs(fp samplePtr) ([]string, error) {
	if p.null() {
		return nil, Invalid(fp.String(), "an array of run labels, one per replicate")
	}
	var out []string
	err := p.array(fp.String(), maxReplicates, KindInvalid, "run labels", func(k int) error {
		l, err := p.label(samplePtr{i: fp.i, field: fmt.Sprintf("%s/%d", fp.field, k)}, "a run label")
		if err == nil && l == "" {
			err = Invalid(fmt.Sprintf("%v/%d", fp, k), "a run label is a non-empty string or a number")
		}
		out = append(out, l)
		return err
	})
	if err == nil && len(out) == 0 {
		err = Invalid(fp.String(), fmt.Sprintf("give 1 to %d run labels", maxReplicates))
	}
	return out, err
}

// sampleID reads a string or number id (null: none).
func (p *pointParser) sampleID(fp samplePtr) (string, error) { return p.label(fp, "id") }

// label reads a string or number (null: none); what names it in an error.
func (p *pointParser) label(fp samplePtr, what string) (string, error) {
	if p.null() {
		return "", nil
	}
	if p.pos < len(p.b) && p.b[p.pos] == '"' {
		return p.text(fp.String(), false)
	}
	v, ok, err := p.num()
	if !ok || err != nil {
		if !ok {
			if _, serr := p.skip(0); serr != nil {
				return "", serr
			}
		}
		return "", Invalid(fp.String(), what+" must be a string or a number")
	}
	return strconv.FormatFloat(v, 'g', -1, 64), nil
}

// values reads a number or an array of 1 to maxReplicates numbers.
func (p *pointParser) values(fp samplePtr) ([]float64, error) {
	if p.null() {
		return nil, Invalid(fp.String(), "required: a number, or an array of replicate numbers")
	}
	if p.pos < len(p.b) && p.b[p.pos] == '[' {
		var buf [maxReplicates]float64
		out := buf[:0]
		err := p.array(fp.String(), maxReplicates, KindInvalid, "replicate values", func(k int) error {
			v, err := p.lazyNumber(func() string { return fmt.Sprintf("%v/%d", fp, k) })
			out = append(out, v)
			return err
		})
		if err != nil {
			return nil, err
		}
		if len(out) == 0 {
			return nil, Invalid(fp.String(), fmt.Sprintf("give 1 to %d replicate values", maxReplicates))
		}
		return slices.Clone(out), nil
	}
	v, err := p.lazyNumber(fp.String)
	if err != nil {
		return nil, err
	}
	return []float64{v}, nil
}

var replicateColumn = regexp.MustCompile(`^([xy])_?([0-9]{1,2})$`)

// DecodeCompareCSV reads a comparison study in wide form: a header naming
// id (optional), order (optional), the x replicates (x, or x1, x2, … / x_1,
// …) and the y replicates likewise, and optionally sx and sy. Empty
// replicate cells are allowed as long as each sample keeps one value per
// method; rows with the same id are replicates of one sample.
func DecodeCompareCSV(r io.Reader) (*CompareRequest, error) { return DecodeCompareCSVWith(r, nil) }

// compareParams are the query parameters of a CSV comparison.
var compareParams = paramSpec{single: []string{"x_name", "y_name", "unit", "allowable_absolute", "allowable_percent",
	"error_model", "lambda", "confidence", "resamples", "seed", "scheme"},
	lists: []string{"decision_levels", "exclude"}, numeric: []string{"decision_levels"}}

// CompareRequestFromQuery fills the options of a CSV study from query
// parameters: x_name, y_name, unit, decision_levels (comma list),
// allowable_absolute, allowable_percent, error_model, lambda, confidence,
// resamples, seed, scheme, exclude (comma list of ids).
func CompareRequestFromQuery(q url.Values, req *CompareRequest) error {
	if err := compareParams.check(q); err != nil {
		return err
	}
	num := func(name string) (*float64, error) { return queryFloat(q, name) }
	req.XName, req.YName, req.Unit, req.ErrorModel = q.Get("x_name"), q.Get("y_name"), q.Get("unit"), q.Get("error_model")
	for _, name := range []string{"x_name", "y_name", "unit", "error_model"} {
		if err := nameLength("query parameter "+name, q.Get(name)); err != nil {
			return err
		}
	}
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
	req.Exclude = queryList(q, "exclude")
	if lim := limitsOf(nil); len(req.Exclude) > lim.MaxPoints {
		return tooMany("query parameter exclude", lim.MaxPoints, "excluded ids", KindTooLarge)
	}
	for _, id := range req.Exclude {
		if err := nameLength("query parameter exclude", id); err != nil {
			return err
		}
	}
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
	o, rest, err := TakeCSVOptions(q)
	if err != nil {
		return nil, err
	}
	if o.GroupBy != "" {
		return nil, groupByElsewhere()
	}
	req, err := DecodeCompareCSVWith(r, o)
	if err != nil {
		return nil, err
	}
	if err := CompareRequestFromQuery(rest, req); err != nil {
		return nil, err
	}
	return req, req.TakeUnit("query parameter unit")
}

// TakeUnit sets the unit from the export unless given; a unit given that
// differs from the export's is an error naming where it was given.
func (req *CompareRequest) TakeUnit(where string) error {
	switch {
	case req.unit == "" || req.Unit == req.unit:
	case req.Unit == "":
		req.Unit = req.unit
	default:
		return Invalid(where, fmt.Sprintf("the unit given (%s) differs from the file's (%s)", Truncate(req.Unit), Truncate(req.unit)))
	}
	return nil
}

// SetOptions copies every option of o (all but the samples) into req.
func (req *CompareRequest) SetOptions(o *CompareRequest) {
	samples, csv, rows, input, unit := req.Samples, req.csv, req.rows, req.input, req.unit
	*req = *o
	req.Samples, req.csv, req.rows, req.input, req.unit = samples, csv, rows, input, unit
}

// nameLength refuses a name longer than maxNameBytes.
func nameLength(ptr, s string) error {
	if len(s) > maxNameBytes {
		return Invalid(ptr, fmt.Sprintf("at most %d bytes, not %d", maxNameBytes, len(s)))
	}
	return nil
}

// optLazyNumber reads a number or null, formatting the pointer only on an
// error.
func (p *pointParser) optLazyNumber(ptr func() string) (*float64, error) {
	if p.null() {
		return nil, nil
	}
	v, err := p.lazyNumber(ptr)
	return &v, err
}
