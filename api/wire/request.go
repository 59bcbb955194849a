package wire

import (
	"fmt"
	"io"
	"net/url"
	"strconv"
	"strings"

	"eivfit/eiv/study"
)

// FitRequest is the body of POST /v1/fit; `eivfit fit` builds the same
// value from a CSV file and its flags.
type FitRequest struct {
	// Points are the paired measurements.
	Points Dataset `json:"points"`
	// Methods to fit: any of ols, deming, weighted_deming, passing_bablok,
	// york. Empty means every method the data support (passing_bablok is
	// fitted only when asked for).
	Methods []string `json:"methods,omitempty"`
	// Lambda is the error-variance ratio var(y error)/var(x error) for the
	// Deming fits. Nil means: derived from sx and sy when stated, else 1.
	Lambda *float64 `json:"lambda,omitempty"`
	// Confidence is the level of every interval; nil means 0.95.
	Confidence *float64 `json:"confidence,omitempty"`
	// Bootstrap, when its Resamples > 0, adds bootstrap intervals.
	Bootstrap *BootstrapOptions `json:"bootstrap,omitempty"`
	// At lists x values at which to report the fitted y and the bias y − x.
	At []float64 `json:"at,omitempty"`
	// XUnit and YUnit are the units of x and y; when they differ, nothing
	// compares y with x (see FitResponse.WithUnits).
	XUnit string `json:"x_unit,omitempty"`
	YUnit string `json:"y_unit,omitempty"`
}

// BootstrapOptions select the bootstrap.
type BootstrapOptions struct {
	Resamples int     `json:"resamples"`
	Seed      *uint64 `json:"seed,omitempty"`
	Scheme    string  `json:"scheme,omitempty"` // "pairs" (default) or "parametric"
}

// Limits are what the decoders count a body's lists against while they
// read it: the study's limits (points or samples, "at" values and decision
// levels) and the datasets of a batch.
type Limits struct {
	study.Limits
	// MaxBatch bounds the datasets of one batch request; the server sets
	// it from its Config.MaxBatch.
	MaxBatch int
}

// DefaultLimits are the decoders' limits for a body read without the
// server's (DefaultLimits of the study, 1000 datasets per batch).
var DefaultLimits = Limits{Limits: study.DefaultLimits, MaxBatch: 1000}

// FitRequestFromQuery builds the options of a CSV fit from query parameters:
// methods (comma list), lambda, confidence, resamples, seed, scheme, at
// (comma list). Errors point at "query parameter NAME".
func FitRequestFromQuery(q url.Values, d *Dataset) (*FitRequest, error) {
	req := &FitRequest{Points: *d}
	if err := fitParams.check(q); err != nil {
		return nil, err
	}
	num := func(name string) (*float64, error) { return queryFloat(q, name) }
	var err error
	req.Methods = queryList(q, "methods")
	if req.Lambda, err = num("lambda"); err != nil {
		return nil, err
	}
	if req.Confidence, err = num("confidence"); err != nil {
		return nil, err
	}
	if s := q.Get("resamples"); s != "" || q.Get("seed") != "" || q.Get("scheme") != "" {
		req.Bootstrap = &BootstrapOptions{Scheme: q.Get("scheme")}
		if s != "" {
			n, err := QueryInt("query parameter resamples", s)
			if err != nil {
				return nil, err
			}
			req.Bootstrap.Resamples = n
		}
		if s := q.Get("seed"); s != "" {
			v, err := strconv.ParseUint(s, 10, 64)
			if err != nil {
				return nil, Invalid("query parameter seed", fmt.Sprintf("%q is not a non-negative integer", Truncate(s)))
			}
			req.Bootstrap.Seed = &v
		}
	}
	if req.At, err = queryFloats(q, "at"); err != nil {
		return nil, err
	}
	req.XUnit, req.YUnit = q.Get("x_unit"), q.Get("y_unit")
	for _, name := range []string{"x_unit", "y_unit"} {
		if err := nameLength("query parameter "+name, q.Get(name)); err != nil {
			return nil, err
		}
	}
	return req, nil
}

// fitParams are the query parameters of a CSV fit.
var fitParams = paramSpec{single: []string{"lambda", "confidence", "resamples", "seed", "scheme", "x_unit", "y_unit"},
	lists: []string{"methods", "at"}, numeric: []string{"at"}}

// queryFloat reads an optional finite number from the query.
func queryFloat(q url.Values, name string) (*float64, error) {
	s := q.Get(name)
	if s == "" {
		return nil, nil
	}
	v, err := finiteQuery(name, s)
	if err != nil {
		return nil, err
	}
	return &v, nil
}

// queryFloats reads an optional comma list of finite numbers from the
// query (a repeated parameter appends).
func queryFloats(q url.Values, name string) ([]float64, error) {
	var out []float64
	for _, f := range queryList(q, name) {
		v, err := finiteQuery(name, f)
		if err != nil {
			return nil, err
		}
		out = append(out, v)
	}
	return out, nil
}

func finiteQuery(name, s string) (float64, error) {
	v, err := parseCell(s)
	if err != nil {
		return 0, Invalid("query parameter "+name, err.Error())
	}
	return v, nil
}

// SplitList splits a comma list, dropping blanks.
func SplitList(s string) []string {
	var out []string
	for _, f := range strings.Split(s, ",") {
		if f = strings.TrimSpace(f); f != "" {
			out = append(out, f)
		}
	}
	return out
}

// Options are the request's fit options with the server's settings.
func (req *FitRequest) Options(set study.Settings) *study.FitOptions {
	return &study.FitOptions{Methods: req.Methods, Lambda: req.Lambda, Confidence: req.Confidence,
		Bootstrap: req.Bootstrap.options(), At: req.At, Settings: set}
}

// Source says how the request came, to locate its errors.
func (req *FitRequest) Source() *Source { return req.Points.source(req.Methods) }

func (b *BootstrapOptions) options() *study.BootstrapOptions {
	if b == nil {
		return nil
	}
	return &study.BootstrapOptions{Resamples: b.Resamples, Seed: b.Seed, Scheme: b.Scheme}
}

// FitFromCSV decodes a CSV dataset and takes the fit's options from the
// query parameters: POST /v1/fit with a text/csv body.
func FitFromCSV(r io.Reader, q url.Values) (*FitRequest, error) {
	o, rest, err := TakeCSVOptions(q)
	if err != nil {
		return nil, err
	}
	if o.GroupBy != "" {
		return nil, groupByElsewhere()
	}
	d, err := DecodeCSVWith(r, o)
	if err != nil {
		return nil, err
	}
	return fitRequestOf(d, rest)
}

// fitRequestOf is the fit request of a decoded CSV dataset: the options of
// rest, and the units the export's header or units row gave.
func fitRequestOf(d *Dataset, rest url.Values) (*FitRequest, error) {
	req, err := FitRequestFromQuery(rest, d)
	if err != nil {
		return nil, err
	}
	req.TakeUnits()
	return req, nil
}

// TakeUnits sets x_unit and y_unit from the export's header or units row
// where they were not given.
func (req *FitRequest) TakeUnits() {
	if req.XUnit == "" {
		req.XUnit = req.Points.xUnit
	}
	if req.YUnit == "" {
		req.YUnit = req.Points.yUnit
	}
}

// Response is the answer to the request: the fit with its units and how
// its export was read.
func (req *FitRequest) Response(r *study.FitResult) *FitResponse {
	resp := NewFitResponse(r).WithUnits(req.XUnit, req.YUnit)
	resp.Input = req.Points.input
	return resp
}
