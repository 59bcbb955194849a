package wire

import (
	"bytes"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"net/url"
	"slices"
	"strings"
	"time"

	"eivfit/eiv/study"
)

// Record asks for a computation to be kept as a study: "save": true (or
// save=true in the query), an optional label and free tags.
type Record struct {
	Save  bool
	Label string
	Tags  map[string]string
}

// recordKeys are the top-level JSON keys and query parameters a Record
// takes from a request; the analysis never sees them.
var recordKeys = []string{"save", "label", "tags", "tag"}

// RecordFromQuery takes save, label and tag (repeatable, KEY:VALUE) out of
// q and returns the rest.
func RecordFromQuery(q url.Values) (Record, url.Values, error) {
	var r Record
	rest := url.Values{}
	for k, v := range q {
		if !slices.Contains(recordKeys, k) || k == "tags" {
			rest[k] = v
		}
	}
	for _, k := range []string{"save", "label"} {
		if len(q[k]) > 1 {
			return r, rest, Invalid("query parameter "+k, Repeated(len(q[k])))
		}
	}
	if v := q.Get("save"); v != "" {
		switch v {
		case "true":
			r.Save = true
		case "false":
		default:
			return r, rest, Invalid("query parameter save", fmt.Sprintf("save must be true or false, not %q", v))
		}
	}
	r.Label = q.Get("label")
	for _, t := range q["tag"] {
		k, v, ok := strings.Cut(t, ":")
		if !ok || k == "" {
			return r, rest, Invalid("query parameter tag", fmt.Sprintf("a tag is KEY:VALUE, such as analyte:glucose, not %q", t))
		}
		if r.Tags == nil {
			r.Tags = map[string]string{}
		}
		r.Tags[k] = v
	}
	return r, rest, nil
}

// TakeRecord takes the top-level "save", "label" and "tags" out of a JSON
// request body and returns the body without them (body itself when it has
// none of them). A body that is not a JSON object is returned unchanged,
// for the request's decoder to report.
func TakeRecord(body []byte) ([]byte, Record, error) {
	var r Record
	if !bytes.Contains(body, []byte(`"save"`)) && !bytes.Contains(body, []byte(`"label"`)) && !bytes.Contains(body, []byte(`"tags"`)) {
		return body, r, nil // an escaped key is left to the strict decoder, which names it
	}
	dec := json.NewDecoder(bytes.NewReader(body))
	dec.UseNumber()
	if t, err := dec.Token(); err != nil || t != json.Delim('{') {
		return body, r, nil
	}
	var kept [][]byte
	found := false
	for dec.More() {
		start := dec.InputOffset()
		t, err := dec.Token()
		if err != nil {
			return body, r, nil
		}
		key, _ := t.(string)
		var raw json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			return body, r, nil
		}
		switch key {
		case "save":
			found = true
			if err := json.Unmarshal(raw, &r.Save); err != nil {
				return nil, r, Invalid("/save", "save must be true or false")
			}
		case "label":
			found = true
			if err := json.Unmarshal(raw, &r.Label); err != nil {
				return nil, r, Invalid("/label", "label must be a string")
			}
		case "tags":
			found = true
			if err := json.Unmarshal(raw, &r.Tags); err != nil {
				return nil, r, Invalid("/tags", "tags must be an object of strings, such as {\"analyte\": \"glucose\"}")
			}
		default:
			pair := bytes.TrimLeft(body[start:dec.InputOffset()], " \t\r\n,")
			kept = append(kept, pair)
		}
	}
	if !found {
		return body, r, nil
	}
	out := append([]byte{'{'}, bytes.Join(kept, []byte{','})...)
	out = append(out, '}')
	return out, r, nil
}

