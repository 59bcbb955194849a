package api

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"mime"
	"net"
	"net/http"
	"net/url"
	"os"
	"runtime"
	"strings"
	"time"

	"eivfit/api/internal/bufpool"
	"eivfit/api/report"
	"eivfit/api/wire"
	"eivfit/eiv/study"

	"github.com/gin-gonic/gin"
)

// endpoint is what one analysis endpoint adds to the common flow: how its
// request is decoded (JSON, or CSV with the options in the query), how its
// errors are located, the study it runs (which validates its input), and
// the answer it sends.
type endpoint[Req, Res any] struct {
	fromJSON func(io.Reader) (Req, error)
	fromCSV  func(io.Reader, url.Values) (Req, error)
	// streamCSV, when set, starts decoding a CSV body with the options q
	// while it arrives (serveStream); ok false leaves the body to fromCSV.
	streamCSV func(q url.Values, lim *wire.Limits, declared int64) (st *wire.CSVStream, finish func() (Req, error), ok bool)
	source    func(Req) *wire.Source
	compute   func(context.Context, Req, study.Settings) (Res, error)
	answer    func(Req, Res) any
	points    func(Res) int
	// record, when set, lets the endpoint's computations be saved as
	// studies (studies.go).
	record *recordSpec[Req, Res]
}

// answer is a computed request: the study's result, its wire form and the
// encoded JSON (in enc's pooled buffer: free it once json is written, or
// keep json and let the collector take it).
type answer[Req, Res any] struct {
	req  Req
	res  Res
	resp any
	json []byte
	enc  *wire.Encoded
}

// analyse is the one flow from a body to its answer: decode, compute (the
// study validates first) in a compute slot under the request deadline,
// then encode, which refuses a number that is not finite. Errors are
// problems located in the client's terms.
func analyse[Req, Res any](s *Server, c *gin.Context, e *endpoint[Req, Res], kind string, body io.Reader, q url.Values) (*answer[Req, Res], error) {
	req, err := decode(e, kind, body, q)
	if err != nil {
		return nil, err
	}
	return inSlot(s, c, func(ctx context.Context) (*answer[Req, Res], error) { return solve(ctx, s, e, req) })
}

// decode reads a request as JSON or as CSV with its options in q.
func decode[Req, Res any](e *endpoint[Req, Res], kind string, body io.Reader, q url.Values) (Req, error) {
	if kind == "csv" {
		return e.fromCSV(body, q)
	}
	return e.fromJSON(body)
}

// solve computes a decoded request (the study validates first) and
// encodes the answer.
func solve[Req, Res any](ctx context.Context, s *Server, e *endpoint[Req, Res], req Req) (*answer[Req, Res], error) {
	src := e.source(req)
	res, err := e.compute(ctx, req, s.settings(0))
	if err != nil {
		return nil, src.Problem(err)
	}
	s.metrics.points.Add(float64(e.points(res)))
	a := &answer[Req, Res]{req: req, res: res, resp: e.answer(req, res)}
	if a.enc, err = wire.Encode(a.resp); err != nil {
		return nil, src.Problem(err)
	}
	a.json = a.enc.Bytes()
	return a, nil
}

// serve is the handler of an analysis endpoint: the media type, the body
// within its limits and the memory budget, analyse, then JSON or (for
// Accept: text/html) the HTML report, drawn in a compute slot. An endpoint
// without fromCSV takes JSON only; a nil page means JSON only.
func serve[Req, Res any](s *Server, c *gin.Context, e *endpoint[Req, Res], page pageOf[Req, Res]) {
	kind := s.mediaType(c, e.fromCSV != nil)
	if kind == "" || kind == "csv" && serveStream(s, c, e, page) {
		return
	}
	body, release, p := s.body(c)
	if p != nil {
		s.problem(c, p)
		return
	}
	defer release()
	raw := body.Bytes()
	if len(raw) >= collectAfterBytes {
		defer func() { go runtime.GC() }()
	}
	var in io.Reader = body
	q, err := wire.ParseQuery(c.Request.URL.RawQuery)
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	var rec *saving
	if e.record != nil && s.store != nil {
		var p *wire.Problem
		if rec, in, q, p = s.takeRecord(c, kind, body, q); p != nil {
			s.problem(c, p)
			return
		}
	}
	if kind == "json" && len(q) > 0 {
		s.problem(c, wire.Invalid("query", "a JSON request carries its options in the body, not the query string (save, label and tag excepted)"))
		return
	}
	html := page != nil && wantsHTML(c)
	var input report.Input
	if html && rec == nil {
		// The report needs only the body's hash and counts: take them now
		// so the body is not held while the report is drawn.
		input, raw = report.InputOf(raw, kind == "csv"), nil
	}
	a, err := analyse(s, c, e, kind, in, q)
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	if rec != nil && rec.Save {
		saveStudy(s, c, e.record, a, rec)
		return
	}
	if html {
		if rec != nil {
			input = report.InputOf(rec.raw, kind == "csv") // the body as received
		}
		a.json = nil // checked finite by the encoding; the page does not need it
		a.enc.Free()
		pg, err := drawPage(s, c, a, input, page)
		if err != nil {
			s.problem(c, s.problemFor(c, err))
			return
		}
		s.writeHTML(c, http.StatusOK, pg.Write)
		return
	}
	c.Data(http.StatusOK, "application/json", a.json)
	a.enc.Free() // written: the connection's buffer holds a copy
}

