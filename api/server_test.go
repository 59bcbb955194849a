package api

import (
	"bytes"
	"context"
	"eivfit/eiv/study"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"eivfit/api/answertest"
	"eivfit/api/wire"
	"eivfit/openapi"

	"github.com/getkin/kin-openapi/openapi3"
	"github.com/getkin/kin-openapi/openapi3filter"
	"github.com/getkin/kin-openapi/routers"
	"github.com/getkin/kin-openapi/routers/legacy"
)

var (
	specOnce   sync.Once
	specDoc    *openapi3.T
	specRouter routers.Router
	specErr    error
)

// spec loads and validates the OpenAPI document (examples included), once.
func spec(t *testing.T) (*openapi3.T, routers.Router) {
	t.Helper()
	specOnce.Do(func() {
		// The CSV bodies carry '#' comment lines, which the library's own
		// text/csv decoder (a strict CSV reader) rejects; take them as text.
		text := func(r io.Reader, _ http.Header, _ *openapi3.SchemaRef, _ openapi3filter.EncodingFn) (any, error) {
			b, err := io.ReadAll(r)
			return string(b), err
		}
		for _, ct := range []string{"text/csv", "text/html", "image/svg+xml"} {
			openapi3filter.RegisterBodyDecoder(ct, text)
		}
		loader := openapi3.NewLoader()
		specDoc, specErr = loader.LoadFromData(openapi.Spec)
		if specErr != nil {
			return
		}
		if specErr = specDoc.Validate(context.Background(), openapi3.EnableExamplesValidation()); specErr != nil {
			return
		}
		specRouter, specErr = legacy.NewRouter(specDoc)
	})
	if specErr != nil {
		t.Fatal(specErr)
	}
	return specDoc, specRouter
}

type harness struct {
	t   *testing.T
	srv *Server
	// skipRequest skips validating the request against the document, for
	// a batch that holds invalid datasets on purpose.
	skipRequest bool
}

