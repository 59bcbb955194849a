package store

import (
	"bytes"
	"context"
	"crypto/rand"
	"errors"
	"fmt"
	mrand "math/rand/v2"
	"net"
	"net/url"
	"os"
	"strings"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"eivfit/eiv/study"
)

// The suite runs against both engines: SQLite in a temporary directory,
// and PostgreSQL at EIVFIT_TEST_DATABASE_URL (each test in a schema of its
// own, dropped afterwards). Without that URL the PostgreSQL cases skip,
// unless EIVFIT_REQUIRE_DATABASE=1 (as in CI), when they fail.

type engineCase struct {
	name string
	// config gives a fresh, empty database.
	config func(tb testing.TB) Config
}

var engineCases = []engineCase{
	{"sqlite", func(tb testing.TB) Config { return Config{DataDir: tb.TempDir()} }},
	{"postgres", pgConfig},
}

// eachEngine runs fn once per engine as a subtest.
func eachEngine(t *testing.T, fn func(t *testing.T, cfg Config)) {
	for _, ec := range engineCases {
		t.Run(ec.name, func(t *testing.T) { fn(t, ec.config(t)) })
	}
}

// pgURL is the test cluster's URL, or skips (fails under
// EIVFIT_REQUIRE_DATABASE=1) without one.
func pgURL(tb testing.TB) string {
	u := os.Getenv("EIVFIT_TEST_DATABASE_URL")
	if u == "" {
		if os.Getenv("EIVFIT_REQUIRE_DATABASE") == "1" {
			tb.Fatal("EIVFIT_REQUIRE_DATABASE=1 but EIVFIT_TEST_DATABASE_URL is not set")
		}
		tb.Skip("EIVFIT_TEST_DATABASE_URL not set")
	}
	return u
}

// pgConfig creates a fresh schema and points the URL's search_path at it.
func pgConfig(tb testing.TB) Config {
	base := pgURL(tb)
	schema := "t_" + strings.ToLower(study.NewID())
	ctx := context.Background()
	conn, err := pgx.Connect(ctx, base)
	if err != nil {
		tb.Fatalf("connect to the test database: %v", err)
	}
	defer conn.Close(ctx)
	if _, err := conn.Exec(ctx, "CREATE SCHEMA "+schema); err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() {
		c, err := pgx.Connect(ctx, base)
		if err != nil {
			tb.Errorf("drop schema %s: %v", schema, err)
			return
		}
		defer c.Close(ctx)
		if _, err := c.Exec(ctx, "DROP SCHEMA "+schema+" CASCADE"); err != nil {
			tb.Errorf("drop schema %s: %v", schema, err)
		}
	})
	return Config{DatabaseURL: withSearchPath(tb, base, schema)}
}

func withSearchPath(tb testing.TB, base, schema string) string {
	u, err := url.Parse(base)
	if err != nil {
		tb.Fatal(err)
	}
	q := u.Query()
	q.Set("search_path", schema)
	u.RawQuery = q.Encode()
	return u.String()
}

func mustOpen(tb testing.TB, cfg Config) study.Store {
	tb.Helper()
	s, err := Open(context.Background(), cfg)
	if err != nil {
		tb.Fatalf("open: %v", err)
	}
	tb.Cleanup(func() { s.Close() })
	return s
}

// sample is study i of a deterministic series: CSV input, binary result
// bytes (every byte value, so that a store mangling text would show), tags
// from small sets.
func sample(series uint64, i int) *study.Study {
	r := mrand.New(mrand.NewPCG(series, uint64(i)))
	var in bytes.Buffer
	in.WriteString("id,x,y,sx,sy\n")
	for k := range 40 {
		fmt.Fprintf(&in, "s%d,%.6g,%.6g,0.1,0.2\n", k, r.Float64()*100, r.Float64()*100)
	}
	res := make([]byte, 512)
	for k := range res {
		res[k] = byte(r.UintN(256))
	}
	kinds := []study.StudyKind{study.KindFit, study.KindMethodComparison, study.KindCalibration}
	return &study.Study{
		Kind:        kinds[i%3],
		Label:       fmt.Sprintf("series %d batch %d", series, i%4),
		Tags:        map[string]string{"analyte": []string{"glucose", "sodium", "urea"}[i%3], "site": fmt.Sprintf("lab-%d", i%2)},
		Who:         "analyst",
		Input:       in.Bytes(),
		ContentType: "text/csv",
		Query:       fmt.Sprintf("methods=york&resamples=%d", i),
		Options:     []byte(`{"methods":["york"],"confidence":0.95}`),
		Seed:        r.Uint64(),
		Version:     "v1.2.3",
		VCSRevision: "0123456789abcdef0123456789abcdef01234567",
		Result:      res,
	}
}

// sameContent compares everything a caller sets (not ID, Created).
// chainOf reads st's history and fails the test unless its hash chain holds.
func chainOf(tb testing.TB, ctx context.Context, s study.Store, st *study.Study) []study.Revision {
	tb.Helper()
	h, err := s.History(ctx, st.ID)
	if err != nil {
		tb.Fatal(err)
	}
	if err := study.VerifyChain(st, h); err != nil {
		tb.Fatal(err)
	}
	return h
}

func sameContent(got, want *study.Study) error {
	switch {
	case got.Kind != want.Kind, got.Label != want.Label, got.Who != want.Who,
		got.ContentType != want.ContentType, got.Query != want.Query, got.Seed != want.Seed,
		got.Version != want.Version, got.VCSRevision != want.VCSRevision:
		return fmt.Errorf("metadata differs:\n got %+v\nwant %+v", summary(got), summary(want))
	case !bytes.Equal(got.Input, want.Input):
		return errors.New("input bytes differ")
	case !bytes.Equal(got.Options, want.Options):
		return errors.New("options bytes differ")
	case !bytes.Equal(got.Result, want.Result):
		return errors.New("result bytes differ")
	case len(got.Tags) != len(want.Tags):
		return fmt.Errorf("tags %v, want %v", got.Tags, want.Tags)
	}
	for k, v := range want.Tags {
		if got.Tags[k] != v {
			return fmt.Errorf("tags %v, want %v", got.Tags, want.Tags)
		}
	}
	return nil
}

// sameStudy also compares ID, Created and the input hash.
func sameStudy(got, want *study.Study) error {
	if got.ID != want.ID || !got.Created.Equal(want.Created) || got.Created.Location() != time.UTC ||
		got.InputSHA256 != want.InputSHA256 {
		return fmt.Errorf("id/created/hash: got %s %v %x, want %s %v %x",
			got.ID, got.Created, got.InputSHA256[:4], want.ID, want.Created, want.InputSHA256[:4])
	}
	return sameContent(got, want)
}

func summary(s *study.Study) string {
	return fmt.Sprintf("%s %q %q %q %q %d %q %q", s.Kind, s.Label, s.Who, s.ContentType, s.Query, s.Seed, s.Version, s.VCSRevision)
}

func randomBytes(n int) []byte {
	b := make([]byte, n)
	rand.Read(b)
	return b
}

func writeFile(path string) error { return os.WriteFile(path, []byte("not a directory"), 0o600) }

// closedPort is a local TCP port nobody listens on (just released).
func closedPort(tb testing.TB) int {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		tb.Fatal(err)
	}
	port := l.Addr().(*net.TCPAddr).Port
	l.Close()
	return port
}
