package api

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
}

// BootstrapOptions select the bootstrap.
type BootstrapOptions struct {
	Resamples int     `json:"resamples"`
	Seed      *uint64 `json:"seed,omitempty"`
	Scheme    string  `json:"scheme,omitempty"` // "pairs" (default) or "parametric"
}

// Limits bound what one request may ask for.
type Limits struct {
	MaxPoints    int // points per dataset
	MaxResamples int // bootstrap resamples per fit
	MaxAt        int // entries in "at", decision levels
	// MaxBatch bounds the datasets of one batch request; the server sets
	// it from Config.MaxBatch.
	MaxBatch int
}

// DefaultLimits serve real studies.
var DefaultLimits = Limits{MaxPoints: 1_000_000, MaxResamples: 100_000, MaxAt: 1000, MaxBatch: 1000}

// Method names, in the order fits are reported.
var methodNames = []string{"ols", "deming", "weighted_deming", "passing_bablok", "york"}

// decodeStrict reads one JSON value into v: unknown fields and trailing
// data are errors, and a syntax error is reported at the pointer of the
// value where it occurred.
func decodeStrict(r io.Reader, v any) error {
	switch v := v.(type) {
	case *BatchRequest: // read by the strict reader, counting datasets
		body, err := readBody(r)
		if err != nil {
			return err
		}
		return decodeBatch(body, v, limitsOf(r).MaxBatch)
	case *BatchEntry:
		body, err := readBody(r)
		if err != nil {
			return err
		}
		return decodeBatchEntry(body, v, limitsOf(r))
	}
	body, err := io.ReadAll(r)
	if err != nil {
		var mbe *http.MaxBytesError
		if errors.As(err, &mbe) {
			return mbe
		}
		return invalid("", "the body could not be read")
	}
	dec := json.NewDecoder(bytes.NewReader(body))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		var se *json.SyntaxError
		if errors.As(err, &se) {
			ptr := pointerAt(body, se.Offset-1)
			return invalid(ptr, fmt.Sprintf("the body is not valid JSON at byte %d (%s); numbers must be finite JSON numbers, not NaN or Infinity", se.Offset, se.Error()))
		}
		return jsonProblem(err, "")
	}
	if _, err := dec.Token(); err != io.EOF {
		return invalid("", "the body holds more than one JSON value")
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
			return invalid("", "the body is empty; send a JSON object such as {\"points\": [...]}")
		}
		return invalid(base, "unexpected end of the JSON value")
	case errors.Is(err, io.ErrUnexpectedEOF):
		return invalid(base, "the JSON body ends too early")
	case errors.As(err, &se):
		return invalid(base, fmt.Sprintf("the body is not valid JSON (at byte %d: %s)", se.Offset, se.Error()))
	case errors.As(err, &te):
		ptr := base
		if te.Field != "" {
			ptr = base + "/" + strings.ReplaceAll(te.Field, ".", "/")
		}
		if ptr == "" {
			return invalid("", "the body must be a JSON object")
		}
		if strings.HasPrefix(te.Value, "number") && te.Type.Kind().String() == "float64" {
			return invalid(ptr, "the number is outside the double-precision range")
		}
		return invalid(ptr, fmt.Sprintf("must be %s, not %s", jsonTypeName(te.Type.String()), te.Value))
	}
	msg := err.Error()
	if name, ok := strings.CutPrefix(msg, "json: unknown field "); ok {
		name = strings.Trim(name, `"`)
		return invalid(base+"/"+escapePointer(name), fmt.Sprintf("unknown field %q", name))
	}
	return invalid(base, "the body could not be decoded: "+msg)
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
		if !slices.Contains([]string{"methods", "lambda", "confidence", "resamples", "seed", "scheme", "at"}, k) {
			return nil, invalid("query parameter "+k, fmt.Sprintf("unknown query parameter %q", k))
		}
	}
	num := func(name string) (*float64, error) { return queryFloat(q, name) }
	var err error
	if s := q.Get("methods"); s != "" {
		req.Methods = splitList(s)
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
				return nil, invalid("query parameter resamples", fmt.Sprintf("%q is not an integer", truncate(s)))
			}
			req.Bootstrap.Resamples = n
		}
		if s := q.Get("seed"); s != "" {
			v, err := strconv.ParseUint(s, 10, 64)
			if err != nil {
				return nil, invalid("query parameter seed", fmt.Sprintf("%q is not a non-negative integer", truncate(s)))
			}
			req.Bootstrap.Seed = &v
		}
	}
	if req.At, err = queryFloats(q, "at"); err != nil {
		return nil, err
	}
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
	for _, f := range splitList(q.Get(name)) {
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
		return 0, invalid("query parameter "+name, err.Error())
	}
	return v, nil
}