// serveStream answers a CSV request whose body is decoded while it
// arrives, so that the body is never held whole: when the endpoint can
// stream it, the answer is JSON, and neither the report (which hashes the
// body) nor a saved study (which stores it) needs the bytes. It says
// false, having read and written nothing, when the request takes serve's
// path. The body is read within the same limits, budget and timeouts, and
// every problem is the one serve would give, in the same order: the
// body's own (413, 408, 503), then the data's, then the computation's.
func serveStream[Req, Res any](s *Server, c *gin.Context, e *endpoint[Req, Res], page pageOf[Req, Res]) bool {
	if e.streamCSV == nil || page != nil && wantsHTML(c) {
		return false
	}
	q, err := wire.ParseQuery(c.Request.URL.RawQuery)
	if err != nil {
		return false
	}
	if e.record != nil && s.store != nil {
		for _, k := range []string{"save", "label", "tag", "tags"} {
			if q.Has(k) {
				return false
			}
		}
	}
	st, finish, ok := e.streamCSV(q, &s.limits, c.Request.ContentLength)
	if !ok {
		return false
	}
	release, p := s.readBody(c, streamSink{st})
	if p != nil {
		s.problem(c, p)
		return true
	}
	defer release()
	if st.Len() >= collectAfterBytes {
		defer func() { go runtime.GC() }()
	}
	req, err := finish()
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return true
	}
	a, err := inSlot(s, c, func(ctx context.Context) (*answer[Req, Res], error) { return solve(ctx, s, e, req) })
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return true
	}
	c.Data(http.StatusOK, "application/json", a.json)
	a.enc.Free()
	return true
}

// streamSink hands a body to a CSV stream as it is read; the stream keeps
// no room ahead of the bytes, so grow only agrees.
type streamSink struct{ st *wire.CSVStream }

func (t streamSink) grow(size int64) int64 { return size }
func (t streamSink) room(k int) []byte     { return t.st.Room(k) }
func (t streamSink) got(k int)             { t.st.Got(k) }
func (t streamSink) free()                 { t.st.Release() }

// collectAfterBytes is the body size after whose request the garbage is
// collected at once: with the GC target at 400 % a large request's body,
// columns and work arrays would otherwise stay resident until the heap had
// grown several times over, and each further large request would add its
// own (measured: 110, 190, 270 MB after three 48 MB CSV fits; with the
// collection 110 MB each). A client must send the whole body to cause one.
const collectAfterBytes = 8 << 20

// collectBeforeDrawing is the number of points from which the fit report
// is drawn after a garbage collection: under the same GC target the
// checks' and plots' short-lived arrays would otherwise pile up on the
// garbage of decoding and fitting, which a collection at this point frees
// (at the largest CSV, about 530,000 rows, the peak is 1.3 × the body
// lower, for a few milliseconds; README, limits).
const collectBeforeDrawing = 100_000

// open is every body-taking handler's opening: the media type ("json",
// "csv"), then the body within its limits and the memory budget. kind is
// "" after a problem has been written; otherwise the caller must call
// release when done with the request.
func (s *Server) open(c *gin.Context, allowCSV bool) (kind string, body *wire.Body, release func()) {
	if kind = s.mediaType(c, allowCSV); kind == "" {
		return "", nil, nil
	}
	body, release, p := s.body(c)
	if p != nil {
		s.problem(c, p)
		return "", nil, nil
	}
	return kind, body, release
}

