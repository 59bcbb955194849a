package main

import (
	"bytes"
	"context"
	"encoding/hex"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"time"

	"eivfit/api"
	"eivfit/api/store"
	"eivfit/api/wire"
	"eivfit/eiv/study"
)

const studiesUsage = `Usage: eivfit studies list|show|verify|export [flags]

Reads the study store of a data directory (--data-dir, EIVFIT_DATA_DIR) or
of PostgreSQL (EIVFIT_DATABASE_URL):

  list            the studies, newest first (--kind, --label, --since, --limit)
  show ID         one study's record and history as JSON
  verify          recompute every study (or those since --since) and its
                  revisions; report each result that no longer matches,
                  with the version that made it; exit 1 on any
  export          every study (or since --since) as JSON lines: the record,
                  its input (base64) and its history

Flags:
`

func runStudies(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	if len(args) == 0 {
		fmt.Fprint(stderr, studiesUsage)
		return exitError{2}
	}
	cmd := args[0]
	fs := flag.NewFlagSet("studies "+cmd, flag.ContinueOnError)
	fs.SetOutput(stderr)
	dataDir := fs.String("data-dir", envOr("EIVFIT_DATA_DIR", "./eivfit-data"), "data directory of the SQLite store (EIVFIT_DATABASE_URL, when set, names PostgreSQL instead)")
	since := fs.String("since", "", "only studies created on or after this date (2006-01-02) or RFC 3339 time")
	kind := fs.String("kind", "", "list: fit, method-comparison or calibration")
	label := fs.String("label", "", "list: exact label")
	limit := fs.Int("limit", 50, "list: most studies shown")
	fs.Usage = func() { fmt.Fprint(stderr, studiesUsage); fs.PrintDefaults() }
	if err := fs.Parse(args[1:]); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil
		}
		return exitError{2}
	}
	var from time.Time
	if *since != "" {
		var err error
		if from, err = time.Parse(time.DateOnly, *since); err != nil {
			if from, err = time.Parse(time.RFC3339, *since); err != nil {
				return usageError(stderr, "studies", fmt.Errorf("--since %q: a date (2006-01-02) or an RFC 3339 time", *since))
			}
		}
	}
	cfg := store.Config{DatabaseURL: os.Getenv("EIVFIT_DATABASE_URL"), DataDir: *dataDir}
	if cfg.DatabaseURL == "" {
		if _, err := os.Stat(*dataDir); err != nil {
			fmt.Fprintf(stderr, "eivfit studies: no data directory %s (set --data-dir or EIVFIT_DATABASE_URL)\n", *dataDir)
			return exitError{2}
		}
	}
	st, err := store.Open(ctx, cfg)
	if err != nil {
		fmt.Fprintln(stderr, "eivfit studies:", err)
		return exitError{1}
	}
	defer st.Close()
	switch cmd {
	case "list":
		f := study.Filter{Kind: study.StudyKind(*kind), Label: *label, From: from, Limit: min(*limit, study.MaxLimit)}
		sums, _, err := st.List(ctx, f)
		if err != nil {
			return err
		}
		for _, s := range sums {
			fmt.Fprintf(stdout, "%s  %s  %-17s rev %d  %s  %s\n", s.ID, s.Created.Format(time.RFC3339), s.Kind, s.Latest, s.Who, s.Label)
		}
		return nil
	case "show":
		if fs.NArg() != 1 {
			return usageError(stderr, "studies show", errors.New("name one study id"))
		}
		s, revs, err := readStudy(ctx, st, fs.Arg(0))
		if err != nil {
			return err
		}
		return wire.WritePrettyJSON(stdout, exportLine(s, revs, false))
	case "verify", "export":
		return eachStudy(ctx, st, from, func(s *study.Study, revs []study.Revision) error {
			if cmd == "export" {
				return wire.WriteJSON(stdout, exportLine(s, revs, true))
			}
			return verifyStudy(ctx, s, revs, stdout)
		}, stdout, cmd == "verify")
	}
	fmt.Fprintf(stderr, "eivfit studies: unknown command %q\n\n%s", cmd, studiesUsage)
	return exitError{2}
}