func newHarness(t *testing.T, cfg Config) *harness {
	srv, err := NewServer(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return &harness{t: t, srv: srv}
}

// do sends a request through the real router and validates the answer
// (and, for a request expected to succeed, the request) against the
// OpenAPI document.
func (h *harness) do(method, target, ctype, body string, header ...string) *httptest.ResponseRecorder {
	h.t.Helper()
	req := httptest.NewRequest(method, target, strings.NewReader(body))
	if ctype != "" {
		req.Header.Set("Content-Type", ctype)
	}
	for i := 0; i+1 < len(header); i += 2 {
		req.Header.Set(header[i], header[i+1])
	}
	rec := httptest.NewRecorder()
	h.srv.Handler().ServeHTTP(rec, req)
	h.validate(req, body, rec)
	return rec
}

func (h *harness) validate(req *http.Request, body string, rec *httptest.ResponseRecorder) {
	h.t.Helper()
	_, router := spec(h.t)
	vreq := req.Clone(context.Background())
	vreq.Body = io.NopCloser(strings.NewReader(body))
	vreq.URL.Scheme, vreq.URL.Host = "http", "127.0.0.1:8080"
	route, params, err := router.FindRoute(vreq)
	if err != nil {
		if rec.Code != http.StatusNotFound && rec.Code != http.StatusMethodNotAllowed {
			h.t.Errorf("%s %s: not in the OpenAPI document: %v", req.Method, req.URL.Path, err)
		}
		return
	}
	in := &openapi3filter.RequestValidationInput{Request: vreq, PathParams: params, Route: route,
		Options: &openapi3filter.Options{AuthenticationFunc: openapi3filter.NoopAuthenticationFunc}}
	if rec.Code < 300 && !h.skipRequest {
		if err := openapi3filter.ValidateRequest(context.Background(), in); err != nil {
			h.t.Errorf("%s %s: request does not match the OpenAPI document: %v", req.Method, req.URL, err)
		}
	}
	out := &openapi3filter.ResponseValidationInput{RequestValidationInput: in, Status: rec.Code,
		Header: rec.Header(), Options: &openapi3filter.Options{IncludeResponseStatus: true}}
	answertest.Check(h.t, rec.Body.Bytes())
	out.SetBodyBytes(rec.Body.Bytes())
	if err := openapi3filter.ValidateResponse(context.Background(), out); err != nil {
		h.t.Errorf("%s %s → %d: answer does not match the OpenAPI document: %v\n%s", req.Method, req.URL, rec.Code, err, wire.Truncate(rec.Body.String()))
	}
}

func decodeProblem(t *testing.T, rec *httptest.ResponseRecorder) wire.Problem {
	t.Helper()
	if ct := rec.Header().Get("Content-Type"); ct != "application/problem+json" {
		t.Errorf("Content-Type %q, want application/problem+json", ct)
	}
	var p wire.Problem
	if err := json.Unmarshal(rec.Body.Bytes(), &p); err != nil {
		t.Fatalf("problem body: %v\n%s", err, rec.Body.String())
	}
	return p
}

const smallJSON = `{"points":[{"x":1.2,"sx":0.2,"y":3.4,"sy":0.2},{"x":1.9,"sx":0.2,"y":4.4,"sy":0.2},{"x":2.9,"sx":0.2,"y":7.2,"sy":0.2},{"x":4.0,"sx":0.2,"y":8.5,"sy":0.4},{"x":4.7,"sx":0.2,"y":10.8,"sy":0.4},{"x":5.9,"sx":0.2,"y":13.5,"sy":0.4}]`

func TestEndpoints(t *testing.T) {
	h := newHarness(t, Config{MaxBodyBytes: 1 << 20, Limits: study.Limits{MaxPoints: 500}})
	bigBody := `{"points":[` + strings.Repeat(`{"x":1,"y":2},`, 100000) + `{"x":1,"y":2}]}`
	manyPoints := func() string {
		var b strings.Builder
		b.WriteString(`{"points":[`)
		for i := range 600 {
			if i > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, `{"x":%d,"y":%d}`, i, 2*i+1)
		}
		b.WriteString("]}")
		return b.String()
	}()
	cases := []struct {
		name, method, target, ctype, body string
		status                            int
		problemType, pointer              string
	}{
		{"json fit", "POST", "/v1/fit", "application/json", smallJSON + `,"methods":["ols","york"],"at":[3.5]}`, 200, "", ""},
		{"json fit bootstrap", "POST", "/v1/fit", "application/json", smallJSON + `,"bootstrap":{"resamples":300,"seed":4}}`, 200, "", ""},
		{"json charset", "POST", "/v1/fit", "application/json; charset=utf-8", smallJSON + `}`, 200, "", ""},
		{"csv fit", "POST", "/v1/fit?methods=york,ols&at=3.5&resamples=200&seed=3", "text/csv", "# comment, with commas\nx,sx,y,sy\n1.2,0.2,3.4,0.2\n1.9,0.2,4.4,0.2\n2.9,0.2,7.2,0.2\n4.0,0.2,8.5,0.4\n", 200, "", ""},
		{"unknown field", "POST", "/v1/fit", "application/json", smallJSON + `,"sigma_x":1}`, 400, "invalid-request", "/sigma_x"},
		{"unknown point field", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2,"sigma_y":1}]}`, 400, "invalid-request", "/points/0/sigma_y"},
		{"NaN", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":NaN}]}`, 400, "invalid-request", "/points/0/y"},
		{"query on json", "POST", "/v1/fit?lambda=2", "application/json", smallJSON + `}`, 400, "invalid-request", "query"},
		{"bad csv", "POST", "/v1/fit", "text/csv", "x,y\n1,2\n2,x\n", 400, "invalid-request", "row 3, column y"},
		{"bad query", "POST", "/v1/fit?confidence=2", "text/csv", "x,y\n1,2\n2,3\n3,5\n", 400, "invalid-request", "query parameter confidence"},
		{"too few points", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2},{"x":2,"y":3}]}`, 422, "unfittable-data", "/points"},
		{"constant x", "POST", "/v1/fit", "text/csv", "x,y\n1,2\n1,3\n1,4\n", 422, "unfittable-data", "body"},
		{"wrong media type", "POST", "/v1/fit", "application/xml", `<x/>`, 415, "unsupported-media-type", ""},
		{"no media type", "POST", "/v1/fit", "", smallJSON + `}`, 415, "unsupported-media-type", ""},
		{"csv to batch", "POST", "/v1/batch", "text/csv", "x,y\n", 415, "unsupported-media-type", ""},
		{"get fit", "GET", "/v1/fit", "", "", 405, "method-not-allowed", ""},
		{"put batch", "PUT", "/v1/batch", "application/json", "{}", 405, "method-not-allowed", ""},
		{"no route", "GET", "/v2/fit", "", "", 404, "not-found", ""},
		{"body too large", "POST", "/v1/fit", "application/json", bigBody, 413, "body-too-large", ""},
		{"too many points", "POST", "/v1/fit", "application/json", manyPoints, 413, "body-too-large", "/points"},
		{"batch empty", "POST", "/v1/batch", "application/json", `{"datasets":[]}`, 400, "invalid-request", "/datasets"},
		{"compare json", "POST", "/v1/method-comparison", "application/json", `{"samples":[{"id":"S1","order":1,"x":[5.1,5.2],"y":[5.4,5.3]},{"id":"S2","order":2,"x":[7.0,7.1],"y":[7.5,7.3]},{"id":"S3","order":3,"x":[11.2,11.0],"y":[11.8,11.6]},{"id":"S4","order":4,"x":[3.9,4.0],"y":[4.1,4.2]},{"id":"S5","order":5,"x":[15.3,15.1],"y":[16.0,15.9]},{"id":"S6","order":6,"x":[9.3,9.1],"y":[9.6,9.9]}],"unit":"mmol/L","decision_levels":[7.0,{"level":11.1,"allowable_bias":{"percent":5}}],"allowable_bias":{"absolute":0.3},"exclude":["S6"],"bootstrap":{"resamples":200,"seed":2}}`, 200, "", ""},
		{"compare csv", "POST", "/v1/method-comparison?decision_levels=7&allowable_percent=5&unit=mmol/L", "text/csv", "id,order,x1,x2,y1,y2\nS1,1,5.1,5.2,5.4,5.3\nS2,2,7.0,7.1,7.5,7.3\nS3,3,11.2,11.0,11.8,11.6\nS4,4,3.9,4.0,4.1,4.2\nS5,5,15.3,15.1,16.0,15.9\n", 200, "", ""},
		{"compare bad", "POST", "/v1/method-comparison", "application/json", `{"samples":[{"x":[1,"a"],"y":2}]}`, 400, "invalid-request", "/samples/0/x/1"},
		{"compare csv bad", "POST", "/v1/method-comparison", "text/csv", "id,x1,q\n", 400, "invalid-request", "row 1, column q"},
		{"healthz", "GET", "/healthz", "", "", 200, "", ""},
		{"readyz", "GET", "/readyz", "", "", 200, "", ""},
		{"openapi", "GET", "/openapi.yaml", "", "", 200, "", ""},
		{"demo", "GET", "/demo/demo-glucose.csv", "", "", 200, "", ""},
		{"demo missing", "GET", "/demo/nope.csv", "", "", 404, "not-found", ""},
		{"metrics", "GET", "/metrics", "", "", 200, "", ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			rec := h.do(c.method, c.target, c.ctype, c.body)
			if rec.Code != c.status {
				t.Fatalf("status %d, want %d\n%s", rec.Code, c.status, wire.Truncate(rec.Body.String()))
			}
			if rec.Header().Get("X-Content-Type-Options") != "nosniff" {
				t.Error("no nosniff header")
			}
			if c.problemType == "" {
				return
			}
			p := decodeProblem(t, rec)
			if p.Type != wire.ProblemTypeBase+c.problemType || p.Status != c.status || p.Title == "" {
				t.Errorf("problem %+v", p)
			}
			if c.pointer != "" && (len(p.Errors) == 0 || p.Errors[0].Pointer != c.pointer) {
				t.Errorf("errors %+v, want pointer %q", p.Errors, c.pointer)
			}
		})
	}
	// Metrics are labelled by route template.
	rec := h.do("GET", "/metrics", "", "")
	for _, want := range []string{`eivfit_http_requests_total{code="200",method="POST",route="/v1/fit"}`,
		`route="/demo/:file"`, `eivfit_problems_total{type="invalid-request"}`, "eivfit_fit_duration_seconds_bucket{method=\"york\"",
		"eivfit_compute_slots ", "go_goroutines", "process_resident_memory_bytes", "eivfit_resamples_processed_total 3200"} { // 300 resamples × 4 methods + 200 × 2 + 200 × 4 methods × 2 analyses (with and without S6)
		if !strings.Contains(rec.Body.String(), want) {
			t.Errorf("metrics lack %s", want)
		}
	}
}

// A declared Content-Length above the limit is answered at once, without
// reading the body.
func TestBodyLimitByContentLength(t *testing.T) {
	h := newHarness(t, Config{MaxBodyBytes: 1024})
	req := httptest.NewRequest("POST", "/v1/fit", neverRead{t})
	req.Header.Set("Content-Type", "application/json")
	req.ContentLength = 1 << 30
	rec := httptest.NewRecorder()
	h.srv.Handler().ServeHTTP(rec, req)
	if rec.Code != http.StatusRequestEntityTooLarge {
		t.Fatalf("status %d", rec.Code)
	}
}

type neverRead struct{ t *testing.T }

func (n neverRead) Read([]byte) (int, error) {
	n.t.Error("the body was read")
	return 0, io.EOF
}

func TestBatch(t *testing.T) {
	h := newHarness(t, Config{})
	body := `{"datasets":[
		{"name":"glucose","points":[{"x":5.1,"y":5.3},{"x":7.2,"y":7.6},{"x":11.0,"y":11.4},{"x":15.2,"y":15.9}],"methods":["ols","deming"]},
		{"name":"bad","points":[{"x":1,"y":2},{"x":1,"y":3},{"x":1,"y":4}]},
		{"name":"typo","points":[{"x":1,"y":2,"sigma_x":3}]},
		{"points":[{"x":60,"y":63},{"x":95,"y":97},{"x":150,"y":158},{"x":310,"y":322}],"bootstrap":{"resamples":200,"seed":1}}
	]}`
	h.skipRequest = true
	rec := h.do("POST", "/v1/batch", "application/json", body)
	h.skipRequest = false
	if rec.Code != 200 {
		t.Fatalf("status %d\n%s", rec.Code, rec.Body.String())
	}
	var resp wire.BatchResponse
	if err := json.Unmarshal(rec.Body.Bytes(), &resp); err != nil {
		t.Fatal(err)
	}
	if resp.OK != 2 || resp.Failed != 2 || len(resp.Results) != 4 {
		t.Fatalf("ok %d failed %d", resp.OK, resp.Failed)
	}
	r := resp.Results
	if r[0].Name != "glucose" || r[0].Fit == nil || r[0].Fit.Fits.Deming == nil {
		t.Errorf("result 0: %+v", r[0])
	}
	if r[1].Status != 422 || r[1].Problem.Errors[0].Pointer != "/datasets/1/points" {
		t.Errorf("result 1: %+v", r[1].Problem)
	}
	if r[2].Status != 400 || r[2].Problem.Errors[0].Pointer != "/datasets/2/points/0/sigma_x" {
		t.Errorf("result 2: %+v", r[2].Problem)
	}
	if r[3].Name != "dataset 3" || r[3].Fit.Fits.Deming.Bootstrap == nil {
		t.Errorf("result 3: %+v", r[3])
	}
	// The same dataset alone gives the same fit as inside the batch.
	one := h.do("POST", "/v1/fit", "application/json", `{"points":[{"x":60,"y":63},{"x":95,"y":97},{"x":150,"y":158},{"x":310,"y":322}],"bootstrap":{"resamples":200,"seed":1}}`)
	var alone wire.FitResponse
	_ = json.Unmarshal(one.Body.Bytes(), &alone)
	a, _ := json.Marshal(alone)
	b, _ := json.Marshal(r[3].Fit)
	if !bytes.Equal(a, b) {
		t.Error("batch result differs from the single fit")
	}
}

// When every compute slot stays busy, the request waits SlotWait and gets
// 503 with Retry-After; once a slot frees, requests succeed again.
func TestBusySlots(t *testing.T) {
	h := newHarness(t, Config{Slots: 1, SlotWait: 30 * time.Millisecond})
	h.srv.slots <- struct{}{} // hold the only slot
	start := time.Now()
	rec := h.do("POST", "/v1/fit", "application/json", smallJSON+`}`)
	if rec.Code != http.StatusServiceUnavailable || rec.Header().Get("Retry-After") == "" {
		t.Fatalf("status %d, Retry-After %q", rec.Code, rec.Header().Get("Retry-After"))
	}
	if p := decodeProblem(t, rec); p.Type != wire.ProblemTypeBase+"busy" {
		t.Errorf("type %s", p.Type)
	}
	if d := time.Since(start); d < 30*time.Millisecond || d > 5*time.Second {
		t.Errorf("waited %v", d)
	}
	<-h.srv.slots
	if rec := h.do("POST", "/v1/fit", "application/json", smallJSON+`}`); rec.Code != 200 {
		t.Errorf("after release: %d", rec.Code)
	}
}

// A bootstrap that would run past the deadline is cancelled, answered 503,
// and frees its slot.
func TestDeadline(t *testing.T) {
	h := newHarness(t, Config{Slots: 1, RequestTimeout: 20 * time.Millisecond})
	var b strings.Builder
	b.WriteString(`{"points":[`)
	for i := range 300 {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `{"x":%d,"y":%g,"sx":1,"sy":1}`, i, 2*float64(i)+float64(i%7))
	}
	b.WriteString(`],"methods":["york"],"bootstrap":{"resamples":100000,"seed":1}}`)
	start := time.Now()
	rec := h.do("POST", "/v1/fit", "application/json", b.String())
	if rec.Code != http.StatusServiceUnavailable {
		t.Fatalf("status %d", rec.Code)
	}
	if p := decodeProblem(t, rec); p.Type != wire.ProblemTypeBase+"deadline-exceeded" {
		t.Errorf("type %s", p.Type)
	}
	if d := time.Since(start); d > 5*time.Second {
		t.Errorf("took %v to give up", d)
	}
	if len(h.srv.slots) != 0 {
		t.Error("the slot was not freed")
	}
}

func TestAPIKeys(t *testing.T) {
	var logs bytes.Buffer
	h := newHarness(t, Config{APIKeys: []string{"s3cret", "sha256:" + fmt.Sprintf("%x", sha256Sum("other"))},
		Logger: slog.New(slog.NewJSONHandler(&logs, nil))})
	defer func() {
		if strings.Contains(logs.String(), "s3cret") || strings.Contains(logs.String(), "wrong") || strings.Contains(logs.String(), "Bearer") {
			t.Errorf("a key reached the log:\n%s", logs.String())
		}
		if !strings.Contains(logs.String(), `"status":401`) {
			t.Error("the 401s were not logged")
		}
	}()
	for _, c := range []struct {
		auth   string
		status int
	}{{"", 401}, {"Bearer wrong", 401}, {"Basic s3cret", 401}, {"Bearer s3cret", 200}, {"Bearer other", 200}} {
		rec := h.do("POST", "/v1/fit", "application/json", smallJSON+`}`, "Authorization", c.auth)
		if rec.Code != c.status {
			t.Errorf("%q: status %d, want %d", c.auth, rec.Code, c.status)
		}
		if c.status == 401 && rec.Header().Get("WWW-Authenticate") == "" {
			t.Error("no WWW-Authenticate")
		}
	}
	// Health and metrics stay open for probes and scrapers.
	if rec := h.do("GET", "/healthz", "", ""); rec.Code != 200 {
		t.Errorf("healthz %d", rec.Code)
	}
}

// Every route the router serves is in the OpenAPI document, and every
// path of the document is served.
func TestOpenAPICoversRoutes(t *testing.T) {
	doc, _ := spec(t)
	h := newHarness(t, Config{})
	served := map[string]bool{}
	for _, r := range h.srv.Routes() {
		method, path, _ := strings.Cut(r, " ")
		path = ginToOpenAPI(path)
		served[method+" "+path] = true
		item := doc.Paths.Find(path)
		if item == nil || item.GetOperation(method) == nil {
			t.Errorf("%s %s is served but not in the OpenAPI document", method, path)
		}
	}
	for path, item := range doc.Paths.Map() {
		for method := range item.Operations() {
			if !served[method+" "+path] {
				t.Errorf("%s %s is in the OpenAPI document but not served", method, path)
			}
		}
	}
}

func ginToOpenAPI(p string) string {
	parts := strings.Split(p, "/")
	for i, s := range parts {
		if strings.HasPrefix(s, ":") {
			parts[i] = "{" + s[1:] + "}"
		}
	}
	return strings.Join(parts, "/")
}