// problemFor maps any error of a request to its problem: study errors by
// their kind (invalid 400, unfittable 422, too large 413), a body over the
// limit 413, a deadline 503. Unknown errors are internal: logged, and
// their text is not shown.
func (s *Server) problemFor(c *gin.Context, err error) *wire.Problem {
	var p *wire.Problem
	var mbe *http.MaxBytesError
	var se *study.Error
	var sl study.ErrorList
	switch {
	case errors.As(err, &p):
		return p
	case errors.As(err, &mbe):
		return wire.NewProblem(wire.KindTooLarge, fmt.Sprintf("the body exceeds this server's limit of %d bytes", s.cfg.MaxBodyBytes))
	case errors.Is(err, context.DeadlineExceeded):
		p := wire.NewProblem(wire.KindDeadline, fmt.Sprintf("the computation did not finish within %v; ask for fewer resamples or points", s.cfg.RequestTimeout))
		p.RetryAfter = 1
		return p
	case errors.Is(err, context.Canceled):
		return wire.NewProblem(wire.KindDeadline, "the request was cancelled")
	case errors.As(err, &se), errors.As(err, &sl):
		return s.problemFor(c, (&wire.Source{Root: ""}).Problem(err))
	case errors.Is(err, study.ErrNotFound):
		return wire.NewProblem(wire.KindNotFound, "no study with that id (or no such revision)")
	case errors.Is(err, study.ErrConflict):
		return wire.NewProblem(wire.KindConflict, "the study changed meanwhile: another revision or the same signature came first; read its history and retry")
	case errors.Is(err, study.ErrUnavailable):
		s.cfg.Logger.Warn("study store unavailable", "route", c.FullPath(), "error", err.Error())
		p := wire.NewProblem(wire.KindStoreDown, "the study store cannot be reached; computations without save still work")
		p.RetryAfter = 5
		return p
	case errors.Is(err, study.ErrInvalid):
		return wire.NewProblem(wire.KindInvalid, strings.TrimPrefix(err.Error(), "study: invalid: "))
	}
	s.cfg.Logger.Error("internal error", "route", c.FullPath(), "error", err.Error())
	return wire.NewProblem(wire.KindInternal, "the server met an internal error; it has been logged")
}

// pageOf builds the HTML report of an answer; drawing stops when ctx is
// done.
type pageOf[Req, Res any] func(ctx context.Context, a *answer[Req, Res], in report.Input) (*report.Page, error)

// drawPage builds a's report in a compute slot under the deadline (render).
func drawPage[Req, Res any](s *Server, c *gin.Context, a *answer[Req, Res], in report.Input, page pageOf[Req, Res]) (*report.Page, error) {
	return render(s, c, func(ctx context.Context) (*report.Page, error) { return page(ctx, a, in) })
}

// made is how this server makes a report of the input in.
func (s *Server) made(in report.Input) report.Made {
	return report.Made{Input: in, Version: s.cfg.Version, Revision: s.cfg.VCSRevision}
}

// render runs a drawing step (a plot, a report's page) in a compute slot
// under the request deadline, like a fit. A drawing error that is not
// already a problem becomes a 422; a panic that escapes the report
// package's own guard is recovered into the same problem (and logged
// without its value, which may hold the client's data).
func render[T any](s *Server, c *gin.Context, draw func(context.Context) (T, error)) (T, error) {
	return inSlot(s, c, func(ctx context.Context) (out T, err error) {
		defer func() {
			if r := recover(); r != nil {
				s.cfg.Logger.Error("panic while drawing", "route", c.FullPath())
				var zero T
				out, err = zero, wire.NewProblem(wire.KindUnfittable, report.ErrDraw.Error())
			}
		}()
		out, err = draw(ctx)
		var p *wire.Problem
		if err != nil && !errors.As(err, &p) && !errors.Is(err, context.Canceled) && !errors.Is(err, context.DeadlineExceeded) {
			err = wire.NewProblem(wire.KindUnfittable, "the plot could not be drawn: "+err.Error())
		}
		return out, err
	})
}

// inSlot runs compute in a compute slot under the request deadline.
func inSlot[T any](s *Server, c *gin.Context, compute func(context.Context) (T, error)) (T, error) {
	release, p := s.acquire(c.Request.Context())
	if p != nil {
		var zero T
		return zero, p
	}
	defer release()
	ctx, cancel := context.WithTimeout(c.Request.Context(), s.cfg.RequestTimeout)
	defer cancel()
	return compute(ctx)
}