// Check validates a record's label and tags, naming the field in the
// request's form (json: a JSON pointer; otherwise query parameters).
func (r Record) Check(json bool) error {
	for k := range r.Tags {
		if k == "" || strings.Contains(k, ":") {
			if json {
				return Invalid("/tags", fmt.Sprintf("tag key %q: keys are non-empty and without ':'", k))
			}
			return Invalid("query parameter tag", fmt.Sprintf("tag key %q: keys are non-empty and without ':'", k))
		}
	}
	if !r.Save && (r.Label != "" || len(r.Tags) > 0) {
		ptr := "/save"
		if !json {
			ptr = "query parameter save"
		}
		return Invalid(ptr, "label and tags describe a saved study: add save=true")
	}
	return nil
}

// StripRecordQuery removes the record's parameters from a raw query, as a
// stored study's query is replayed.
func StripRecordQuery(raw string) (url.Values, error) {
	q, err := ParseQuery(raw)
	if err != nil {
		return nil, err
	}
	_, rest, err := RecordFromQuery(q)
	return rest, err
}

// Created is the answer to a save: 201 with Location /v1/studies/{id}.
type Created struct {
	ID       string `json:"id"`
	Location string `json:"location"`
	Revision int    `json:"revision"`
	// Result is the computation's answer, as without save.
	Result json.RawMessage `json:"result"`
}

// StudyOut is GET /v1/studies/{id}: the record and its latest result.
type StudyOut struct {
	StudySummary
	ContentType string          `json:"content_type"`
	Query       string          `json:"query,omitempty"`
	Options     json.RawMessage `json:"options"`
	Seed        uint64          `json:"seed"`
	Version     string          `json:"version"`
	VCSRevision string          `json:"vcs_revision,omitempty"`
	Revision    int             `json:"revision"`
	Result      json.RawMessage `json:"result"`
	Signatures  []SignatureOut  `json:"signatures"`
}

// StudySummary is one study in a listing.
type StudySummary struct {
	ID          string            `json:"id"`
	Kind        string            `json:"kind"`
	Label       string            `json:"label,omitempty"`
	Tags        map[string]string `json:"tags,omitempty"`
	Created     time.Time         `json:"created"`
	Who         string            `json:"who,omitempty"`
	InputSHA256 string            `json:"input_sha256"`
	Latest      int               `json:"latest_revision"`
}

// SummaryOut converts a stored summary.
func SummaryOut(s *study.Summary) StudySummary {
	return StudySummary{ID: s.ID, Kind: string(s.Kind), Label: s.Label, Tags: s.Tags, Created: s.Created,
		Who: s.Who, InputSHA256: hex.EncodeToString(s.InputSHA256[:]), Latest: s.Latest}
}

// StudyList is GET /v1/studies.
type StudyList struct {
	Studies []StudySummary `json:"studies"`
	// Next is the cursor of the next page; absent on the last.
	Next string `json:"next,omitempty"`
}

// RevisionOut is one entry of GET /v1/studies/{id}/history.
type RevisionOut struct {
	Number     int             `json:"number"`
	BasedOn    int             `json:"based_on"`
	Reason     string          `json:"reason,omitempty"`
	Who        string          `json:"who,omitempty"`
	When       time.Time       `json:"when"`
	Excluded   []ExclusionIn   `json:"excluded,omitempty"`
	Options    json.RawMessage `json:"options,omitempty"`
	PrevHash   string          `json:"prev_hash"`
	Hash       string          `json:"hash"`
	Signatures []SignatureOut  `json:"signatures"`
}

// RevisionsOut converts a history.
func RevisionsOut(revs []study.Revision) []RevisionOut {
	out := make([]RevisionOut, len(revs))
	for i, r := range revs {
		o := RevisionOut{Number: r.Number, BasedOn: r.BasedOn, Reason: r.Reason, Who: r.Who, When: r.When,
			PrevHash: hex.EncodeToString(r.PrevHash[:]), Hash: hex.EncodeToString(r.Hash[:]),
			Signatures: SignaturesOut(r.Signatures)}
		for _, x := range r.Change.Excluded {
			o.Excluded = append(o.Excluded, ExclusionIn{ID: x.ID, Reason: x.Reason})
		}
		if len(r.Change.Options) > 0 {
			o.Options = r.Change.Options
		}
		out[i] = o
	}
	return out
}

