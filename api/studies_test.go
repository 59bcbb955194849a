package api

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"strings"
	"testing"
	"time"

	"eivfit/api/store"
	"eivfit/api/store/storetest"
	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// studyHarness is the real router with a study store on one engine.
func studyHarness(t *testing.T, eng storetest.Engine, keys []string, logs io.Writer) (*harness, store.Config) {
	t.Helper()
	cfg := eng.Config(t)
	if logs == nil {
		logs = io.Discard
	}
	h := newHarness(t, Config{APIKeys: keys, Logger: slog.New(slog.NewJSONHandler(logs, nil)), Version: "test-1",
		OpenStore: func(ctx context.Context, observe func(string, time.Duration, error)) (study.Store, error) {
			c := cfg
			c.Observe = observe
			return store.Open(ctx, c)
		}})
	t.Cleanup(func() { h.srv.Close() })
	return h, cfg
}

func eachStudyEngine(t *testing.T, fn func(t *testing.T, eng storetest.Engine)) {
	for _, eng := range storetest.Engines {
		t.Run(eng.Name, func(t *testing.T) { fn(t, eng) })
	}
}

// A glucose-like comparison with ids, and a seeded-by-draw bootstrap: the
// recomputation must pin the drawn seed to answer the same bytes.
const savedFitJSON = `{"points":[{"id":"A","x":1.2,"y":3.4},{"id":"B","x":1.9,"y":4.4},{"id":"C","x":2.9,"y":7.2},{"id":"D","x":4.0,"y":8.5},{"id":"E","x":4.7,"y":10.8},{"id":"F","x":5.9,"y":13.5},{"id":"G","x":7.1,"y":30}],"methods":["ols","deming"],"bootstrap":{"resamples":200},"save":true,"label":"run 1","tags":{"analyte":"glucose"}}`

const savedFitCSV = "id,x,y\nA,1.2,3.4\nB,1.9,4.4\nC,2.9,7.2\nD,4.0,8.5\nE,4.7,10.8\nF,5.9,13.5\n"

func decodeJSON[T any](t *testing.T, b []byte) T {
	t.Helper()
	var v T
	if err := json.Unmarshal(b, &v); err != nil {
		t.Fatalf("%v\n%s", err, b)
	}
	return v
}

