package wire

import (
	"encoding/json"
	"fmt"
	"io"
	"slices"
	"strings"
)

// BatchRequest is the body of POST /v1/batch: many named datasets (for
// example every analyte of one study), each a complete fit request or
// method comparison, with options shared by all of them in Defaults.
type BatchRequest struct {
	// Defaults are options every dataset takes unless it sets its own
	// (the dataset's member replaces the default whole).
	Defaults json.RawMessage   `json:"defaults,omitempty"`
	Datasets []json.RawMessage `json:"datasets"`

	fit   *FitRequest     // the defaults for fits
	cmp   *CompareRequest // the defaults for method comparisons
	heads []datasetHead
}

// The kinds of dataset a batch holds.
const (
	DatasetFit        = "fit"
	DatasetComparison = "method-comparison"
)

// BatchEntry is one dataset of a batch: a fit request (Kind "fit", the
// default) or a method comparison (Kind "method-comparison", in
// Comparison), with a name.
type BatchEntry struct {
	Name string `json:"name,omitempty"`
	Kind string `json:"kind,omitempty"`
	FitRequest
	Comparison *CompareRequest `json:"-"`
}

// BatchResponse holds one result per dataset, in request order. A dataset
// that cannot be fitted has its own problem and does not fail the others.
type BatchResponse struct {
	Results []BatchResult `json:"results"`
	OK      int           `json:"ok"`
	Failed  int           `json:"failed"`
}

// BatchResult is the outcome of one dataset: Fit or Comparison when
// Status is 200, otherwise Problem.
type BatchResult struct {
	Name   string       `json:"name"`
	Status int          `json:"status"`
	Fit    *FitResponse `json:"fit,omitempty"`
	// Comparison is a method comparison's answer (a dataset of kind
	// method-comparison, or a CSV split by group_by on
	// /v1/method-comparison).
	Comparison *CompareResponse `json:"comparison,omitempty"`
	Problem    *Problem         `json:"problem,omitempty"`
}

// The members of defaults: the options of a fit, of a method comparison,
// or of both. Data and sample ids stay with their dataset.
var (
	sharedDefaultKeys  = []string{"lambda", "confidence", "bootstrap"}
	fitDefaultKeys     = []string{"methods", "at", "x_unit", "y_unit"}
	compareDefaultKeys = []string{"x_name", "y_name", "unit", "decision_levels", "allowable_bias", "error_model"}
	defaultKeys        = slices.Concat(sharedDefaultKeys, fitDefaultKeys, compareDefaultKeys)
)

// datasetHead is what a batch knows of a dataset before decoding it: its
// name and kind (when they read as strings) and which of the defaults'
// members it sets (bit i for defaultKeys[i]; other keys are not kept, so
// a dataset of a million keys costs nothing here).
type datasetHead struct {
	object bool
	name   string
	kind   string // "" when absent: a fit
	sets   uint32
}

// has says whether the dataset sets default member k.
func (h datasetHead) has(k string) bool {
	i := slices.Index(defaultKeys, k)
	return i >= 0 && h.sets&(1<<i) != 0
}

// readHead reads the top level of a dataset leniently; the strict reading
// comes when the dataset is decoded. The bytes have passed the batch's
// syntax check.
func readHead(raw []byte) (h datasetHead) {
	p := &pointParser{b: raw}
	p.ws()
	if p.pos >= len(p.b) || p.b[p.pos] != '{' {
		return h
	}
	h.object = true
	p.pos++
	for {
		p.ws()
		if p.pos < len(p.b) && p.b[p.pos] == '}' {
			return h
		}
		kb, ok := p.key()
		if !ok {
			return h
		}
		k := string(kb)
		if i := slices.Index(defaultKeys, k); i >= 0 {
			h.sets |= 1 << i
		}
		p.ws()
		if p.pos >= len(p.b) || p.b[p.pos] != ':' {
			return h
		}
		p.pos++
		p.ws()
		if (k == "name" || k == "kind") && p.pos < len(p.b) && p.b[p.pos] == '"' {
			s, ok := p.str()
			if !ok {
				return h
			}
			if k == "name" && len(s) <= maxNameBytes {
				h.name = s
			} else if k == "kind" {
				h.kind = s
			}
		} else if _, err := p.skip(0); err != nil {
			return h
		}
		p.ws()
		if p.pos < len(p.b) && p.b[p.pos] == ',' {
			p.pos++
		}
	}
}

// kindOf is a dataset's kind as the defaults see it: "" when it cannot be
// told before decoding (not an object, an unknown kind).
func (h datasetHead) kindOf() string {
	switch {
	case !h.object:
		return ""
	case h.kind == "" || h.kind == DatasetFit:
		return DatasetFit
	case h.kind == DatasetComparison:
		return DatasetComparison
	}
	return ""
}

// Name is dataset i's name, or "dataset i" (0-based, as in its pointer
// /datasets/i) when it has none; a dataset that fails to decode keeps the
// name it gave.
func (req *BatchRequest) Name(i int) string {
	if i < len(req.heads) && req.heads[i].name != "" {
		return req.heads[i].name
	}
	return fmt.Sprintf("dataset %d", i)
}