// SignatureOut is one signature.
type SignatureOut struct {
	Revision     int       `json:"revision"`
	Meaning      string    `json:"meaning"`
	Signer       string    `json:"signer"`
	When         time.Time `json:"when"`
	Comment      string    `json:"comment,omitempty"`
	RevisionHash string    `json:"revision_hash"`
}

// SignaturesOut converts signatures (an empty list, never null).
func SignaturesOut(sigs []study.Signature) []SignatureOut {
	out := make([]SignatureOut, len(sigs))
	for i, s := range sigs {
		out[i] = SignatureOut{Revision: s.Revision, Meaning: string(s.Meaning), Signer: s.Signer, When: s.When,
			Comment: s.Comment, RevisionHash: hex.EncodeToString(s.RevisionHash[:])}
	}
	return out
}

// ExclusionIn leaves one point out of a revision, with its reason.
type ExclusionIn struct {
	ID     string `json:"id"`
	Reason string `json:"reason"`
}

// ReviseRequest is the body of POST /v1/studies/{id}/revisions.
type ReviseRequest struct {
	Reason  string        `json:"reason"`
	BasedOn *int          `json:"based_on"`
	Exclude []ExclusionIn `json:"exclude,omitempty"`
	// Options replace the named options of the stored request (the keys of
	// the study's JSON request, its data excepted).
	Options json.RawMessage `json:"options,omitempty"`
}

// maxReasonBytes bounds a revision's reasons and a signature's comment.
const maxReasonBytes = 4096

var (
	reviseKeys    = []string{"reason", "based_on", "exclude", "options"}
	exclusionKeys = []string{"id", "reason"}
	signKeys      = []string{"meaning", "comment"}
)

// reason reads a string of at most maxReasonBytes (null: "").
func (p *pointParser) reason(ptr string) (string, error) {
	if p.null() {
		return "", nil
	}
	s, ok := p.str()
	if !ok {
		if _, err := p.skip(0); err != nil {
			return "", err
		}
		return "", Invalid(ptr, "must be a string")
	}
	if len(s) > maxReasonBytes {
		return "", Invalid(ptr, fmt.Sprintf("at most %d bytes, not %d", maxReasonBytes, len(s)))
	}
	return s, nil
}

// DecodeRevise reads a ReviseRequest strictly, in one pass (the excluded
// points counted against the limit as they are read), and checks it.
func DecodeRevise(r io.Reader) (*ReviseRequest, error) {
	var req ReviseRequest
	err := readDocument(r, reviseKeys, func(p *pointParser, key []byte) error {
		var err error
		switch string(key) {
		case "reason":
			req.Reason, err = p.reason("/reason")
		case "based_on":
			req.BasedOn = nil
			if !p.null() {
				var v int64
				v, err = p.integer("/based_on", false)
				n := int(v)
				req.BasedOn = &n
			}
		case "exclude":
			req.Exclude = nil
			return p.array("/exclude", p.lim.MaxPoints, KindTooLarge, "excluded points", func(i int) error {
				var x ExclusionIn
				ptr := fmt.Sprintf("/exclude/%d", i)
				err := p.object(ptr, func(key []byte) error {
					var err error
					switch string(key) {
					case "id":
						x.ID, err = p.text(ptr+"/id", true)
					case "reason":
						x.Reason, err = p.reason(ptr + "/reason")
					default:
						return p.unknownKey(ptr, key, exclusionKeys)
					}
					return err
				}, exclusionKeys)
				req.Exclude = append(req.Exclude, x)
				return err
			})
		case "options":
			req.Options = nil
			if p.null() {
				return nil
			}
			start := p.pos
			if p.pos >= len(p.b) || p.b[p.pos] != '{' {
				if _, err := p.skip(0); err != nil {
					return err
				}
				return Invalid("/options", "options is a JSON object of the request's options")
			}
			if _, err := p.skip(0); err != nil {
				return err
			}
			req.Options = json.RawMessage(p.b[start:p.pos:p.pos])
		default:
			return p.unknownKey("", key, reviseKeys)
		}
		return err
	})
	if err != nil {
		return nil, err
	}
	if strings.TrimSpace(req.Reason) == "" {
		return nil, Invalid("/reason", "a revision needs a reason")
	}
	if req.BasedOn == nil {
		return nil, Invalid("/based_on", "based_on names the revision this one changes (the latest)")
	}
	if *req.BasedOn < 0 {
		return nil, Invalid("/based_on", "based_on is a revision number, 0 or more")
	}
	for i, x := range req.Exclude {
		if x.ID == "" {
			return nil, Invalid(fmt.Sprintf("/exclude/%d/id", i), "an exclusion names the point's id")
		}
		if strings.TrimSpace(x.Reason) == "" {
			return nil, Invalid(fmt.Sprintf("/exclude/%d/reason", i), "each exclusion needs its own reason")
		}
	}
	if len(req.Exclude) == 0 && len(req.Options) == 0 {
		return nil, Invalid("", "a revision excludes points or changes options")
	}
	return &req, nil
}