func (s *Server) writeJSON(c *gin.Context, status int, v any) {
	e, err := wire.Encode(v)
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	c.Data(status, "application/json", e.Bytes())
	e.Free()
}

// wantsHTML says whether the client asked for the HTML report.
func wantsHTML(c *gin.Context) bool {
	mt, _ := negotiate(strings.Join(c.Request.Header.Values("Accept"), ", "), "application/json", "text/html")
	return mt == "text/html"
}

func (s *Server) writeHTML(c *gin.Context, status int, write func(io.Writer) error) {
	var b bytes.Buffer
	if err := write(&b); err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	c.Header("Content-Security-Policy", report.ContentSecurityPolicy)
	c.Header("Cache-Control", "no-store")
	c.Data(status, "text/html; charset=utf-8", b.Bytes())
}

// bodyChunk is the step in which a body is charged to the intake budget
// as it arrives: a request holds at most one chunk more than it has
// received, so that idle or slow uploads hold next to nothing.
const bodyChunk = 256 << 10

// smallBody is the first buffer of a body sent without a declared length
// (chunked): most such bodies are small requests, and each doubling
// copies at most what has arrived.
const smallBody = 4 << 10

// body reads the whole request body into memory within the size limit,
// the intake budget and the body timeouts, and returns it; the caller must
// call release once the answer is written, and nothing may read the body's
// bytes after that (its buffer goes back to the pool for the next request:
// whatever outlives the request — a decoded value, a problem's text, a
// saved study — must hold copies, not slices of it). A declared length above the
// limit is refused before anything is read. The budget is charged in
// bodyChunk steps as bytes arrive, never for a declared length up front.
// A body that stalls for BodyIdleTimeout, or is not complete within
// ReadTimeout, is answered 408; a body that cannot get budget within
// SlotWait is answered 503 naming the memory budget.
func (s *Server) body(c *gin.Context) (*wire.Body, func(), *wire.Problem) {
	m := &memBody{}
	if n := c.Request.ContentLength; n >= 0 && n <= s.cfg.MaxBodyBytes {
		// A declared length is read into one buffer with a byte to spare,
		// so that the EOF after it is seen without growing: a pooled one up
		// to bufpool.MaxAhead, else a fresh one of that size (its pages
		// become resident only as bytes arrive).
		m.buf = bufpool.Ahead(int(n + 1))
	}
	release, p := s.readBody(c, m)
	if p != nil {
		return nil, nil, p
	}
	b := m.buf
	if !bufpool.Keeps(b) {
		// Never pooled: release must not keep it alive, so that it dies
		// with its last reader (serve drops it before drawing a report).
		m.buf = nil
	}
	return wire.NewBody(b, &s.limits), release, nil
}

// bodySink is where readBody puts a body's bytes: grow makes room for at
// least size bytes in all and says how many it holds; room gives k bytes
// after those read, got takes the k just read into them; free gives the
// sink's buffers back to the pool once nothing reads them (readBody's
// release, after the answer).
type bodySink interface {
	grow(size int64) int64
	room(k int) []byte
	got(k int)
	free()
}

// memBody keeps the whole body in one buffer, pooled up to
// bufpool.MaxPooled: a chunked body grows through the classes (4 KiB,
// doubling, so it holds at most twice what has arrived), each smaller
// buffer going back as it is left.
type memBody struct{ buf []byte }

func (m *memBody) grow(size int64) int64 {
	m.buf = bufpool.Grow(m.buf, int(size)-len(m.buf))
	return int64(cap(m.buf))
}
func (m *memBody) room(k int) []byte { return m.buf[len(m.buf) : len(m.buf)+k] }
func (m *memBody) got(k int)         { m.buf = m.buf[:len(m.buf)+k] }
func (m *memBody) free()             { bufpool.Put(m.buf); m.buf = nil }

