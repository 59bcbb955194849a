package store

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"io/fs"
	"net/url"
	"os"
	"path/filepath"
	"strconv"
	"time"

	"modernc.org/sqlite"
	sqlite3 "modernc.org/sqlite/lib"
)

// DatabaseFile is the SQLite database's name inside the data directory.
const DatabaseFile = "eivfit.db"

// sqliteEngine writes through one connection (writers queue in Go, not in
// SQLite's busy loop) and reads through a pool; WAL lets reads run beside
// the write.
type sqliteEngine struct {
	sqlQuerier
	w *sql.DB
}

func openSQLite(ctx context.Context, cfg Config) (*sqliteEngine, error) {
	if err := os.MkdirAll(cfg.DataDir, 0o750); err != nil {
		return nil, fmt.Errorf("%w: data directory: %v", errUnavailable, err)
	}
	// synchronous=FULL in WAL mode syncs the log at every commit: a commit
	// that returned survives a crash or power loss.
	abs, err := filepath.Abs(filepath.Join(cfg.DataDir, DatabaseFile))
	if err != nil {
		return nil, err
	}
	if err := createWAL(ctx, abs); err != nil {
		return nil, fmt.Errorf("%w: create %s: %v", errUnavailable, abs, err)
	}
	busy := strconv.FormatInt(cfg.BusyTimeout.Milliseconds(), 10)
	u := url.URL{Scheme: "file", OmitHost: true, Path: abs}
	common := "_pragma=busy_timeout(" + busy + ")&_pragma=foreign_keys(1)"
	w, err := sql.Open("sqlite", u.String()+"?"+common+"&_pragma=journal_mode(WAL)&_pragma=synchronous(FULL)&_txlock=immediate")
	if err != nil {
		return nil, err
	}
	w.SetMaxOpenConns(1)
	w.SetConnMaxIdleTime(0)
	if err := w.PingContext(ctx); err != nil {
		w.Close()
		return nil, fmt.Errorf("%w: open %s: %v", errUnavailable, u.Path, err)
	}
	r, err := sql.Open("sqlite", u.String()+"?"+common+"&_pragma=query_only(1)")
	if err != nil {
		w.Close()
		return nil, err
	}
	r.SetMaxOpenConns(4)
	return &sqliteEngine{sqlQuerier: sqlQuerier{q: r}, w: w}, nil
}

// createWAL makes sure the database file exists already in WAL mode.
//
// Turning a new database to WAL is a write that a connection starts
// while it holds a read lock (it reads page 1, sees the rollback-journal
// format and then asks for the write lock), and SQLite answers such an
// upgrade with SQLITE_BUSY at once instead of waiting on its busy handler,
// which could deadlock: processes or stores opening a new data directory
// together failed with "database is locked". So the conversion is done
// in a private file that no other connection can see, and the file is
// then hard-linked into place, which fails if another opener was first;
// every connection to the real file finds it in WAL mode already, and
// journal_mode=WAL on it only reads. Every later write takes the write
// lock up front (BEGIN IMMEDIATE), where SQLite does wait.
func createWAL(ctx context.Context, path string) error {
	if _, err := os.Lstat(path); err == nil || !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, ".eivfit-new-*.db")
	if err != nil {
		return err
	}
	tmp := f.Name()
	f.Close()
	defer os.Remove(tmp)
	u := url.URL{Scheme: "file", OmitHost: true, Path: tmp}
	db, err := sql.Open("sqlite", u.String()+"?_pragma=journal_mode(WAL)&_pragma=synchronous(FULL)")
	if err != nil {
		return err
	}
	var mode string
	err = db.QueryRowContext(ctx, "PRAGMA journal_mode").Scan(&mode)
	// Closing the last connection checkpoints and removes the -wal and
	// -shm files; the WAL format stays in the file's header.
	if cerr := db.Close(); err == nil {
		err = cerr
	}
	if err == nil && mode != "wal" {
		err = fmt.Errorf("journal mode %q after asking for WAL", mode)
	}
	if err != nil {
		return err
	}
	if err := os.Link(tmp, path); err != nil && !errors.Is(err, fs.ErrExist) {
		return err
	}
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	return d.Sync() // the new name is durable before anything is stored under it
}

func (e *sqliteEngine) write(ctx context.Context, fn func(q querier) error) error {
	tx, err := e.w.BeginTx(ctx, nil)
	if err != nil {
		return err
	}
	if err := fn(sqlQuerier{q: tx}); err != nil {
		tx.Rollback()
		return err
	}
	return tx.Commit()
}

func (e *sqliteEngine) ping(ctx context.Context) error {
	var one int
	return e.queryRow(ctx, "SELECT 1", nil, &one)
}

func (e *sqliteEngine) close() error {
	return errors.Join(e.sqlQuerier.q.(*sql.DB).Close(), e.w.Close())
}

func (e *sqliteEngine) name() string            { return "sqlite" }
func (e *sqliteEngine) param(n int) string      { return "?" + strconv.Itoa(n) }
func (e *sqliteEngine) timeArg(t time.Time) any { return t.UnixMicro() }
func (e *sqliteEngine) lockMigrations() string  { return "" } // BEGIN IMMEDIATE holds the write lock

func (e *sqliteEngine) classify(err error) error {
	if errors.Is(err, sql.ErrConnDone) || errors.Is(err, errUnavailable) {
		return errUnavailable
	}
	var se *sqlite.Error
	if !errors.As(err, &se) {
		return nil
	}
	switch se.Code() & 0xff {
	case sqlite3.SQLITE_CONSTRAINT:
		if c := se.Code(); c == sqlite3.SQLITE_CONSTRAINT_PRIMARYKEY || c == sqlite3.SQLITE_CONSTRAINT_UNIQUE {
			return conflict
		}
	case sqlite3.SQLITE_BUSY, sqlite3.SQLITE_LOCKED, sqlite3.SQLITE_IOERR, sqlite3.SQLITE_FULL,
		sqlite3.SQLITE_CANTOPEN, sqlite3.SQLITE_READONLY, sqlite3.SQLITE_PROTOCOL:
		return errUnavailable
	}
	return nil
}

// sqlQuerier adapts database/sql (a pool or a transaction).
type sqlQuerier struct {
	q interface {
		ExecContext(ctx context.Context, q string, args ...any) (sql.Result, error)
		QueryContext(ctx context.Context, q string, args ...any) (*sql.Rows, error)
		QueryRowContext(ctx context.Context, q string, args ...any) *sql.Row
	}
}

func (s sqlQuerier) exec(ctx context.Context, q string, args ...any) error {
	_, err := s.q.ExecContext(ctx, q, args...)
	return err
}

func (s sqlQuerier) queryRow(ctx context.Context, q string, args []any, dest ...any) error {
	return noRows(s.q.QueryRowContext(ctx, q, args...).Scan(dest...), sql.ErrNoRows)
}

func (s sqlQuerier) query(ctx context.Context, q string, args []any, row func(scan func(...any) error) error) error {
	rows, err := s.q.QueryContext(ctx, q, args...)
	if err != nil {
		return err
	}
	defer rows.Close()
	return scanRows(rows, row)
}
