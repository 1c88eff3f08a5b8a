package store

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"net/url"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"time"

	sqlite3 "github.com/mattn/go-sqlite3"
)

// Reasons Open and the writes refuse or stop. They are wrapped with the
// details (file, step, SQLite's own message), so test with errors.Is.
var (
	// ErrSchemaNewer: the database was written by a newer nullseek.
	ErrSchemaNewer = errors.New("database schema is newer than this nullseek")
	// ErrNotStore: the file is an SQLite database of another program.
	ErrNotStore = errors.New("not a nullseek database")
	// ErrNeedsMigration: a read-only open met an older schema.
	ErrNeedsMigration = errors.New("database schema needs an upgrade")
	// ErrReadOnly: the database cannot be written (opened read-only, a
	// write-protected file or file system).
	ErrReadOnly = errors.New("database is read-only")
	// ErrDiskFull: SQLite could not grow the database or its WAL (disk
	// full, a file size limit, or Options.MaxBytes reached).
	ErrDiskFull = errors.New("database or disk is full")
	// ErrWriterStopped: the Writer stopped after an earlier error or Close.
	ErrWriterStopped = errors.New("database writer has stopped")
	// ErrBadRow: a row failed its validation before reaching SQL.
	ErrBadRow = errors.New("bad row")
)

// DefaultBusyTimeout is how long a statement waits for another
// connection's write lock before failing with "database is locked": long
// enough for a batch commit of the Writer (tens of milliseconds) many
// times over, short enough that a stuck process is reported.
const DefaultBusyTimeout = 5 * time.Second

// Options tune Open; the zero value gives the defaults.
type Options struct {
	// ReadOnly opens the database with SQLite's read-only mode (URI
	// parameter mode=ro): every write fails with ErrReadOnly, nothing is
	// migrated (an older schema gives ErrNeedsMigration) and the file
	// must exist.
	ReadOnly bool
	// BusyTimeout is SQLite's busy timeout; 0 means DefaultBusyTimeout.
	// Range 0…10 min.
	BusyTimeout time.Duration
	// Synchronous is "NORMAL" (default) or "FULL". See Open.
	Synchronous string
	// MaxBytes, when > 0, caps the database file (PRAGMA max_page_count
	// on every connection): a write beyond it fails with ErrDiskFull. For a
	// station on a small card that must leave room for the system. Range
	// 0 or ≥ 64 KiB.
	MaxBytes int64
}

// Validate checks every field against its documented range.
func (o Options) Validate() error {
	switch {
	case o.BusyTimeout < 0 || o.BusyTimeout > 10*time.Minute:
		return fmt.Errorf("store: busy timeout %v is outside 0…10 min", o.BusyTimeout)
	case o.MaxBytes < 0 || (o.MaxBytes > 0 && o.MaxBytes < 64<<10):
		return fmt.Errorf("store: size limit %d bytes must be 0 (none) or at least 64 KiB", o.MaxBytes)
	}
	switch strings.ToUpper(o.Synchronous) {
	case "", "NORMAL", "FULL":
	default:
		return fmt.Errorf("store: synchronous %q: want NORMAL or FULL", o.Synchronous)
	}
	return nil
}

// DB is an open store. It is safe for concurrent use; batched writes go
// through a Writer (NewWriter), the few low-volume rows through the Put
// methods.
type DB struct {
	sql  *sql.DB
	path string
	opts Options
}

// Open opens (creating it when absent, unless read-only) the database at
// path and brings its schema up to date.
//
// Every connection gets journal_mode=WAL (readers never block the writer
// and a crash leaves the file consistent), foreign_keys=ON, the busy
// timeout, and synchronous=NORMAL unless FULL is asked for. Why NORMAL:
// in WAL mode SQLite then syncs only at checkpoints, not at every commit;
// the database stays consistent through a process crash or a power cut
// either way (SQLite "Write-Ahead Logging" and PRAGMA synchronous
// documentation), and a killed process loses nothing it committed because
// the commit is in the operating system's cache. What NORMAL gives up is
// durability of the last commits against a power cut or kernel crash
// (back to the last checkpoint); FULL keeps them at the price of one
// fsync per commit — with the Writer's one commit a second that is cheap
// on a disk, slow on some SD cards.
//
// Open refuses a database of another program (ErrNotStore) and one written
// by a newer nullseek (ErrSchemaNewer); pending migration steps are applied
// in order, each in one transaction with its user_version, so a failed step
// leaves the database at the previous version.
func Open(path string, opts Options) (*DB, error) {
	if err := opts.Validate(); err != nil {
		return nil, err
	}
	return open(path, opts, migrations)
}

