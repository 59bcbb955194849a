package api

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"maps"
	"mime"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"

	"eivfit/api/report"
	"eivfit/api/wire"
	"eivfit/eiv/study"

	"github.com/gin-gonic/gin"
)

// recordSpec is what saving an endpoint's computation as a study needs:
// its kind, its report, and how a revision changes its request (points
// left out, options set) and pins the seed, so that recomputing from the
// stored input gives the stored answer.
type recordSpec[Req, Res any] struct {
	kind    study.StudyKind
	page    func(*Server, context.Context, *answer[Req, Res], report.Input) (*report.Page, error)
	options func(Req) ([]byte, error)
	patch   func(Req, []byte) error
	exclude func(Req, []study.Exclusion) error
	// seed is the seed the computation used (ok false when it drew none);
	// pin makes a recomputation use it.
	seed func(Res) (uint64, bool)
	pin  func(Req, uint64)
}

// saving is a request that asked to be saved (or was read whole to find
// out): the record's fields and the body exactly as received.
type saving struct {
	wire.Record
	raw         []byte
	contentType string
	query       string
}

// input describes the body as received, for the report.
func (sv *saving) input() report.Input {
	kind, _ := storedMediaType(sv.contentType)
	return report.InputOf(sv.raw, kind == "csv")
}

// takeRecord takes save, label and tags out of the request. A request that
// may save is read whole (every JSON body, without a copy when it is a
// *wire.Body; a CSV body with save=true), so that the bytes as received
// can be stored; rec is nil unless the request saves. A save
// is refused before anything is computed when the body is larger than
// MaxStoredBytes or the store is down.
func (s *Server) takeRecord(c *gin.Context, kind string, body io.Reader, q url.Values) (*saving, io.Reader, url.Values, *wire.Problem) {
	rec, rest, err := wire.RecordFromQuery(q)
	if err != nil {
		return nil, nil, nil, s.problemFor(c, err)
	}
	if kind == "csv" && !rec.Save {
		if err := rec.Check(false); err != nil {
			return nil, nil, nil, s.problemFor(c, err)
		}
		return nil, body, rest, nil
	}
	var raw []byte
	if b, ok := body.(*wire.Body); ok && kind == "json" && b.Len() == len(b.Bytes()) {
		raw = b.Bytes() // unread, and JSON decoding never writes to it: no copy
	} else if raw, err = io.ReadAll(body); err != nil {
		return nil, nil, nil, s.problemFor(c, err)
	}
	dec := raw
	if kind == "json" {
		var jr wire.Record
		if dec, jr, err = wire.TakeRecord(raw); err != nil {
			return nil, nil, nil, s.problemFor(c, err)
		}
		rec.Save = rec.Save || jr.Save
		if jr.Label != "" {
			rec.Label = jr.Label
		}
		if len(jr.Tags) > 0 {
			if rec.Tags == nil {
				rec.Tags = map[string]string{}
			}
			maps.Copy(rec.Tags, jr.Tags)
		}
	}
	if err := rec.Check(kind == "json"); err != nil {
		return nil, nil, nil, s.problemFor(c, err)
	}
	if !rec.Save { // nothing to keep: the body need not outlive its decoding
		return nil, wire.NewBody(dec, &s.limits), rest, nil
	}
	if int64(len(raw)) > s.cfg.MaxStoredBytes {
		return nil, nil, nil, wire.NewProblem(wire.KindTooLarge, fmt.Sprintf(
			"the body (%d bytes) exceeds this server's limit of %d bytes for a saved study; nothing was saved", len(raw), s.cfg.MaxStoredBytes))
	}
	if _, err := s.store.get(); err != nil {
		return nil, nil, nil, s.problemFor(c, err)
	}
	sv := &saving{Record: rec, raw: raw, contentType: c.GetHeader("Content-Type"), query: c.Request.URL.RawQuery}
	return sv, wire.NewBody(dec, &s.limits), rest, nil
}

