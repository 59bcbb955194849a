package store

import (
	"context"
	"fmt"
	"os"
	"sync"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"eivfit/eiv/study"
)

// BenchmarkSave saves one small study (40 CSV rows, a 512-byte result)
// per iteration: on SQLite one fsync'd WAL commit.
func BenchmarkSave(b *testing.B) {
	for _, ec := range engineCases {
		b.Run(ec.name, func(b *testing.B) {
			s := mustOpen(b, ec.config(b))
			ctx := context.Background()
			b.ReportAllocs()
			for i := 0; b.Loop(); i++ {
				if err := s.Save(ctx, sample(1000, i)); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// benchRows is how many studies BenchmarkList lists from.
const benchRows = 100_000

// The stores BenchmarkList reads, filled once per test binary run and
// removed by benchCleanup.
var bench struct {
	mu      sync.Mutex
	stores  map[string]study.Store
	cleanup []func()
}

// benchStore returns the engine's store holding benchRows small studies,
// created 1 s apart, kinds and tags cycling, written in one transaction.
func benchStore(b *testing.B, engine string) study.Store {
	bench.mu.Lock()
	defer bench.mu.Unlock()
	if s := bench.stores[engine]; s != nil {
		return s
	}
	var cfg Config
	ctx := context.Background()
	switch engine {
	case "sqlite":
		dir, err := os.MkdirTemp("", "eivfit-bench-")
		if err != nil {
			b.Fatal(err)
		}
		bench.cleanup = append(bench.cleanup, func() { os.RemoveAll(dir) })
		cfg.DataDir = dir
	case "postgres":
		base := pgURL(b)
		schema := "bench_" + study.NewID()
		conn, err := pgx.Connect(ctx, base)
		if err != nil {
			b.Fatal(err)
		}
		defer conn.Close(ctx)
		if _, err := conn.Exec(ctx, "CREATE SCHEMA "+schema); err != nil {
			b.Fatal(err)
		}
		bench.cleanup = append(bench.cleanup, func() {
			if c, err := pgx.Connect(ctx, base); err == nil {
				c.Exec(ctx, "DROP SCHEMA "+schema+" CASCADE")
				c.Close(ctx)
			}
		})
		cfg.DatabaseURL = withSearchPath(b, base, schema)
	}
	st, err := Open(ctx, cfg)
	if err != nil {
		b.Fatal(err)
	}
	bench.cleanup = append(bench.cleanup, func() { st.Close() })
	start := time.Now()
	d := st.(*db)
	base := time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC)
	kinds := []study.StudyKind{study.KindFit, study.KindMethodComparison, study.KindCalibration}
	err = d.e.write(ctx, func(q querier) error {
		for i := range benchRows {
			s := &study.Study{
				Kind: kinds[i%3], Label: fmt.Sprintf("batch %d", i%100), Created: base.Add(time.Duration(i) * time.Second),
				Tags:  map[string]string{"analyte": []string{"glucose", "sodium", "urea"}[i%3]},
				Input: fmt.Appendf(nil, "x,y\n%d,%d\n", i, i+1), ContentType: "text/csv", Result: fmt.Appendf(nil, `{"n":%d}`, i),
			}
			if i%500 == 0 {
				s.Tags["site"] = "remote" // 200 studies, spread evenly
			}
			if err := s.Prepare(time.Now()); err != nil {
				return err
			}
			if err := d.insert(ctx, q, s); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		b.Fatal(err)
	}
	if engine == "postgres" {
		if err := d.e.exec(ctx, "ANALYZE"); err != nil {
			b.Fatal(err)
		}
	}
	b.Logf("%s: %d studies stored in %v", engine, benchRows, time.Since(start).Round(time.Second))
	if bench.stores == nil {
		bench.stores = map[string]study.Store{}
	}
	bench.stores[engine] = st
	return st
}

func benchCleanup() {
	for _, f := range bench.cleanup {
		f()
	}
}

// BenchmarkList lists one page (50 summaries) from benchRows studies.
func BenchmarkList(b *testing.B) {
	for _, ec := range engineCases {
		b.Run(ec.name, func(b *testing.B) {
			s := benchStore(b, ec.name)
			ctx := context.Background()
			// A cursor from the middle of the listing.
			var mid string
			f := study.Filter{Limit: study.MaxLimit}
			for range benchRows / 2 / study.MaxLimit {
				_, next, err := s.List(ctx, f)
				if err != nil {
					b.Fatal(err)
				}
				f.Cursor = next
			}
			mid = f.Cursor
			cases := []struct {
				name string
				f    study.Filter
			}{
				{"newest", study.Filter{}},
				{"middle", study.Filter{Cursor: mid}},
				{"kind", study.Filter{Kind: study.KindCalibration}},
				{"label", study.Filter{Label: "batch 7"}},
				{"tag", study.Filter{Tags: map[string]string{"analyte": "urea"}}},
				{"rare-tag", study.Filter{Tags: map[string]string{"site": "remote"}}},
				{"from-to", study.Filter{From: time.Date(2025, 1, 1, 10, 0, 0, 0, time.UTC), To: time.Date(2025, 1, 1, 11, 0, 0, 0, time.UTC)}},
			}
			for _, c := range cases {
				b.Run(c.name, func(b *testing.B) {
					b.ReportAllocs()
					for b.Loop() {
						page, _, err := s.List(ctx, c.f)
						if err != nil || len(page) != study.DefaultLimit {
							b.Fatalf("%d summaries, %v", len(page), err)
						}
					}
				})
			}
		})
	}
}