func open(path string, opts Options, steps []migration) (*DB, error) {
	if path == "" {
		return nil, errors.New("store: no database path given")
	}
	if opts.BusyTimeout == 0 {
		opts.BusyTimeout = DefaultBusyTimeout
	}
	if opts.Synchronous == "" {
		opts.Synchronous = "NORMAL"
	}
	opts.Synchronous = strings.ToUpper(opts.Synchronous)
	if opts.ReadOnly {
		// SQLite would create an empty file for mode=ro on some paths;
		// a read-only open of nothing is a mistake worth saying.
		if _, err := os.Stat(path); err != nil {
			if errors.Is(err, fs.ErrNotExist) {
				return nil, fmt.Errorf("store: %s: no such database (nothing to read)", path)
			}
			return nil, fmt.Errorf("store: %s: %w", path, err)
		}
	}
	abs, err := filepath.Abs(path)
	if err != nil {
		return nil, fmt.Errorf("store: %s: %w", path, err)
	}
	db := &DB{path: path, opts: opts}
	db.sql = sql.OpenDB(&connector{dsn: dsn(abs, opts), opts: opts})
	if err := db.sql.Ping(); err != nil {
		db.sql.Close()
		return nil, db.wrap("open", err)
	}
	if err := db.migrate(steps); err != nil {
		db.sql.Close()
		return nil, err
	}
	if !opts.ReadOnly {
		// SQLite opens a file it may not write (a write-protected file or
		// file system) read-only without a word, and in WAL mode even BEGIN
		// IMMEDIATE succeeds there; find out now rather than at the first
		// commit, with a write that is rolled back (the header's
		// user_version, rewritten with its own value).
		tx, err := db.sql.Begin()
		if err == nil {
			_, err = tx.Exec(fmt.Sprintf("PRAGMA user_version = %d", steps[len(steps)-1].version))
			if rerr := tx.Rollback(); err == nil {
				err = rerr
			}
		}
		if err != nil {
			db.sql.Close()
			return nil, db.wrap("check that it can be written", err)
		}
	}
	return db, nil
}

// dsn builds mattn/go-sqlite3's connection string (v1.14 README,
// "Connection String"): a file: URI so that SQLite's own mode=ro applies.
func dsn(abs string, o Options) string {
	q := url.Values{}
	q.Set("_journal_mode", "WAL")
	q.Set("_synchronous", o.Synchronous)
	q.Set("_busy_timeout", fmt.Sprint(o.BusyTimeout.Milliseconds()))
	q.Set("_foreign_keys", "on")
	// BEGIN IMMEDIATE: a writer takes the write lock when its transaction
	// starts, so two writers wait (busy timeout) instead of deadlocking
	// on a read-to-write upgrade.
	q.Set("_txlock", "immediate")
	if o.ReadOnly {
		q.Set("mode", "ro")
	}
	u := url.URL{Scheme: "file", Path: abs, RawQuery: q.Encode()}
	return u.String()
}

// connector opens connections with a per-database hook (the size cap).
type connector struct {
	dsn  string
	opts Options
}

func (c *connector) Connect(ctx context.Context) (driver.Conn, error) {
	d := &sqlite3.SQLiteDriver{ConnectHook: func(conn *sqlite3.SQLiteConn) error {
		if c.opts.MaxBytes <= 0 {
			return nil
		}
		// max_page_count counts pages of the current page size.
		rows, err := conn.Query("PRAGMA page_size", nil)
		if err != nil {
			return err
		}
		v := make([]driver.Value, 1)
		err = rows.Next(v)
		rows.Close()
		if err != nil {
			return err
		}
		ps, _ := v[0].(int64)
		if ps <= 0 {
			ps = 4096
		}
		_, err = conn.Exec(fmt.Sprintf("PRAGMA max_page_count = %d", max(1, c.opts.MaxBytes/ps)), nil)
		return err
	}}
	return d.Open(c.dsn)
}

func (c *connector) Driver() driver.Driver { return &sqlite3.SQLiteDriver{} }

// Path returns the path the database was opened with.
func (db *DB) Path() string { return db.path }

// Close closes the database. Close every Writer first.
func (db *DB) Close() error {
	if err := db.sql.Close(); err != nil {
		return db.wrap("close", err)
	}
	return nil
}

// migrate checks the header and applies the pending steps.
func (db *DB) migrate(steps []migration) error {
	ctx := context.Background()
	var ver, app int64
	if err := db.sql.QueryRowContext(ctx, "PRAGMA user_version").Scan(&ver); err != nil {
		return db.wrap("read schema version", err)
	}
	if err := db.sql.QueryRowContext(ctx, "PRAGMA application_id").Scan(&app); err != nil {
		return db.wrap("read application id", err)
	}
	var tables int
	if err := db.sql.QueryRowContext(ctx, "SELECT count(*) FROM sqlite_schema WHERE type = 'table'").Scan(&tables); err != nil {
		return db.wrap("read schema", err)
	}
	latest := steps[len(steps)-1].version
	switch {
	case app != 0 && app != ApplicationID:
		return fmt.Errorf("store: %s: %w (application id %#x; nullseek's is %#x)", db.path, ErrNotStore, app, ApplicationID)
	case app == 0 && (ver != 0 || tables != 0):
		return fmt.Errorf("store: %s: %w (an SQLite database with %d tables and no nullseek application id)", db.path, ErrNotStore, tables)
	case ver > int64(latest):
		return fmt.Errorf("store: %s: %w: it has schema version %d, this nullseek knows up to %d; use a newer nullseek to read it", db.path, ErrSchemaNewer, ver, latest)
	case ver == int64(latest):
		return nil
	case db.opts.ReadOnly:
		return fmt.Errorf("store: %s: %w: it has schema version %d, this nullseek writes %d; open it once for writing to upgrade it", db.path, ErrNeedsMigration, ver, latest)
	}
	for _, m := range steps {
		if int64(m.version) <= ver {
			continue
		}
		if err := db.apply(ctx, m); err != nil {
			return err
		}
	}
	return nil
}