// SignRequest is the body of POST /v1/studies/{id}/revisions/{n}/signatures.
type SignRequest struct {
	Meaning string `json:"meaning"`
	Comment string `json:"comment,omitempty"`
}

// DecodeSign reads a SignRequest strictly and checks it.
func DecodeSign(r io.Reader) (*SignRequest, error) {
	var req SignRequest
	err := readDocument(r, signKeys, func(p *pointParser, key []byte) error {
		var err error
		switch string(key) {
		case "meaning":
			req.Meaning, err = p.text("/meaning", true)
		case "comment":
			req.Comment, err = p.reason("/comment")
		default:
			return p.unknownKey("", key, signKeys)
		}
		return err
	})
	if err != nil {
		return nil, err
	}
	if !study.Meaning(req.Meaning).Valid() {
		return nil, Invalid("/meaning", fmt.Sprintf("meaning must be reviewed or approved, not %q", req.Meaning))
	}
	return &req, nil
}

// patchOptions reads patch, a JSON object of a request's options, with
// member, the request's own one-pass reader (strict keys and numbers, lists
// counted against DefaultLimits); dataKeys and the record's keys may not
// be changed. Errors name /options/KEY.
func patchOptions(patch []byte, known, dataKeys []string, member func(p *pointParser, key []byte) error) error {
	p := &pointParser{b: patch, lim: DefaultLimits}
	err := p.document("", func(key []byte) error {
		k := Truncate(string(key))
		if slices.Contains(dataKeys, k) || slices.Contains(recordKeys, k) {
			return Invalid("/"+escapePointer(k), fmt.Sprintf("%q is not an option: a revision changes options and excludes points, never the data", k))
		}
		return member(p, key)
	}, known)
	return prefixedErr(err, "/options")
}

// The options of each kind of request in their canonical form: the JSON
// keys of the request, its data left out, written by encoding/json (fields
// in this order, omitted when unset).

// CanonicalOptions is the fit's options in canonical JSON.
func (req *FitRequest) CanonicalOptions() ([]byte, error) {
	return json.Marshal(fitOptions{req.Methods, req.Lambda, req.Confidence, req.Bootstrap, req.At, req.XUnit, req.YUnit})
}

// PatchOptions sets the options named in patch (JSON keys of the fit
// request; not "points").
func (req *FitRequest) PatchOptions(patch []byte) error {
	return patchOptions(patch, fitKeys, []string{"points"}, func(p *pointParser, key []byte) error { return p.fitMember(req, key, "") })
}

