package wire

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"net/http"
	"net/url"
	"slices"
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

// UnmarshalJSON decodes strictly, so that a misspelt option inside
// "bootstrap" is named.
func (b *BootstrapOptions) UnmarshalJSON(data []byte) error {
	type plain BootstrapOptions
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	var p plain
	if err := dec.Decode(&p); err != nil {
		return jsonProblem(err, "/bootstrap")
	}
	*b = BootstrapOptions(p)
	return nil
}

// DecodeFitJSON reads a FitRequest from JSON, strictly: unknown fields,
// trailing data, non-numbers and numbers outside the double range are
// errors naming the field.
func DecodeFitJSON(r io.Reader) (*FitRequest, error) {
	body, err := readBody(r)
	if err != nil {
		return nil, err
	}
	if req, ok, err := decodeFitFast(body); ok {
		return req, err
	}
	// Not a well-formed object: the general decoder finds and names the fault.
	var req FitRequest
	if err := decodeStrict(bytes.NewReader(body), &req); err != nil {
		return nil, err
	}
	return &req, nil
}

// decodeStrict reads one JSON value into v: unknown fields and trailing
// data are errors, and a syntax error is reported at the pointer of the
// value where it occurred.
func decodeStrict(r io.Reader, v any) error {
	body, err := io.ReadAll(r)
	if err != nil {
		var mbe *http.MaxBytesError
		if errors.As(err, &mbe) {
			return mbe
		}
		return Invalid("", "the body could not be read")
	}
	dec := json.NewDecoder(bytes.NewReader(body))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		var se *json.SyntaxError
		if errors.As(err, &se) {
			ptr := pointerAt(body, se.Offset-1)
			detail := fmt.Sprintf("the body is not valid JSON at byte %d (%s)", se.Offset, se.Error())
			if at := se.Offset - 1; at >= 0 && at < int64(len(body)) && strings.IndexByte("NIn", body[at]) >= 0 {
				detail += "; numbers must be finite JSON numbers, not NaN or Infinity"
			}
			return Invalid(ptr, detail)
		}
		return jsonProblem(err, "")
	}
	if _, err := dec.Token(); err != io.EOF {
		return Invalid("", "the body holds more than one JSON value")
	}
	return nil
}

// jsonProblem maps an encoding/json error to a problem naming the field.
func jsonProblem(err error, base string) error {
	var p *Problem
	var mbe *http.MaxBytesError
	var se *json.SyntaxError
	var te *json.UnmarshalTypeError
	switch {
	case errors.As(err, &p), errors.As(err, &mbe):
		return err
	case errors.Is(err, io.EOF):
		if base == "" {
			return Invalid("", "the body is empty; send a JSON object such as {\"points\": [...]}")
		}
		return Invalid(base, "unexpected end of the JSON value")
	case errors.Is(err, io.ErrUnexpectedEOF):
		return Invalid(base, "the JSON body ends too early")
	case errors.As(err, &se):
		return Invalid(base, fmt.Sprintf("the body is not valid JSON (at byte %d: %s)", se.Offset, se.Error()))
	case errors.As(err, &te):
		ptr := base
		if te.Field != "" {
			ptr = base + "/" + strings.ReplaceAll(te.Field, ".", "/")
		}
		if ptr == "" {
			return Invalid("", "the body must be a JSON object")
		}
		if strings.HasPrefix(te.Value, "number") && te.Type.Kind().String() == "float64" {
			return Invalid(ptr, "the number is outside the double-precision range")
		}
		return Invalid(ptr, fmt.Sprintf("must be %s, not %s", jsonTypeName(te.Type.String()), te.Value))
	}
	msg := err.Error()
	if name, ok := strings.CutPrefix(msg, "json: unknown field "); ok {
		name = strings.Trim(name, `"`)
		return Invalid(base+"/"+escapePointer(name), fmt.Sprintf("unknown field %q", name))
	}
	return Invalid(base, "the body could not be decoded: "+msg)
}

func jsonTypeName(t string) string {
	switch t {
	case "float64", "*float64":
		return "a number"
	case "int", "*int":
		return "an integer"
	case "uint64", "*uint64":
		return "a non-negative integer"
	case "string":
		return "a string"
	case "[]string":
		return "an array of strings"
	case "[]float64":
		return "an array of numbers"
	}
	if strings.HasPrefix(t, "*api.") || strings.HasPrefix(t, "api.") {
		return "an object"
	}
	return t
}

// FitRequestFromQuery builds the options of a CSV fit from query parameters:
// methods (comma list), lambda, confidence, resamples, seed, scheme, at
// (comma list). Errors point at "query parameter NAME".
func FitRequestFromQuery(q url.Values, d *Dataset) (*FitRequest, error) {
	req := &FitRequest{Points: *d}
	for k := range q {
		if !slices.Contains([]string{"methods", "lambda", "confidence", "resamples", "seed", "scheme", "at", "x_unit", "y_unit"}, k) {
			return nil, Invalid("query parameter "+k, fmt.Sprintf("unknown query parameter %q", k))
		}
	}
	num := func(name string) (*float64, error) { return queryFloat(q, name) }
	var err error
	if s := q.Get("methods"); s != "" {
		req.Methods = SplitList(s)
	}
	if req.Lambda, err = num("lambda"); err != nil {
		return nil, err
	}
	if req.Confidence, err = num("confidence"); err != nil {
		return nil, err
	}
	if s := q.Get("resamples"); s != "" || q.Get("seed") != "" || q.Get("scheme") != "" {
		req.Bootstrap = &BootstrapOptions{Scheme: q.Get("scheme")}
		if s != "" {
			n, err := strconv.Atoi(s)
			if err != nil {
				return nil, Invalid("query parameter resamples", fmt.Sprintf("%q is not an integer", truncate(s)))
			}
			req.Bootstrap.Resamples = n
		}
		if s := q.Get("seed"); s != "" {
			v, err := strconv.ParseUint(s, 10, 64)
			if err != nil {
				return nil, Invalid("query parameter seed", fmt.Sprintf("%q is not a non-negative integer", truncate(s)))
			}
			req.Bootstrap.Seed = &v
		}
	}
	if req.At, err = queryFloats(q, "at"); err != nil {
		return nil, err
	}
	req.XUnit, req.YUnit = q.Get("x_unit"), q.Get("y_unit")
	return req, nil
}

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

// queryFloats reads an optional comma list of finite numbers from the query.
func queryFloats(q url.Values, name string) ([]float64, error) {
	var out []float64
	for _, f := range SplitList(q.Get(name)) {
		v, err := finiteQuery(name, f)
		if err != nil {
			return nil, err
		}
		out = append(out, v)
	}
	return out, nil
}

func finiteQuery(name, s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, Invalid("query parameter "+name, fmt.Sprintf("%q is not a finite number", truncate(s)))
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
	d, err := DecodeCSV(r)
	if err != nil {
		return nil, err
	}
	return FitRequestFromQuery(q, d)
}

// DecodeStrict reads one JSON value into v: unknown fields and trailing
// data are errors, and a syntax error is reported at the pointer of the
// value where it occurred.
func DecodeStrict(r io.Reader, v any) error { return decodeStrict(r, v) }