// saveStudy stores a computed request as revision 0 of a new study and
// answers 201 with its location: JSON (the id and the result), or the
// report with its record for Accept: text/html.
func saveStudy[Req, Res any](s *Server, c *gin.Context, r *recordSpec[Req, Res], a *answer[Req, Res], sv *saving) {
	st := &study.Study{ID: study.NewID(), Kind: r.kind, Label: sv.Label, Tags: sv.Tags,
		Created: study.Timestamp(time.Now()), Who: s.whoName(c), Input: sv.raw, ContentType: sv.contentType,
		Query: sv.query, Version: s.cfg.Version, VCSRevision: s.cfg.VCSRevision, Result: a.json}
	st.InputSHA256 = sha256.Sum256(sv.raw)
	var err error
	if st.Options, err = r.options(a.req); err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	st.Seed, _ = r.seed(a.res)
	html := wantsHTML(c)
	var pg *report.Page
	if html { // rendered before the save, so that a failure leaves no record
		pg, err = render(s, c, func(ctx context.Context) (*report.Page, error) { return r.page(s, ctx, a, sv.input()) })
		if err != nil {
			s.problem(c, s.problemFor(c, err))
			return
		}
	}
	store, err := s.store.get()
	if err == nil {
		err = store.Save(c.Request.Context(), st)
	}
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	loc := "/v1/studies/" + st.ID
	c.Header("Location", loc)
	if html {
		rev0 := study.Original(st)
		stampRecord(pg, st, []study.Revision{rev0}, 0)
		s.writeHTML(c, http.StatusCreated, pg.Write)
		return
	}
	s.writeJSON(c, http.StatusCreated, wire.Created{ID: st.ID, Location: loc, Revision: 0, Result: a.json})
}

// stampRecord gives a stored study's report its time (that of the
// revision shown) and its record.
func stampRecord(pg *report.Page, st *study.Study, revs []study.Revision, n int) {
	pg.SetProduced(revs[n].When)
	rec := &report.StudyRecord{ID: st.ID, Revision: n, SavedVersion: st.Version, SavedRevision: st.VCSRevision}
	for _, r := range revs[:n+1] {
		e := report.RecordEntry{Number: r.Number, Who: r.Who, When: r.When, Reason: r.Reason,
			Options: string(r.Change.Options), Hash: hex.EncodeToString(r.Hash[:])}
		for _, x := range r.Change.Excluded {
			e.Excluded = append(e.Excluded, x.ID+": "+x.Reason)
		}
		rec.History = append(rec.History, e)
	}
	for _, sig := range revs[n].Signatures {
		rec.Signatures = append(rec.Signatures, report.RecordSignature{Meaning: string(sig.Meaning), Signer: sig.Signer,
			Comment: sig.Comment, RevisionHash: hex.EncodeToString(sig.RevisionHash[:]), When: sig.When})
	}
	pg.AddRecord(rec)
}

// studyKind recomputes a stored study of one kind.
type studyKind interface {
	// recompute decodes the stored input, applies the changes of the
	// revisions given (in order), pins the stored seed and computes.
	recompute(ctx context.Context, s *Server, st *study.Study, changes []study.Change) (*recomputed, error)
}

// recomputed is a stored study computed again: its answer and its report.
type recomputed struct {
	json []byte
	page func(ctx context.Context, in report.Input) (*report.Page, error)
}

func (r *recordSpec[Req, Res]) recompute(ctx context.Context, s *Server, st *study.Study, changes []study.Change) (*recomputed, error) {
	e := studyEndpoint(r)
	kind, err := storedMediaType(st.ContentType)
	if err != nil {
		return nil, err
	}
	body := st.Input
	var q url.Values
	if kind == "json" {
		if body, _, err = wire.TakeRecord(body); err != nil {
			return nil, err
		}
	} else if q, err = wire.StripRecordQuery(st.Query); err != nil {
		return nil, err
	}
	req, err := decode(e, kind, wire.NewBody(body, &s.limits), q)
	if err != nil {
		return nil, err
	}
	var excluded []study.Exclusion
	for _, ch := range changes {
		if len(ch.Options) > 0 {
			if err := r.patch(req, ch.Options); err != nil {
				return nil, err
			}
		}
		excluded = append(excluded, ch.Excluded...)
	}
	if len(excluded) > 0 {
		if err := r.exclude(req, excluded); err != nil {
			return nil, err
		}
	}
	if st.Seed != 0 {
		r.pin(req, st.Seed)
	}
	a, err := solve(ctx, s, e, req)
	if err != nil {
		return nil, err
	}
	return &recomputed{json: a.json, page: func(ctx context.Context, in report.Input) (*report.Page, error) { return r.page(s, ctx, a, in) }}, nil
}