// readBody reads the request body into sink with the limits, budget and
// timeouts body describes, growing the sink as body grows its buffer. Its
// release (called on a problem here, else by the caller when the answer is
// written) gives back the budget and the sink's buffers: nothing may read
// the body after it.
func (s *Server) readBody(c *gin.Context, sink bodySink) (func(), *wire.Problem) {
	n := c.Request.ContentLength
	limit := s.cfg.MaxBodyBytes
	if n > limit {
		return nil, wire.NewProblem(wire.KindTooLarge, fmt.Sprintf("the body (%d bytes) exceeds this server's limit of %d bytes",
			n, limit))
	}
	var held int64
	release := func() {
		s.intake.release(held)
		s.metrics.intakeBytes.Sub(float64(held))
		held = 0
		sink.free()
	}
	charge := func(upTo int64) bool {
		if upTo <= held {
			return true
		}
		if !s.intake.tryAcquire(upTo - held) {
			ctx, cancel := context.WithTimeout(c.Request.Context(), s.cfg.SlotWait)
			defer cancel()
			if !s.intake.acquire(ctx, upTo-held) {
				return false
			}
		}
		s.metrics.intakeBytes.Add(float64(upTo - held))
		held = upTo
		return true
	}
	tooLarge := func() (func(), *wire.Problem) {
		release()
		return nil, wire.NewProblem(wire.KindTooLarge, fmt.Sprintf("the body exceeds this server's limit of %d bytes", limit))
	}
	rc := http.NewResponseController(c.Writer)
	start := time.Now()
	whole := start.Add(s.cfg.ReadTimeout)
	// read bytes of room; a declared length has room for it and a byte to
	// spare, an undeclared one starts small and doubles, within the limit
	// plus one byte to detect an overrun.
	var read, room int64
	if n >= 0 {
		room = n + 1
	}
	r := c.Request.Body
	for {
		if read == room {
			if read > limit {
				return tooLarge()
			}
			grow := max(room, smallBody)
			room = sink.grow(read + min(grow, limit+1-read))
		}
		// Charge the next chunk before its pages are touched (not the
		// spare byte after a declared length, which stays untouched).
		end := min(read+bodyChunk, room)
		charged := end
		if n >= 0 {
			charged = min(end, n)
		}
		if !charge(charged) {
			release()
			p := wire.NewProblem(wire.KindBodyBudget, fmt.Sprintf("the server is holding as many request-body bytes as its memory budget (%d bytes) allows, and none were freed within %v; retry later",
				s.cfg.MaxInFlightBytes, s.cfg.SlotWait))
			p.RetryAfter = 1
			return nil, p
		}
		_ = rc.SetReadDeadline(earliest(whole, time.Now().Add(s.cfg.BodyIdleTimeout)))
		k, err := r.Read(sink.room(int(end - read)))
		sink.got(k)
		read += int64(k)
		if err == io.EOF {
			break
		}
		if err != nil {
			release()
			// The deadline stays in the past: the server then drops the
			// rest of the body with the connection instead of reading it.
			_ = rc.SetReadDeadline(time.Now())
			return nil, s.bodyReadProblem(c, err, time.Since(start))
		}
	}
	_ = rc.SetReadDeadline(time.Time{})
	if read > limit {
		return tooLarge()
	}
	return release, nil
}

func earliest(a, b time.Time) time.Time {
	if a.Before(b) {
		return a
	}
	return b
}

// bodyReadProblem maps a failed body read: a timeout is 408 (and the
// connection is closed), anything else 400.
func (s *Server) bodyReadProblem(c *gin.Context, err error, took time.Duration) *wire.Problem {
	var ne net.Error
	if errors.Is(err, os.ErrDeadlineExceeded) || (errors.As(err, &ne) && ne.Timeout()) {
		c.Header("Connection", "close")
		return wire.NewProblem(wire.KindBodyTimeout, fmt.Sprintf("the body did not arrive in time (no byte for %v, or not complete within %v; %v elapsed)",
			s.cfg.BodyIdleTimeout, s.cfg.ReadTimeout, took.Round(time.Millisecond)))
	}
	return wire.Invalid("", "the body could not be read: the connection failed or the body ended early")
}

// mediaType returns the request's media type: "json", "csv", or "" after
// writing a 415.
func (s *Server) mediaType(c *gin.Context, allowCSV bool) string {
	ct := c.GetHeader("Content-Type")
	if ct == "application/json" {
		return "json" // the common case, without parsing
	}
	mt, _, err := mime.ParseMediaType(ct)
	if ct == "" {
		err = errors.New("missing")
	}
	switch {
	case err == nil && (mt == "application/json" || strings.HasSuffix(mt, "+json")):
		return "json"
	case err == nil && allowCSV && (mt == "text/csv" || mt == "application/csv"):
		return "csv"
	}
	want := "application/json"
	if allowCSV {
		want += " or text/csv"
	}
	s.problem(c, wire.NewProblem(wire.KindMediaType, fmt.Sprintf("Content-Type %q is not accepted here; send %s", ct, want)))
	return ""
}
