// Package storetest gives tests outside api/store a fresh study store on
// each engine: SQLite in a temporary directory, and PostgreSQL in a schema
// of its own at EIVFIT_TEST_DATABASE_URL (skipped without it, failed under
// EIVFIT_REQUIRE_DATABASE=1).
package storetest

import (
	"context"
	"net/url"
	"os"
	"strings"
	"testing"

	"eivfit/api/store"
	"eivfit/eiv/study"

	"github.com/jackc/pgx/v5"
)

// Engine names an engine and makes a fresh configuration for it.
type Engine struct {
	Name   string
	Config func(tb testing.TB) store.Config
}

// Engines are SQLite and PostgreSQL.
var Engines = []Engine{
	{"sqlite", func(tb testing.TB) store.Config { return store.Config{DataDir: tb.TempDir()} }},
	{"postgres", Postgres},
}

// Postgres creates a schema of its own (dropped at cleanup) and returns a
// configuration whose search_path names it.
func Postgres(tb testing.TB) store.Config {
	base := os.Getenv("EIVFIT_TEST_DATABASE_URL")
	if base == "" {
		if os.Getenv("EIVFIT_REQUIRE_DATABASE") == "1" {
			tb.Fatal("EIVFIT_REQUIRE_DATABASE=1 but EIVFIT_TEST_DATABASE_URL is not set")
		}
		tb.Skip("EIVFIT_TEST_DATABASE_URL not set")
	}
	schema := "t_" + strings.ToLower(study.NewID())
	ctx := context.Background()
	exec := func(sql string) error {
		c, err := pgx.Connect(ctx, base)
		if err != nil {
			return err
		}
		defer c.Close(ctx)
		_, err = c.Exec(ctx, sql)
		return err
	}
	if err := exec("CREATE SCHEMA " + schema); err != nil {
		tb.Fatalf("test database: %v", err)
	}
	tb.Cleanup(func() {
		if err := exec("DROP SCHEMA " + schema + " CASCADE"); err != nil {
			tb.Errorf("drop schema %s: %v", schema, err)
		}
	})
	u, err := url.Parse(base)
	if err != nil {
		tb.Fatal(err)
	}
	q := u.Query()
	q.Set("search_path", schema)
	u.RawQuery = q.Encode()
	return store.Config{DatabaseURL: u.String()}
}