// studyKinds maps each kind of study to its endpoint's record.
var studyKinds = map[study.StudyKind]studyKind{
	study.KindFit:              fitEndpoint.record,
	study.KindMethodComparison: compareEndpoint.record,
	study.KindCalibration:      calibrationEndpoint.record,
}

// studyEndpoint finds the endpoint a record belongs to.
func studyEndpoint[Req, Res any](r *recordSpec[Req, Res]) *endpoint[Req, Res] {
	for _, e := range []any{fitEndpoint, compareEndpoint, calibrationEndpoint} {
		if e, ok := e.(*endpoint[Req, Res]); ok && e.record == r {
			return e
		}
	}
	panic("api: a record without its endpoint")
}

// storedMediaType is the media type of a stored input ("json" or "csv").
func storedMediaType(ct string) (string, error) {
	mt, _, err := mime.ParseMediaType(ct)
	switch {
	case err != nil:
		return "", fmt.Errorf("stored content type %q: %v", ct, err)
	case mt == "application/json" || strings.HasSuffix(mt, "+json"):
		return "json", nil
	case mt == "text/csv" || mt == "application/csv":
		return "csv", nil
	}
	return "", fmt.Errorf("stored content type %q", ct)
}

// Recompute computes a stored study again at revision n (its revisions as
// History returns them) and returns the answer's JSON: `eivfit studies
// verify` compares it with the stored result.
func (s *Server) Recompute(ctx context.Context, st *study.Study, revs []study.Revision, n int) ([]byte, error) {
	r, err := s.recomputeAt(ctx, st, revs, n)
	if err != nil {
		return nil, err
	}
	return r.json, nil
}

func (s *Server) recomputeAt(ctx context.Context, st *study.Study, revs []study.Revision, n int) (*recomputed, error) {
	k, ok := studyKinds[st.Kind]
	if !ok {
		return nil, fmt.Errorf("%w: kind %q", study.ErrInvalid, st.Kind)
	}
	var changes []study.Change
	for _, r := range revs[1 : n+1] {
		changes = append(changes, r.Change)
	}
	return k.recompute(ctx, s, st, changes)
}

// studyRoute reads the study named in the path, and its history.
func (s *Server) studyRoute(c *gin.Context) (study.Store, *study.Study, []study.Revision, bool) {
	store, err := s.store.get()
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return nil, nil, nil, false
	}
	id := c.Param("id")
	if !study.ValidID(id) {
		s.problem(c, wire.NewProblem(wire.KindNotFound, "no study with that id"))
		return nil, nil, nil, false
	}
	ctx := c.Request.Context()
	st, err := store.Get(ctx, id)
	var revs []study.Revision
	if err == nil {
		revs, err = store.History(ctx, id)
	}
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return nil, nil, nil, false
	}
	return store, st, revs, true
}