func envOr(name, def string) string {
	if v, ok := os.LookupEnv(name); ok {
		return v
	}
	return def
}

func readStudy(ctx context.Context, st study.Store, id string) (*study.Study, []study.Revision, error) {
	s, err := st.Get(ctx, id)
	if err != nil {
		return nil, nil, err
	}
	revs, err := st.History(ctx, id)
	return s, revs, err
}

// eachStudy visits every study created since from, oldest page last.
func eachStudy(ctx context.Context, st study.Store, from time.Time, fn func(*study.Study, []study.Revision) error, stdout io.Writer, verify bool) error {
	f := study.Filter{From: from, Limit: study.MaxLimit}
	n, bad := 0, 0
	for {
		sums, next, err := st.List(ctx, f)
		if err != nil {
			return err
		}
		for _, sum := range sums {
			s, revs, err := readStudy(ctx, st, sum.ID)
			if err != nil {
				return err
			}
			n++
			if err := fn(s, revs); err != nil {
				if !verify {
					return err
				}
				bad++
			}
		}
		if next == "" {
			break
		}
		f.Cursor = next
	}
	if verify {
		fmt.Fprintf(stdout, "%d studies checked, %d mismatched\n", n, bad)
		if bad > 0 {
			return exitError{1}
		}
	}
	return nil
}

var errMismatch = errors.New("mismatch")

// verifyStudy checks the hash chain and recomputes every revision with
// this binary, comparing with the stored result.
func verifyStudy(ctx context.Context, s *study.Study, revs []study.Revision, stdout io.Writer) error {
	if err := study.VerifyChain(s, revs); err != nil {
		fmt.Fprintf(stdout, "%s: hash chain broken: %v\n", s.ID, err)
		return errMismatch
	}
	ver, _ := buildVersion()
	srv, err := api.NewServer(api.Config{Version: ver})
	if err != nil {
		return err
	}
	failed := false
	for n := range revs {
		got, err := srv.Recompute(ctx, s, revs, n)
		switch {
		case err != nil:
			fmt.Fprintf(stdout, "%s revision %d: cannot recompute (%v); made by eivfit %s (%s)\n", s.ID, n, err, s.Version, s.VCSRevision)
			failed = true
		case !bytes.Equal(got, revs[n].Result):
			fmt.Fprintf(stdout, "%s revision %d: result differs from the one stored by eivfit %s (%s)\n", s.ID, n, s.Version, s.VCSRevision)
			failed = true
		}
	}
	if failed {
		return errMismatch
	}
	return nil
}

// studyExport is one line of `eivfit studies export`.
type studyExport struct {
	ID          string             `json:"id"`
	Kind        string             `json:"kind"`
	Label       string             `json:"label,omitempty"`
	Tags        map[string]string  `json:"tags,omitempty"`
	Created     time.Time          `json:"created"`
	Who         string             `json:"who,omitempty"`
	ContentType string             `json:"content_type"`
	Query       string             `json:"query,omitempty"`
	Input       []byte             `json:"input,omitempty"`
	InputSHA256 string             `json:"input_sha256"`
	Options     json.RawMessage    `json:"options"`
	Seed        uint64             `json:"seed"`
	Version     string             `json:"version"`
	VCSRevision string             `json:"vcs_revision,omitempty"`
	Revisions   []wire.RevisionOut `json:"revisions"`
	Results     []json.RawMessage  `json:"results"`
}

func exportLine(s *study.Study, revs []study.Revision, withInput bool) studyExport {
	e := studyExport{ID: s.ID, Kind: string(s.Kind), Label: s.Label, Tags: s.Tags, Created: s.Created, Who: s.Who,
		ContentType: s.ContentType, Query: s.Query, InputSHA256: hex.EncodeToString(s.InputSHA256[:]),
		Options: s.Options, Seed: s.Seed, Version: s.Version, VCSRevision: s.VCSRevision, Revisions: wire.RevisionsOut(revs)}
	if withInput {
		e.Input = s.Input
	}
	for _, r := range revs {
		e.Results = append(e.Results, r.Result)
	}
	return e
}
