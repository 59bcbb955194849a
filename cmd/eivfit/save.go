package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"mime"
	"net/http"
	"net/http/httptest"
	"net/url"
	"os"
	"path/filepath"
	"strings"
	"time"

	"eivfit/api"
	"eivfit/api/store"
	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// saveFlags are the flags that save a computation as a study, shared by
// fit, compare and calibrate.
type saveFlags struct {
	save                   bool
	dataDir, server, label string
	apiKey                 string
	tags                   tagList
}

// tagList is the repeatable --tag KEY=VALUE.
type tagList []string

func (t *tagList) String() string { return strings.Join(*t, ",") }
func (t *tagList) Set(v string) error {
	k, _, ok := strings.Cut(v, "=")
	if !ok || k == "" || strings.Contains(k, ":") {
		return fmt.Errorf("a tag is KEY=VALUE with a key without ':', such as analyte=glucose, not %q", v)
	}
	*t = append(*t, v)
	return nil
}

// notOptions are the flags of a command that are not options of its
// request (every other flag set becomes the query parameter of its name,
// "-" read as "_", exactly as POST with a CSV body takes it).
var notOptions = []string{"format", "pretty", "save", "data-dir", "server", "api-key", "label", "tag"}

func addSaveFlags(fs *flag.FlagSet) *saveFlags {
	s := &saveFlags{}
	fs.BoolVar(&s.save, "save", false, "save the study (its input exactly as read, the options, the seed, the version and the result): in --data-dir, or on --server; the study id and its location are printed on standard error")
	fs.StringVar(&s.dataDir, "data-dir", envOr("EIVFIT_DATA_DIR", "./eivfit-data"), "with --save: the data directory of the SQLite study store the server uses, created when missing (EIVFIT_DATABASE_URL, when set, names PostgreSQL instead)")
	fs.StringVar(&s.server, "server", "", "with --save: the URL of an eivfit server to compute and save on, instead of a data directory")
	fs.StringVar(&s.apiKey, "api-key", "", "with --server: the API key (default $EIVFIT_API_KEY, which keeps it out of the process list)")
	fs.StringVar(&s.label, "label", "", "with --save: the study's label")
	fs.Var(&s.tags, "tag", "with --save: a tag KEY=VALUE, such as analyte=glucose (repeatable)")
	return s
}

// check refuses the flags of a save without --save, and both places at
// once; set are the flags given on the command line.
func (s *saveFlags) check(set map[string]bool) error {
	if !s.save {
		for _, f := range []string{"data-dir", "server", "api-key", "label", "tag"} {
			if set[f] {
				return fmt.Errorf("--%s describes a saved study: add --save", f)
			}
		}
		return nil
	}
	if set["server"] && set["data-dir"] {
		return errors.New("--server and --data-dir name two places: give one")
	}
	if set["api-key"] && !set["server"] {
		return errors.New("--api-key is for --server")
	}
	if s.server != "" {
		u, err := url.Parse(s.server)
		if err != nil || (u.Scheme != "http" && u.Scheme != "https") || u.Host == "" {
			return fmt.Errorf("--server %q: an http or https URL, such as http://127.0.0.1:8080", s.server)
		}
	}
	return nil
}

// setFlags are the flags given on the command line.
func setFlags(fs *flag.FlagSet) map[string]bool {
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	return set
}

// query is the request's query string: the options given as flags, then
// save, label and each tag as POST takes them.
func (s *saveFlags) query(fs *flag.FlagSet) url.Values {
	q := url.Values{}
	fs.Visit(func(f *flag.Flag) {
		for _, n := range notOptions {
			if f.Name == n {
				return
			}
		}
		q.Set(strings.ReplaceAll(f.Name, "-", "_"), f.Value.String())
	})
	q.Set("save", "true")
	if s.label != "" {
		q.Set("label", s.label)
	}
	for _, t := range s.tags {
		k, v, _ := strings.Cut(t, "=")
		q.Add("tag", k+":"+v)
	}
	return q
}

// saveRun is one command's save: the path it posts to, how it prints
// its answer as text, and the output flags.
type saveRun struct {
	cmd, path string
	format    string
	pretty    bool
	text      func(result []byte, w io.Writer) error
}