// handleStudy serves GET /v1/studies/{id}: the record and the result of
// its latest revision (or ?revision=N) as JSON, or for Accept: text/html
// the report computed again from the stored input, options and seed,
// with the time of that revision and its record.
func (s *Server) handleStudy(c *gin.Context) {
	_, st, revs, ok := s.studyRoute(c)
	if !ok {
		return
	}
	n := len(revs) - 1
	q, err := wire.ParseQuery(c.Request.URL.RawQuery)
	for k := range q {
		if err == nil && k != "revision" {
			err = wire.Invalid("query parameter "+wire.Truncate(k), fmt.Sprintf("unknown query parameter %q (revision)", wire.Truncate(k)))
		}
	}
	if err == nil && len(q["revision"]) > 1 {
		err = wire.Invalid("query parameter revision", wire.Repeated(len(q["revision"])))
	}
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	if v := q.Get("revision"); v != "" {
		k, err := wire.QueryInt("query parameter revision", v)
		if err != nil || k < 0 || k > n {
			s.problem(c, wire.Invalid("query parameter revision", fmt.Sprintf("revision must be a number from 0 to %d", n)))
			return
		}
		n = k
	}
	if wantsHTML(c) {
		r, err := inSlot(s, c, func(ctx context.Context) (*recomputed, error) { return s.recomputeAt(ctx, st, revs, n) })
		var pg *report.Page
		if err == nil {
			pg, err = render(s, c, func(ctx context.Context) (*report.Page, error) {
				kind, _ := storedMediaType(st.ContentType) // recompute has read it
				return r.page(ctx, report.InputOf(st.Input, kind == "csv"))
			})
		}
		if err != nil {
			s.problem(c, s.problemFor(c, err))
			return
		}
		stampRecord(pg, st, revs, n)
		s.writeHTML(c, http.StatusOK, pg.Write)
		return
	}
	out := wire.StudyOut{StudySummary: wire.SummaryOut(&study.Summary{ID: st.ID, Kind: st.Kind, Label: st.Label, Tags: st.Tags,
		Created: st.Created, Who: st.Who, InputSHA256: st.InputSHA256, Latest: len(revs) - 1}),
		ContentType: st.ContentType, Query: st.Query, Options: json.RawMessage(st.Options), Seed: st.Seed,
		Version: st.Version, VCSRevision: st.VCSRevision, Revision: n, Result: json.RawMessage(revs[n].Result),
		Signatures: wire.SignaturesOut(revs[n].Signatures)}
	s.writeJSON(c, http.StatusOK, out)
}

// handleStudyInput serves GET /v1/studies/{id}/input: the body exactly as
// received, with its content type.
func (s *Server) handleStudyInput(c *gin.Context) {
	_, st, _, ok := s.studyRoute(c)
	if !ok {
		return
	}
	c.Header("Cache-Control", "no-store")
	c.Header("Digest", "sha-256="+hex.EncodeToString(st.InputSHA256[:]))
	c.Data(http.StatusOK, st.ContentType, st.Input)
}

// handleHistory serves GET /v1/studies/{id}/history: every revision with
// who, when, why, what changed, its hash chained to the previous one, and
// its signatures.
func (s *Server) handleHistory(c *gin.Context) {
	_, st, revs, ok := s.studyRoute(c)
	if !ok {
		return
	}
	chain := "valid"
	if err := study.VerifyChain(st, revs); err != nil {
		chain = err.Error()
	}
	s.writeJSON(c, http.StatusOK, map[string]any{"id": st.ID, "chain": chain, "revisions": wire.RevisionsOut(revs)})
}

// studyChange serves a POST on a stored study: it reads the body, decodes
// it with decode and reads the study, then calls change; where one of these
// fails it writes the problem instead.
func studyChange[Req any](s *Server, c *gin.Context, decode func(io.Reader) (Req, error),
	change func(req Req, store study.Store, st *study.Study, revs []study.Revision)) {
	kind, body, release := s.open(c, false)
	if kind == "" {
		return
	}
	defer release()
	req, err := decode(body)
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	store, st, revs, ok := s.studyRoute(c)
	if !ok {
		return
	}
	change(req, store, st, revs)
}

