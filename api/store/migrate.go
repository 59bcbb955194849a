package store

import (
	"context"
	"embed"
	"fmt"
	"io/fs"
	"path"
	"slices"
	"strconv"
	"strings"
	"time"
)

// migrations holds each engine's schema as numbered steps
// (migrations/ENGINE/NNNN_name.sql), applied in order, each once.
//
//go:embed migrations
var migrations embed.FS

type migration struct {
	version int
	name    string
	sql     string
}

// loadMigrations reads one engine's steps in order of their numbers.
func loadMigrations(engine string) ([]migration, error) {
	dir := path.Join("migrations", engine)
	entries, err := fs.ReadDir(migrations, dir)
	if err != nil {
		return nil, err
	}
	var out []migration
	for _, e := range entries {
		num, _, ok := strings.Cut(e.Name(), "_")
		v, err := strconv.Atoi(num)
		if !ok || err != nil || !strings.HasSuffix(e.Name(), ".sql") {
			return nil, fmt.Errorf("store: migration %s is not named NNNN_name.sql", e.Name())
		}
		b, err := migrations.ReadFile(path.Join(dir, e.Name()))
		if err != nil {
			return nil, err
		}
		out = append(out, migration{version: v, name: e.Name(), sql: string(b)})
	}
	slices.SortFunc(out, func(a, b migration) int { return a.version - b.version })
	for i, m := range out {
		if m.version != i+1 {
			return nil, fmt.Errorf("store: migration %s out of sequence (expected %04d)", m.name, i+1)
		}
	}
	return out, nil
}

// migrate applies the steps the database lacks, in one transaction under
// the engine's migration lock, so that processes starting together apply
// each step once. A database migrated by a newer eivfit is refused.
func migrate(ctx context.Context, e engine) error {
	steps, err := loadMigrations(e.name())
	if err != nil {
		return err
	}
	err = e.write(ctx, func(q querier) error {
		if l := e.lockMigrations(); l != "" {
			if err := q.exec(ctx, l); err != nil {
				return err
			}
		}
		if err := q.exec(ctx, `CREATE TABLE IF NOT EXISTS schema_migrations (
			version integer PRIMARY KEY, name text NOT NULL, applied text NOT NULL)`); err != nil {
			return err
		}
		var applied int64
		if err := q.queryRow(ctx, `SELECT COALESCE(max(version), 0) FROM schema_migrations`, nil, &applied); err != nil {
			return err
		}
		if int(applied) > len(steps) {
			return fmt.Errorf("store: the database has schema version %d; this eivfit knows %d (upgrade eivfit)", applied, len(steps))
		}
		for _, m := range steps[applied:] {
			if err := q.exec(ctx, m.sql); err != nil {
				return fmt.Errorf("migration %s: %w", m.name, err)
			}
			if err := q.exec(ctx, `INSERT INTO schema_migrations (version, name, applied) VALUES (`+params(e.param, 3)+`)`,
				m.version, m.name, time.Now().UTC().Format(time.RFC3339)); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		if c := e.classify(err); c != nil {
			return fmt.Errorf("%w (migrate: %v)", c, err)
		}
		return fmt.Errorf("store: migrate: %w", err)
	}
	return nil
}