func TestStudySaveReadRevise(t *testing.T) {
	eachStudyEngine(t, func(t *testing.T, eng storetest.Engine) {
		h, _ := studyHarness(t, eng, nil, nil)
		plain := h.do("POST", "/v1/fit", "application/json", strings.Replace(savedFitJSON, `"save":true,"label":"run 1","tags":{"analyte":"glucose"}`, `"save":false`, 1))
		if plain.Code != 200 {
			t.Fatalf("save false: %d %s", plain.Code, plain.Body)
		}
		rec := h.do("POST", "/v1/fit", "application/json", savedFitJSON)
		if rec.Code != 201 {
			t.Fatalf("save: %d %s", rec.Code, rec.Body)
		}
		saved := decodeJSON[wire.Created](t, rec.Body.Bytes())
		if loc := rec.Header().Get("Location"); loc != "/v1/studies/"+saved.ID || !study.ValidID(saved.ID) {
			t.Fatalf("Location %q, id %q", loc, saved.ID)
		}
		csv := h.do("POST", "/v1/fit?methods=ols&save=true&tag=analyte:lactate&tag=site:north", "text/csv", savedFitCSV)
		if csv.Code != 201 {
			t.Fatalf("CSV save: %d %s", csv.Code, csv.Body)
		}
		csvID := decodeJSON[wire.Created](t, csv.Body.Bytes()).ID

		got := h.do("GET", "/v1/studies/"+saved.ID, "", "")
		st := decodeJSON[wire.StudyOut](t, got.Body.Bytes())
		if got.Code != 200 || !bytes.Equal(st.Result, saved.Result) || st.Label != "run 1" || st.Tags["analyte"] != "glucose" ||
			st.Version != "test-1" || st.Seed == 0 || st.Revision != 0 {
			t.Fatalf("GET study: %d %+v", got.Code, st)
		}
		in := h.do("GET", "/v1/studies/"+csvID+"/input", "", "")
		if in.Body.String() != savedFitCSV || in.Header().Get("Content-Type") != "text/csv" {
			t.Errorf("input: %q %q", in.Header().Get("Content-Type"), in.Body.String())
		}

		// Listing: newest first, by tag, by kind.
		for _, c := range []struct {
			name, query string
			want        []string
		}{
			{"all", "", []string{csvID, saved.ID}},
			{"tag", "?tag=analyte:glucose", []string{saved.ID}},
			{"two tags", "?tag=analyte:lactate&tag=site:north", []string{csvID}},
			{"label", "?label=run%201", []string{saved.ID}},
			{"kind", "?kind=calibration", nil},
			{"page", "?limit=1", []string{csvID}},
		} {
			l := decodeJSON[wire.StudyList](t, h.do("GET", "/v1/studies"+c.query, "", "").Body.Bytes())
			var ids []string
			for _, s := range l.Studies {
				ids = append(ids, s.ID)
			}
			if strings.Join(ids, ",") != strings.Join(c.want, ",") {
				t.Errorf("%s: %v, want %v", c.name, ids, c.want)
			}
		}

		// Revisions: reason required, based_on the latest, recomputed.
		for _, c := range []struct {
			name, body string
			status     int
		}{
			{"no reason", `{"based_on":0,"exclude":[{"id":"G","reason":"clot"}]}`, 400},
			{"exclusion without reason", `{"reason":"r","based_on":0,"exclude":[{"id":"G"}]}`, 400},
			{"unknown point", `{"reason":"r","based_on":0,"exclude":[{"id":"Z","reason":"x"}]}`, 400},
			{"data as option", `{"reason":"r","based_on":0,"options":{"points":[]}}`, 400},
			{"stale based_on", `{"reason":"r","based_on":3,"exclude":[{"id":"G","reason":"x"}]}`, 409},
			{"exclude G", `{"reason":"G was haemolysed","based_on":0,"exclude":[{"id":"G","reason":"haemolysed"}]}`, 201},
			{"same based_on again", `{"reason":"r","based_on":0,"options":{"confidence":0.9}}`, 409},
			{"options", `{"reason":"90 % as in the SOP","based_on":1,"options":{"confidence":0.9}}`, 201},
		} {
			r := h.do("POST", "/v1/studies/"+saved.ID+"/revisions", "application/json", c.body)
			if r.Code != c.status {
				t.Errorf("%s: %d, want %d: %s", c.name, r.Code, c.status, r.Body)
			}
		}
		latest := decodeJSON[wire.StudyOut](t, h.do("GET", "/v1/studies/"+saved.ID, "", "").Body.Bytes())
		var fit struct {
			N          int     `json:"n"`
			Confidence float64 `json:"confidence"`
		}
		_ = json.Unmarshal(latest.Result, &fit)
		if latest.Revision != 2 || fit.N != 6 || fit.Confidence != 0.9 {
			t.Errorf("revision 2: rev %d n %d confidence %v", latest.Revision, fit.N, fit.Confidence)
		}
		hist := decodeJSON[struct {
			Chain     string
			Revisions []wire.RevisionOut
		}](t, h.do("GET", "/v1/studies/"+saved.ID+"/history", "", "").Body.Bytes())
		if hist.Chain != "valid" || len(hist.Revisions) != 3 || hist.Revisions[1].Excluded[0].Reason != "haemolysed" ||
			hist.Revisions[2].PrevHash != hist.Revisions[1].Hash {
			t.Errorf("history: %+v", hist)
		}
		if r := h.do("GET", "/v1/studies/"+study.NewID(), "", ""); r.Code != 404 {
			t.Errorf("unknown id: %d", r.Code)
		}
		if r := h.do("POST", "/v1/studies/"+saved.ID+"/revisions/0/signatures", "application/json", `{"meaning":"reviewed"}`); r.Code != 403 {
			t.Errorf("signing without keys: %d", r.Code)
		}
	})
}