// handleRevise serves POST /v1/studies/{id}/revisions: a reason, the
// revision it changes (based_on, the latest; 409 otherwise) and the
// change, recomputed from the stored input.
func (s *Server) handleRevise(c *gin.Context) {
	studyChange(s, c, wire.DecodeRevise, func(req *wire.ReviseRequest, store study.Store, st *study.Study, revs []study.Revision) {
		if *req.BasedOn != len(revs)-1 {
			s.problem(c, s.problemFor(c, fmt.Errorf("%w: based_on %d, latest %d", study.ErrConflict, *req.BasedOn, len(revs)-1)))
			return
		}
		rev := &study.Revision{Reason: req.Reason, Who: s.whoName(c)}
		for _, x := range req.Exclude {
			rev.Change.Excluded = append(rev.Change.Excluded, study.Exclusion{ID: x.ID, Reason: x.Reason})
		}
		if len(req.Options) > 0 {
			var b bytes.Buffer
			if err := json.Compact(&b, req.Options); err != nil {
				s.problem(c, wire.Invalid("/options", "options is a JSON object"))
				return
			}
			rev.Change.Options = b.Bytes()
		}
		all := append(revs, *rev)
		r, err := inSlot(s, c, func(ctx context.Context) (*recomputed, error) { return s.recomputeAt(ctx, st, all, len(all)-1) })
		if err != nil {
			s.problem(c, s.problemFor(c, err))
			return
		}
		rev.Result = r.json
		stored, err := store.AddRevision(c.Request.Context(), st.ID, *req.BasedOn, rev)
		if err != nil {
			s.problem(c, s.problemFor(c, err))
			return
		}
		loc := "/v1/studies/" + st.ID + "?revision=" + strconv.Itoa(stored.Number)
		c.Header("Location", loc)
		out := wire.RevisionsOut([]study.Revision{*stored})[0]
		s.writeJSON(c, http.StatusCreated, map[string]any{"id": st.ID, "location": loc, "revision": out, "result": json.RawMessage(stored.Result)})
	})
}

// handleSign serves POST /v1/studies/{id}/revisions/{n}/signatures: the
// key's holder signs revision n with a meaning; the signature covers the
// revision's hash and carries the server's time.
func (s *Server) handleSign(c *gin.Context) {
	studyChange(s, c, wire.DecodeSign, func(req *wire.SignRequest, store study.Store, st *study.Study, revs []study.Revision) {
		n, err := strconv.Atoi(c.Param("n"))
		if err != nil || n < 0 || n >= len(revs) {
			s.problem(c, wire.NewProblem(wire.KindNotFound, fmt.Sprintf("study %s has revisions 0 to %d", st.ID, len(revs)-1)))
			return
		}
		sig := &study.Signature{Revision: n, Meaning: study.Meaning(req.Meaning), Signer: s.whoName(c), Comment: req.Comment,
			RevisionHash: revs[n].Hash}
		if err := store.Sign(c.Request.Context(), st.ID, n, sig); err != nil {
			s.problem(c, s.problemFor(c, err))
			return
		}
		s.writeJSON(c, http.StatusCreated, wire.SignaturesOut([]study.Signature{*sig})[0])
	})
}

// handleStudies serves GET /v1/studies: a page of summaries, newest
// first, filtered by kind, label, tag (KEY:VALUE, repeatable), from and to
// (RFC 3339 times or dates), with limit and the cursor of the next page.
func (s *Server) handleStudies(c *gin.Context) {
	store, err := s.store.get()
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	q, err := wire.ParseQuery(c.Request.URL.RawQuery)
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	f, p := studyFilter(q)
	if p != nil {
		s.problem(c, p)
		return
	}
	sums, next, err := store.List(c.Request.Context(), f)
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	out := wire.StudyList{Studies: make([]wire.StudySummary, len(sums)), Next: next}
	for i := range sums {
		out.Studies[i] = wire.SummaryOut(&sums[i])
	}
	s.writeJSON(c, http.StatusOK, out)
}