func splitList(s string) []string {
	var out []string
	for _, f := range strings.Split(s, ",") {
		if f = strings.TrimSpace(f); f != "" {
			out = append(out, f)
		}
	}
	return out
}

// Validate checks the request against its documented ranges and the limits.
// It reports up to 20 offending fields at once.
func (req *FitRequest) Validate(lim Limits) error {
	var errs []FieldError
	add := func(ptr, format string, a ...any) {
		if len(errs) < 20 {
			errs = append(errs, FieldError{Pointer: ptr, Detail: fmt.Sprintf(format, a...)})
		}
	}
	d := &req.Points
	n := d.Len()
	param := func(name string) string {
		if d.csv {
			return "query parameter " + name
		}
		return "/" + name
	}
	if n == 0 {
		add(d.locate(-1, ""), "points are required: at least 3 pairs of x and y")
	}
	if lim.MaxPoints > 0 && n > lim.MaxPoints {
		p := newProblem(kindTooLarge, fmt.Sprintf("%d points exceed this server's limit of %d per dataset", n, lim.MaxPoints),
			FieldError{Pointer: d.locate(-1, ""), Detail: fmt.Sprintf("at most %d points", lim.MaxPoints)})
		return p
	}
	checkSigma := func(col []float64, name string) {
		for i, v := range col {
			if !(v >= 0) {
				add(d.locate(i, name), "%s must be a standard uncertainty ≥ 0, not %g", name, v)
			}
		}
	}
	checkSigma(d.SX, "sx")
	checkSigma(d.SY, "sy")
	for i, v := range d.R {
		if !(v > -1 && v < 1) {
			add(d.locate(i, "r"), "r must lie strictly between -1 and 1, not %g", v)
		}
	}
	seen := map[string]bool{}
	for k, m := range req.Methods {
		ptr := fmt.Sprintf("%s/%d", param("methods"), k)
		if d.csv {
			ptr = param("methods")
		}
		switch {
		case !slices.Contains(methodNames, m):
			add(ptr, "unknown method %q (known: %s)", truncate(m), strings.Join(methodNames, ", "))
		case seen[m]:
			add(ptr, "method %q is listed twice", m)
		}
		seen[m] = true
	}
	if req.Lambda != nil && !(*req.Lambda > 0 && !math.IsInf(*req.Lambda, 0)) {
		add(param("lambda"), "lambda (the error-variance ratio) must be a finite number greater than 0")
	}
	if req.Confidence != nil && !(*req.Confidence > 0 && *req.Confidence < 1) {
		add(param("confidence"), "confidence must lie strictly between 0 and 1, e.g. 0.95")
	}
	if b := req.Bootstrap; b != nil {
		for _, e := range validateBootstrap(b, d.SX != nil && d.SY != nil, d.csv, lim) {
			add(e.Pointer, "%s", e.Detail)
		}
	}
	if lim.MaxAt > 0 && len(req.At) > lim.MaxAt {
		add(param("at"), "at most %d values in at", lim.MaxAt)
	}
	if len(errs) > 0 {
		detail := errs[0].Detail
		if len(errs) > 1 {
			detail = fmt.Sprintf("%d fields are invalid; the first: %s", len(errs), detail)
		}
		return newProblem(kindInvalid, detail, errs...)
	}
	return nil
}

const minResamples = 100

// validateBootstrap checks bootstrap options; hasSigma says whether every
// point states sx and sy (the parametric scheme needs them).
func validateBootstrap(b *BootstrapOptions, hasSigma, csv bool, lim Limits) []FieldError {
	var errs []FieldError
	add := func(ptr, format string, a ...any) {
		errs = append(errs, FieldError{Pointer: ptr, Detail: fmt.Sprintf(format, a...)})
	}
	rp, sp := "/bootstrap/resamples", "/bootstrap/scheme"
	if csv {
		rp, sp = "query parameter resamples", "query parameter scheme"
	}
	switch {
	case b.Resamples < 0:
		add(rp, "resamples must be 0 (no bootstrap) or at least %d", minResamples)
	case b.Resamples > 0 && b.Resamples < minResamples:
		add(rp, "resamples must be 0 (no bootstrap) or at least %d for stable intervals", minResamples)
	case lim.MaxResamples > 0 && b.Resamples > lim.MaxResamples:
		add(rp, "resamples must not exceed this server's limit of %d", lim.MaxResamples)
	}
	switch b.Scheme {
	case "", "pairs":
	case "parametric":
		if !hasSigma {
			add(sp, "the parametric bootstrap draws around the fitted points with the stated uncertainties, so every point needs sx and sy")
		}
	default:
		add(sp, "scheme must be \"pairs\" or \"parametric\", not %q", truncate(b.Scheme))
	}
	return errs
}