// The report of a saved study, computed again from the stored input, is
// byte for byte the report the saving request returned.
func TestStudyReportByteIdentical(t *testing.T) {
	eachStudyEngine(t, func(t *testing.T, eng storetest.Engine) {
		h, _ := studyHarness(t, eng, nil, nil)
		for _, c := range []struct{ name, target, ctype, body string }{
			{"fit JSON with a drawn seed", "/v1/fit", "application/json", savedFitJSON},
			{"fit CSV", "/v1/fit?at=3&save=true&resamples=200", "text/csv", savedFitCSV},
			{"comparison", "/v1/method-comparison?save=true", "text/csv", "id,x,y\n1,5.1,5.4\n2,7.9,8.3\n3,10.2,10.1\n4,14.8,15.6\n5,20.3,21.0\n6,9.0,9.4\n7,12.2,12.1\n8,16.0,16.9\n"},
		} {
			t.Run(c.name, func(t *testing.T) {
				first := h.do("POST", c.target, c.ctype, c.body, "Accept", "text/html")
				if first.Code != 201 {
					t.Fatalf("%d %s", first.Code, first.Body)
				}
				time.Sleep(1100 * time.Millisecond) // a report stamped with the time of rendering would differ
				again := h.do("GET", first.Header().Get("Location"), "", "", "Accept", "text/html")
				if again.Code != 200 || !bytes.Equal(first.Body.Bytes(), again.Body.Bytes()) {
					t.Fatalf("re-rendered report differs (%d): %d vs %d bytes", again.Code, first.Body.Len(), again.Body.Len())
				}
				if !strings.Contains(first.Body.String(), "Study record") {
					t.Error("the report has no study record")
				}
			})
		}
	})
}

// Roles: read keys read, analyse keys compute and save, sign keys sign;
// the old one-key lines keep working with role analyse.
func TestStudyRoles(t *testing.T) {
	eachStudyEngine(t, func(t *testing.T, eng storetest.Engine) {
		var logs bytes.Buffer
		h, _ := studyHarness(t, eng, []string{"rita read r-key", "ann analyse a-key", "sam sign s-key", "legacy-key"}, &logs)
		auth := func(k string) []string { return []string{"Authorization", "Bearer " + k} }
		rec := h.do("POST", "/v1/fit", "application/json", savedFitJSON, auth("a-key")...)
		if rec.Code != 201 {
			t.Fatalf("analyse saves: %d", rec.Code)
		}
		id := decodeJSON[wire.Created](t, rec.Body.Bytes()).ID
		sig := "/v1/studies/" + id + "/revisions/0/signatures"
		for _, c := range []struct {
			name, method, target, body, key string
			status                          int
		}{
			{"no key reads nothing", "GET", "/v1/studies/" + id, "", "", 401},
			{"read reads", "GET", "/v1/studies/" + id, "", "r-key", 200},
			{"read lists", "GET", "/v1/studies", "", "r-key", 200},
			{"read computes nothing", "POST", "/v1/fit", smallJSON + "}", "r-key", 403},
			{"read revises nothing", "POST", "/v1/studies/" + id + "/revisions", `{"reason":"r","based_on":0,"exclude":[{"id":"G","reason":"x"}]}`, "r-key", 403},
			{"legacy key saves", "POST", "/v1/fit", savedFitJSON, "legacy-key", 201},
			{"analyse may not sign", "POST", sig, `{"meaning":"reviewed"}`, "a-key", 403},
			{"legacy may not sign", "POST", sig, `{"meaning":"reviewed"}`, "legacy-key", 403},
			{"bad meaning", "POST", sig, `{"meaning":"liked"}`, "s-key", 400},
			{"sign signs", "POST", sig, `{"meaning":"reviewed","comment":"checked"}`, "s-key", 201},
			{"once per meaning", "POST", sig, `{"meaning":"reviewed"}`, "s-key", 409},
			{"no revision 5", "POST", "/v1/studies/" + id + "/revisions/5/signatures", `{"meaning":"approved"}`, "s-key", 404},
			{"analyse revises", "POST", "/v1/studies/" + id + "/revisions", `{"reason":"clot","based_on":0,"exclude":[{"id":"G","reason":"clot"}]}`, "a-key", 201},
		} {
			r := h.do(c.method, c.target, "application/json", c.body, auth(c.key)...)
			if r.Code != c.status {
				t.Errorf("%s: %d, want %d: %s", c.name, r.Code, c.status, r.Body)
			}
		}
		hist := decodeJSON[struct{ Revisions []wire.RevisionOut }](t,
			h.do("GET", "/v1/studies/"+id+"/history", "", "", auth("r-key")...).Body.Bytes())
		if len(hist.Revisions) != 2 || len(hist.Revisions[0].Signatures) != 1 || hist.Revisions[0].Signatures[0].Signer != "sam" ||
			len(hist.Revisions[1].Signatures) != 0 || hist.Revisions[1].Who != "ann" {
			t.Errorf("signatures stay on their revision: %+v", hist.Revisions)
		}
		page := h.do("GET", "/v1/studies/"+id+"?revision=0", "", "", "Accept", "text/html", "Authorization", "Bearer r-key")
		if !strings.Contains(page.Body.String(), "checked") || !strings.Contains(page.Body.String(), "sam") {
			t.Error("the report of revision 0 does not show its signature")
		}
		if leaked := loggedRequestData(t, logs.Bytes(), "glucose", "13.5"); leaked != "" {
			t.Errorf("request data reached the log: %s", leaked)
		}
	})
}