// studyFilter reads a listing's query parameters.
func studyFilter(q url.Values) (study.Filter, *wire.Problem) {
	var f study.Filter
	for k := range q {
		switch k {
		case "kind", "label", "tag", "from", "to", "limit", "cursor":
		default:
			return f, wire.Invalid("query parameter "+k, fmt.Sprintf("unknown query parameter %q (kind, label, tag, from, to, limit, cursor)", k))
		}
		if k != "tag" && len(q[k]) > 1 {
			return f, wire.Invalid("query parameter "+k, wire.Repeated(len(q[k])))
		}
	}
	if k := study.StudyKind(q.Get("kind")); k != "" {
		if !k.Valid() {
			return f, wire.Invalid("query parameter kind", "kind is fit, method-comparison or calibration")
		}
		f.Kind = k
	}
	f.Label, f.Cursor = q.Get("label"), q.Get("cursor")
	for _, t := range q["tag"] {
		k, v, ok := strings.Cut(t, ":")
		if !ok || k == "" {
			return f, wire.Invalid("query parameter tag", fmt.Sprintf("a tag is KEY:VALUE, such as analyte:glucose, not %q", t))
		}
		if f.Tags == nil {
			f.Tags = map[string]string{}
		}
		f.Tags[k] = v
	}
	for _, p := range []struct {
		name string
		t    *time.Time
	}{{"from", &f.From}, {"to", &f.To}} {
		v := q.Get(p.name)
		if v == "" {
			continue
		}
		t, err := time.Parse(time.RFC3339, v)
		if err != nil {
			if t, err = time.Parse(time.DateOnly, v); err != nil {
				return f, wire.Invalid("query parameter "+p.name, p.name+" is an RFC 3339 time or a date (2006-01-02)")
			}
		}
		*p.t = t
	}
	if v := q.Get("limit"); v != "" {
		n, err := wire.QueryInt("query parameter limit", v)
		if err != nil || n < 1 || n > study.MaxLimit {
			return f, wire.Invalid("query parameter limit", fmt.Sprintf("limit is a number from 1 to %d", study.MaxLimit))
		}
		f.Limit = n
	}
	return f, nil
}

// kept marks the points a revision keeps: excl names points by id (a
// point without an id by its 1-based position); an id that names no point
// is an error at /exclude/i/id.
func kept(n int, id func(i int) string, excl []study.Exclusion) ([]bool, error) {
	keep := make([]bool, n)
	at := make(map[string]int, n)
	for i := range n {
		keep[i] = true
		k := id(i)
		if k == "" {
			k = strconv.Itoa(i + 1)
		}
		at[k] = i
	}
	for j, x := range excl {
		i, ok := at[x.ID]
		if !ok {
			return nil, wire.Invalid(fmt.Sprintf("/exclude/%d/id", j), fmt.Sprintf("no point has the id %q", x.ID))
		}
		keep[i] = false
	}
	return keep, nil
}

// filter keeps the elements of v marked in keep (nil stays nil).
func filter[T any](v []T, keep []bool) []T {
	if v == nil {
		return nil
	}
	out := v[:0:0]
	for i, x := range v {
		if keep[i] {
			out = append(out, x)
		}
	}
	return out
}

func excludePoints(d *study.Data, excl []study.Exclusion) error {
	keep, err := kept(d.Len(), func(i int) string {
		if d.ID == nil {
			return ""
		}
		return d.ID[i]
	}, excl)
	if err != nil {
		return err
	}
	d.X, d.Y, d.SX, d.SY = filter(d.X, keep), filter(d.Y, keep), filter(d.SX, keep), filter(d.SY, keep)
	d.R, d.Order, d.ID = filter(d.R, keep), filter(d.Order, keep), filter(d.ID, keep)
	return nil
}

func excludeSamples(req *wire.CompareRequest, excl []study.Exclusion) error {
	keep, err := kept(len(req.Samples), func(i int) string { return req.Samples[i].ID }, excl)
	if err == nil {
		req.Samples = filter(req.Samples, keep)
	}
	return err
}

func excludeStandards(req *wire.CalibrationRequest, excl []study.Exclusion) error {
	keep, err := kept(len(req.Data.Standards), func(i int) string { return req.Data.Standards[i].ID }, excl)
	if err == nil {
		req.Data.Standards = filter(req.Data.Standards, keep)
	}
	return err
}

// bootstrapSeed is the seed of a fit's or comparison's bootstrap.
func bootstrapSeed(fits []*study.MethodResult) (uint64, bool) {
	for _, m := range fits {
		if m != nil && m.Bootstrap != nil {
			return m.Bootstrap.Seed, true
		}
	}
	return 0, false
}

// pinBootstrap makes a recomputation draw the stored seed.
func pinBootstrap(b *wire.BootstrapOptions, seed uint64) {
	if b != nil && b.Seed == nil {
		b.Seed = &seed
	}
}