// fitOptions is FitRequest without its points, in canonical JSON.
type fitOptions struct {
	Methods    []string          `json:"methods,omitempty"`
	Lambda     *float64          `json:"lambda,omitempty"`
	Confidence *float64          `json:"confidence,omitempty"`
	Bootstrap  *BootstrapOptions `json:"bootstrap,omitempty"`
	At         []float64         `json:"at,omitempty"`
	XUnit      string            `json:"x_unit,omitempty"`
	YUnit      string            `json:"y_unit,omitempty"`
}

type compareOptions struct {
	XName          string            `json:"x_name,omitempty"`
	YName          string            `json:"y_name,omitempty"`
	Unit           string            `json:"unit,omitempty"`
	DecisionLevels []levelOut        `json:"decision_levels,omitempty"`
	AllowableBias  *Allowable        `json:"allowable_bias,omitempty"`
	ErrorModel     string            `json:"error_model,omitempty"`
	Lambda         *float64          `json:"lambda,omitempty"`
	Confidence     *float64          `json:"confidence,omitempty"`
	Bootstrap      *BootstrapOptions `json:"bootstrap,omitempty"`
	Exclude        []string          `json:"exclude,omitempty"`
}

type levelOut struct {
	Level         float64    `json:"level"`
	AllowableBias *Allowable `json:"allowable_bias,omitempty"`
}

// CanonicalOptions is the comparison's options in canonical JSON.
func (req *CompareRequest) CanonicalOptions() ([]byte, error) {
	var levels []levelOut
	for _, l := range req.DecisionLevels {
		levels = append(levels, levelOut{l.Level, l.AllowableBias})
	}
	return json.Marshal(compareOptions{req.XName, req.YName, req.Unit, levels, req.AllowableBias,
		req.ErrorModel, req.Lambda, req.Confidence, req.Bootstrap, req.Exclude})
}

// PatchOptions sets the options named in patch (JSON keys of the
// comparison request; not "samples").
func (req *CompareRequest) PatchOptions(patch []byte) error {
	return patchOptions(patch, compareKeys, []string{"samples"}, func(p *pointParser, key []byte) error { return p.compareMember(req, key) })
}

// monteCarloJSON is a calibration's Monte Carlo options in canonical JSON.
type monteCarloJSON struct {
	Trials int     `json:"trials"`
	Seed   *uint64 `json:"seed"`
}

type calOptions struct {
	XName               *string         `json:"x_name,omitempty"`
	YName               *string         `json:"y_name,omitempty"`
	XUnit               *string         `json:"x_unit,omitempty"`
	YUnit               *string         `json:"y_unit,omitempty"`
	Model               *string         `json:"model,omitempty"`
	OnInconsistent      *string         `json:"on_inconsistent,omitempty"`
	CoverageFactor      *float64        `json:"coverage_factor,omitempty"`
	CoverageProbability *float64        `json:"coverage_probability,omitempty"`
	Confidence          *float64        `json:"confidence,omitempty"`
	MonteCarlo          *monteCarloJSON `json:"monte_carlo,omitempty"`
}

// CanonicalOptions is the calibration's options in canonical JSON (the
// forward evaluations and shared components are data).
func (req *CalibrationRequest) CanonicalOptions() ([]byte, error) {
	o := calOptions{XName: &req.XName, YName: &req.YName, XUnit: &req.XUnit, YUnit: &req.YUnit, Model: &req.Model,
		OnInconsistent: &req.OnInconsistent, CoverageFactor: req.CoverageFactor,
		CoverageProbability: req.CoverageProbability, Confidence: req.Confidence}
	if m := req.MonteCarlo; m != nil {
		o.MonteCarlo = &monteCarloJSON{Trials: m.Trials, Seed: m.Seed}
	}
	return json.Marshal(o)
}

// PatchOptions sets the options named in patch (JSON keys of the
// calibration request; not its data).
func (req *CalibrationRequest) PatchOptions(patch []byte) error {
	return patchOptions(patch, calKeys, []string{"standards", "unknowns", "shared_components", "x_covariance", "forward"},
		func(p *pointParser, key []byte) error { return p.calMember(req, key) })
}