// Kind is dataset i's kind when it reads as one ("fit" or
// "method-comparison"), else "".
func (req *BatchRequest) Kind(i int) string {
	if i < len(req.heads) {
		return req.heads[i].kindOf()
	}
	return ""
}

// decodeDefaults reads the batch's defaults strictly (pointers under
// /defaults), then refuses a default that no dataset takes: one for a kind
// the batch does not hold, or one every dataset of its kind sets itself.
func (req *BatchRequest) decodeDefaults(lim Limits) error {
	req.heads = make([]datasetHead, len(req.Datasets))
	for i, raw := range req.Datasets {
		req.heads[i] = readHead(raw)
	}
	if req.Defaults == nil {
		return nil
	}
	fit, cmp, given, err := decodeOptions(req.Defaults, "/defaults", lim)
	if err != nil {
		return err
	}
	for _, k := range given {
		if err := req.defaultUsed(k); err != nil {
			return err
		}
	}
	req.fit, req.cmp = fit, cmp
	return nil
}

// decodeOptions reads an object of options (the members of a batch's
// defaults) strictly, pointers under ptr: the fit options into fit, the
// comparison options into cmp, the shared ones into both; given lists the
// members in the order given.
func decodeOptions(b []byte, ptr string, lim Limits) (fit *FitRequest, cmp *CompareRequest, given []string, err error) {
	p := &pointParser{b: b, lim: lim}
	fit, cmp = &FitRequest{}, &CompareRequest{}
	err = p.object(ptr, func(key []byte) error {
		k := string(key)
		given = append(given, k)
		switch {
		case slices.Contains(fitDefaultKeys, k):
			return p.fitMember(fit, key, ptr)
		case slices.Contains(compareDefaultKeys, k):
			return prefixedErr(p.compareMember(cmp, key), ptr)
		case slices.Contains(sharedDefaultKeys, k):
			if err := p.fitMember(fit, key, ptr); err != nil {
				return err
			}
			cmp.Lambda, cmp.Confidence, cmp.Bootstrap = fit.Lambda, fit.Confidence, fit.Bootstrap
			return nil
		case k == "name" || k == "kind" || k == "points" || k == "samples" || k == "exclude":
			return Invalid(ptr+"/"+k, fmt.Sprintf("%q belongs to each dataset, not to shared options (they hold: %s)", k, strings.Join(defaultKeys, ", ")))
		}
		return p.unknownKey(ptr, key, defaultKeys)
	}, defaultKeys)
	if err == nil {
		p.ws()
		if p.pos != len(p.b) {
			err = Invalid(ptr, "holds more than one JSON value")
		}
	}
	return fit, cmp, given, err
}

// defaultUsed refuses default k when no dataset takes it. A dataset whose
// kind cannot be told yet counts as taking it (its own problem follows).
func (req *BatchRequest) defaultUsed(k string) error {
	kinds := []string{DatasetFit, DatasetComparison}
	switch {
	case slices.Contains(fitDefaultKeys, k):
		kinds = kinds[:1]
	case slices.Contains(compareDefaultKeys, k):
		kinds = kinds[1:]
	}
	of := false
	for _, h := range req.heads {
		kind := h.kindOf()
		if kind == "" {
			return nil
		}
		if slices.Contains(kinds, kind) {
			of = true
			if !h.has(k) {
				return nil
			}
		}
	}
	what := "fit"
	if len(kinds) == 1 && kinds[0] == DatasetComparison {
		what = "method comparison"
	} else if len(kinds) == 2 {
		what = "dataset"
	}
	if !of {
		return Invalid("/defaults/"+k, fmt.Sprintf("default %q applies to no dataset: the batch holds no %s", k, what))
	}
	return Invalid("/defaults/"+k, fmt.Sprintf("default %q applies to no dataset: every %s sets its own", k, what))
}

// Entry decodes dataset i strictly, its lists counted against lim, over a
// copy of the defaults of its kind; pointers are relative to the dataset.
func (req *BatchRequest) Entry(i int, lim Limits) (*BatchEntry, error) {
	e := &BatchEntry{}
	return e, decodeBatchEntry(req.Datasets[i], e, lim, req.fit, req.cmp)
}

// DecodeBatchEntry reads one dataset of a batch strictly (no defaults),
// counting its lists against lim; its pointers are relative to the
// dataset.
func DecodeBatchEntry(raw []byte, lim Limits) (*BatchEntry, error) {
	e := &BatchEntry{}
	return e, decodeBatchEntry(raw, e, lim, nil, nil)
}

var (
	batchFitKeys     = append([]string{"name", "kind"}, fitKeys...)
	batchCompareKeys = append([]string{"name", "kind"}, compareKeys...)
)