// apply runs one migration step and records it, in one transaction.
func (db *DB) apply(ctx context.Context, m migration) error {
	tx, err := db.sql.BeginTx(ctx, nil)
	if err != nil {
		return db.wrap(fmt.Sprintf("start schema step %d (%s)", m.version, m.name), err)
	}
	defer tx.Rollback()
	if _, err := tx.ExecContext(ctx, m.sql); err != nil {
		return db.wrap(fmt.Sprintf("schema step %d (%s)", m.version, m.name), err)
	}
	// Both pragmas write the database header inside the transaction, so
	// they commit or roll back with the step (SQLite file format §1.3).
	if _, err := tx.ExecContext(ctx, fmt.Sprintf("PRAGMA application_id = %d; PRAGMA user_version = %d", ApplicationID, m.version)); err != nil {
		return db.wrap(fmt.Sprintf("record schema step %d", m.version), err)
	}
	if err := tx.Commit(); err != nil {
		return db.wrap(fmt.Sprintf("commit schema step %d (%s)", m.version, m.name), err)
	}
	return nil
}

// Version returns the database's schema version (PRAGMA user_version).
func (db *DB) Version() (int, error) {
	var v int
	if err := db.sql.QueryRow("PRAGMA user_version").Scan(&v); err != nil {
		return 0, db.wrap("read schema version", err)
	}
	return v, nil
}

// IntegrityCheck runs SQLite's PRAGMA integrity_check and returns its
// report: "ok" for a sound database, else the problems it lists.
func (db *DB) IntegrityCheck() (string, error) {
	rows, err := db.sql.Query("PRAGMA integrity_check")
	if err != nil {
		return "", db.wrap("integrity check", err)
	}
	defer rows.Close()
	var lines []string
	for rows.Next() {
		var s string
		if err := rows.Scan(&s); err != nil {
			return "", db.wrap("integrity check", err)
		}
		lines = append(lines, s)
	}
	if err := rows.Err(); err != nil {
		return "", db.wrap("integrity check", err)
	}
	return strings.Join(lines, "\n"), nil
}

// wrap turns a driver error into one line naming the database and what was
// being done, with ErrReadOnly or ErrDiskFull attached where SQLite says so.
func (db *DB) wrap(what string, err error) error {
	if err == nil {
		return nil
	}
	var se sqlite3.Error
	if errors.As(err, &se) {
		switch se.Code {
		case sqlite3.ErrReadonly:
			return fmt.Errorf("store: %s: %s: %w (SQLite: %v); make the file and its directory writable, or use another database", db.path, what, ErrReadOnly, err)
		case sqlite3.ErrFull:
			return fmt.Errorf("store: %s: %s: %w (SQLite: %v); free space on the disk or raise the size limit", db.path, what, ErrDiskFull, err)
		case sqlite3.ErrIoErr:
			// A failed write() of the database or its WAL: say which of the
			// two faults a station meets it is, by the system's errno.
			switch se.SystemErrno {
			case syscall.ENOSPC, syscall.EFBIG, syscall.EDQUOT:
				return fmt.Errorf("store: %s: %s: %w (SQLite: %v); free space on the disk or raise the file size limit", db.path, what, ErrDiskFull, err)
			case syscall.EROFS, syscall.EPERM, syscall.EACCES:
				return fmt.Errorf("store: %s: %s: %w (SQLite: %v); make the file and its directory writable", db.path, what, ErrReadOnly, err)
			}
			if se.SystemErrno != 0 {
				return fmt.Errorf("store: %s: %s: the disk failed a write (SQLite: %v); check the disk", db.path, what, err)
			}
		case sqlite3.ErrCantOpen:
			return fmt.Errorf("store: %s: %s: cannot open the database file (SQLite: %v); check that its directory exists and is writable", db.path, what, err)
		case sqlite3.ErrNotADB:
			return fmt.Errorf("store: %s: %s: %w (SQLite: %v)", db.path, what, ErrNotStore, err)
		}
	}
	return fmt.Errorf("store: %s: %s: %w", db.path, what, err)
}

// finite reports whether every value is a finite number.
func finite(v ...float64) bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}