// run posts the CSV input with the flags as query parameters and
// save=true, through the service's own handler on the data directory's
// store (or to --server), so that the record is the one the HTTP route
// stores. It prints the study id and its location on stderr and the
// result on stdout, as the command prints it without --save.
func (s *saveFlags) run(ctx context.Context, r saveRun, fs *flag.FlagSet, file string, stdin io.Reader, stdout, stderr io.Writer) error {
	in, name, err := openInput(file, stdin, r.cmd, stderr)
	if err != nil {
		return err
	}
	body, err := io.ReadAll(in)
	in.Close()
	if err != nil {
		fmt.Fprintf(stderr, "eivfit %s: %s: %v\n", r.cmd, name, err)
		return exitError{1}
	}
	target := r.path + "?" + s.query(fs).Encode()
	var (
		status int
		header http.Header
		answer []byte
		where  string
	)
	if s.server != "" {
		status, header, answer, err = s.post(ctx, target, body)
		if err != nil {
			fmt.Fprintf(stderr, "eivfit %s: %v\n", r.cmd, err)
			return exitError{1}
		}
	} else {
		cfg := store.Config{DatabaseURL: os.Getenv("EIVFIT_DATABASE_URL"), DataDir: s.dataDir}
		where = "in " + filepath.Join(s.dataDir, store.DatabaseFile)
		if cfg.DatabaseURL != "" {
			where = "in PostgreSQL (EIVFIT_DATABASE_URL)"
		}
		st, err := store.Open(ctx, cfg)
		if err != nil {
			fmt.Fprintf(stderr, "eivfit %s: cannot open the study store: %v\n", r.cmd, err)
			return exitError{1}
		}
		ver, rev := buildVersion()
		srv, err := api.NewServer(api.Config{Version: ver, VCSRevision: rev, RequestTimeout: 24 * time.Hour,
			OpenStore: func(context.Context, func(string, time.Duration, error)) (study.Store, error) { return st, nil }})
		if err != nil {
			st.Close()
			return err
		}
		defer srv.Close()
		req, err := http.NewRequestWithContext(ctx, http.MethodPost, target, bytes.NewReader(body))
		if err != nil {
			return err
		}
		req.Header.Set("Content-Type", "text/csv")
		rec := httptest.NewRecorder()
		srv.Handler().ServeHTTP(rec, req)
		status, header, answer = rec.Code, rec.Header(), rec.Body.Bytes()
	}
	if status != http.StatusCreated {
		return answerProblem(stderr, name, status, header, answer)
	}
	var created wire.Created
	if err := json.Unmarshal(answer, &created); err != nil || created.ID == "" {
		fmt.Fprintf(stderr, "eivfit %s: the answer is not a saved study (%d bytes)\n", r.cmd, len(answer))
		return exitError{1}
	}
	loc := created.Location
	if s.server != "" {
		loc = strings.TrimRight(s.server, "/") + loc
	}
	fmt.Fprintf(stderr, "eivfit: saved study %s at %s %s\n", created.ID, loc, where)
	// The result is the answer's JSON without its final newline, which
	// the command prints as wire.WriteJSON does.
	result := append(created.Result, '\n')
	var out bytes.Buffer
	switch {
	case r.format == "text":
		err = r.text(result, &out)
	case r.pretty:
		err = json.Indent(&out, result, "", "  ")
	default:
		_, err = out.Write(result)
	}
	if err != nil {
		fmt.Fprintf(stderr, "eivfit %s: study %s was saved, but its answer cannot be printed: %v\n", r.cmd, created.ID, err)
		return exitError{1}
	}
	_, err = stdout.Write(out.Bytes())
	return err
}

// post sends the request to --server.
func (s *saveFlags) post(ctx context.Context, target string, body []byte) (int, http.Header, []byte, error) {
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, strings.TrimRight(s.server, "/")+target, bytes.NewReader(body))
	if err != nil {
		return 0, nil, nil, err
	}
	req.Header.Set("Content-Type", "text/csv")
	req.Header.Set("Accept", "application/json")
	key := s.apiKey
	if key == "" {
		key = os.Getenv("EIVFIT_API_KEY")
	}
	if key != "" {
		req.Header.Set("Authorization", "Bearer "+key)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return 0, nil, nil, err
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	return resp.StatusCode, resp.Header, b, err
}

// answerProblem prints a refused save: bad input (400, 413, 422) as the
// command reports it without --save, with query parameters named as
// flags, exit status 2; anything else (the store down, a key refused)
// exit status 1.
func answerProblem(stderr io.Writer, name string, status int, header http.Header, body []byte) error {
	var p wire.Problem
	mt, _, _ := mime.ParseMediaType(header.Get("Content-Type"))
	if mt != "application/problem+json" || json.Unmarshal(body, &p) != nil || p.Title == "" {
		fmt.Fprintf(stderr, "eivfit: %s: the server answered %d %s\n", name, status, http.StatusText(status))
		return exitError{1}
	}
	err := reportProblem(stderr, name, asFlags(&p))
	switch status {
	case http.StatusBadRequest, http.StatusRequestEntityTooLarge, http.StatusUnprocessableEntity:
		return err
	}
	if ra := header.Get("Retry-After"); ra != "" {
		fmt.Fprintf(stderr, "  (%d; retry after %s s; nothing was saved)\n", status, ra)
	} else {
		fmt.Fprintf(stderr, "  (%d; nothing was saved)\n", status)
	}
	return exitError{1}
}

// textOf prints a saved study's result (its JSON) as the command's text.
func textOf[T any](write func(io.Writer, *T) error) func([]byte, io.Writer) error {
	return func(b []byte, w io.Writer) error {
		v := new(T)
		if err := json.Unmarshal(b, v); err != nil {
			return err
		}
		return write(w, v)
	}
}