// A body over MaxStoredBytes is refused before anything is computed or
// written; a closed store answers 503 with Retry-After on the store routes
// while computations without save go on.
func TestStudyLimitsAndStoreDown(t *testing.T) {
	cfg := store.Config{DataDir: t.TempDir()}
	var opened study.Store
	h := newHarness(t, Config{MaxStoredBytes: 200, OpenStore: func(ctx context.Context, observe func(string, time.Duration, error)) (study.Store, error) {
		c := cfg
		c.Observe = observe
		st, err := store.Open(ctx, c)
		opened = st
		return st, err
	}})
	if r := h.do("POST", "/v1/fit", "application/json", savedFitJSON); r.Code != 413 {
		t.Errorf("oversized stored body: %d", r.Code)
	}
	if l := decodeJSON[wire.StudyList](t, h.do("GET", "/v1/studies", "", "").Body.Bytes()); len(l.Studies) != 0 {
		t.Errorf("the refused study was written: %v", l.Studies)
	}
	if r := h.do("GET", "/readyz", "", ""); r.Code != 200 {
		t.Errorf("readyz with the store up: %d", r.Code)
	}
	opened.Close()
	for _, c := range []struct{ name, method, target, ctype, body string }{
		{"list", "GET", "/v1/studies", "", ""},
		{"get", "GET", "/v1/studies/" + study.NewID(), "", ""},
		{"save", "POST", "/v1/fit?save=true", "text/csv", savedFitCSV},
		{"readyz", "GET", "/readyz", "", ""},
	} {
		r := h.do(c.method, c.target, c.ctype, c.body)
		if r.Code != 503 || r.Header().Get("Retry-After") == "" {
			t.Errorf("%s with the store closed: %d, Retry-After %q", c.name, r.Code, r.Header().Get("Retry-After"))
		}
	}
	if r := h.do("POST", "/v1/fit", "text/csv", savedFitCSV); r.Code != 200 {
		t.Errorf("a plain fit with the store down: %d", r.Code)
	}
	if m := h.do("GET", "/metrics", "", ""); !strings.Contains(m.Body.String(), `eivfit_store_errors_total{class="unavailable",op="list"}`) ||
		!strings.Contains(m.Body.String(), `eivfit_store_operation_duration_seconds_count{op="save"}`) {
		t.Error("store metrics missing")
	}
}

// loggedRequestData returns the first log line that carries one of the
// marks outside the fields the server itself measures (the time and the
// duration, whose digits can match a mark by chance: a 13.52 ms request
// once failed this check), or "" when none does.
func loggedRequestData(t *testing.T, logs []byte, marks ...string) string {
	t.Helper()
	if len(bytes.TrimSpace(logs)) == 0 {
		t.Fatal("nothing was logged: the check would pass vacuously")
	}
	for _, line := range bytes.Split(bytes.TrimSpace(logs), []byte("\n")) {
		if len(line) == 0 {
			continue
		}
		var rec map[string]any
		if err := json.Unmarshal(line, &rec); err != nil {
			t.Fatalf("a log line is not JSON: %s", line)
		}
		delete(rec, "time")
		delete(rec, "duration_ms")
		rest, _ := json.Marshal(rec)
		for _, m := range marks {
			if bytes.Contains(rest, []byte(m)) {
				return string(line)
			}
		}
	}
	return ""
}