// decodeBatchEntry reads one dataset of a batch over the defaults fit and
// cmp (nil: none); its pointers are relative to the dataset (the batch
// prefixes /datasets/i).
func decodeBatchEntry(raw []byte, e *BatchEntry, lim Limits, fit *FitRequest, cmp *CompareRequest) error {
	*e = BatchEntry{}
	h := readHead(raw)
	p := &pointParser{b: raw, lim: lim}
	if h.object && h.kind == DatasetComparison {
		e.Kind = DatasetComparison
		e.Comparison = cmp.clone()
		return p.document("", func(key []byte) error {
			switch string(key) {
			case "name", "kind":
				return p.head(e, key)
			case "points":
				return Invalid("/points", `a method comparison takes "samples" (each {"id", "x", "y"}), not "points"`)
			}
			return p.compareMember(e.Comparison, key)
		}, batchCompareKeys)
	}
	e.Kind = DatasetFit
	if fit != nil {
		e.FitRequest = *fit.clone()
	}
	return p.document("", func(key []byte) error {
		switch string(key) {
		case "name", "kind":
			return p.head(e, key)
		case "samples":
			return Invalid("/samples", `"samples" belong to a method comparison: add "kind": "method-comparison" to the dataset`)
		}
		return p.fitMember(&e.FitRequest, key, "")
	}, batchFitKeys)
}

// head reads a dataset's name or kind.
func (p *pointParser) head(e *BatchEntry, key []byte) error {
	if string(key) == "name" {
		s, err := p.text("/name", true)
		e.Name = s
		return err
	}
	s, err := p.text("/kind", true)
	if err == nil && s != "" && s != DatasetFit && s != DatasetComparison {
		err = Invalid("/kind", fmt.Sprintf("kind %q is not known: use %q (the default) or %q", Truncate(s), DatasetFit, DatasetComparison))
	}
	return err
}

// clone copies a fit request's options (not its points), so that datasets
// never share a list.
func (req *FitRequest) clone() *FitRequest {
	c := &FitRequest{Methods: slices.Clone(req.Methods), At: slices.Clone(req.At), XUnit: req.XUnit, YUnit: req.YUnit,
		Lambda: clonePtr(req.Lambda), Confidence: clonePtr(req.Confidence), Bootstrap: req.Bootstrap.clone()}
	return c
}

// clone copies a comparison's options (nil: none).
func (req *CompareRequest) clone() *CompareRequest {
	if req == nil {
		return &CompareRequest{}
	}
	c := &CompareRequest{XName: req.XName, YName: req.YName, Unit: req.Unit, ErrorModel: req.ErrorModel,
		DecisionLevels: slices.Clone(req.DecisionLevels), AllowableBias: clonePtr(req.AllowableBias),
		Lambda: clonePtr(req.Lambda), Confidence: clonePtr(req.Confidence), Bootstrap: req.Bootstrap.clone()}
	for i, l := range c.DecisionLevels {
		c.DecisionLevels[i].AllowableBias = clonePtr(l.AllowableBias)
	}
	return c
}

func clonePtr[T any](v *T) *T {
	if v == nil {
		return nil
	}
	c := *v
	return &c
}

func (b *BootstrapOptions) clone() *BootstrapOptions {
	if b == nil {
		return nil
	}
	c := *b
	c.Seed = clonePtr(b.Seed)
	return &c
}

// DecodeBatch reads a batch body: {"defaults": {...}, "datasets": [...]},
// counting the datasets against the limits (the server's, for a *Body it
// read; else DefaultLimits) as they are read, and the defaults' lists too.
// Each dataset is kept as its bytes, and read by Entry when it is fitted.
func DecodeBatch(r io.Reader) (*BatchRequest, error) {
	lim := limitsOf(r)
	body, err := readBody(r)
	if err != nil {
		return nil, err
	}
	req := &BatchRequest{}
	return req, decodeBatch(body, req, lim)
}

var batchKeys = []string{"defaults", "datasets"}

// decodeBatch reads a batch body, counting datasets against lim.MaxBatch
// as they are read. Each dataset's bytes are kept as a slice of the body
// (no copy) and decoded when it is fitted; the defaults are read at once.
func decodeBatch(body []byte, req *BatchRequest, lim Limits) error {
	p := &pointParser{b: body}
	*req = BatchRequest{}
	err := p.document("", func(key []byte) error {
		switch string(key) {
		case "defaults":
			start, err := p.skip(0)
			req.Defaults = json.RawMessage(p.b[start:p.pos:p.pos])
			if string(req.Defaults) == "null" {
				req.Defaults = nil
			}
			return err
		case "datasets":
			req.Datasets = nil
			return p.array("/datasets", lim.MaxBatch, KindInvalid, "datasets per batch", func(i int) error {
				start, err := p.skip(0)
				if err != nil {
					return err
				}
				req.Datasets = append(req.Datasets, json.RawMessage(p.b[start:p.pos:p.pos]))
				return nil
			})
		}
		return p.unknownKey("", key, batchKeys)
	}, batchKeys)
	if err != nil {
		return err
	}
	return req.decodeDefaults(lim)
}
