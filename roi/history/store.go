package history

import (
	"context"
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"sort"
	"strings"
	"time"

	_ "modernc.org/sqlite" // registers the "sqlite" driver

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/regular"
	phantom "github.com/tauvox/tauvox/roi/qa" // the qa.json types, written by roi/phantom
)

// SchemaVersion is the schema version this package writes.
const SchemaVersion = 2

// DefaultBusyTimeout is how long a writer waits for another to finish.
const DefaultBusyTimeout = 10 * time.Second

// migrations[i] brings the schema from version i to i+1.
var migrations = []string{
	// 1: sessions and per-vial results.
	`CREATE TABLE sessions (
		id INTEGER PRIMARY KEY,
		scanner TEXT NOT NULL,
		acquired TEXT NOT NULL,          -- YYYY-MM-DD[ HH:MM]
		phantom TEXT NOT NULL,
		hash TEXT NOT NULL UNIQUE,       -- SHA-256 of the qa.json content
		field_t REAL NOT NULL,
		temperature_c REAL NOT NULL,
		tool_version TEXT NOT NULL,
		added TEXT NOT NULL,
		UNIQUE (scanner, acquired, phantom)
	);
	CREATE TABLE results (
		session_id INTEGER NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,
		vial TEXT NOT NULL,
		quantity TEXT NOT NULL,
		n INTEGER NOT NULL,
		mean REAL, median REAL, sd REAL,
		reference REAL, deviation_pct REAL,
		verdict TEXT NOT NULL,
		PRIMARY KEY (session_id, vial, quantity)
	);`,
	// 2: tolerance and reference uncertainty per result, the series
	// (sequence parameters, localisation) per session, and an index for the
	// per-vial queries.
	`ALTER TABLE results ADD COLUMN tolerance REAL;
	ALTER TABLE results ADD COLUMN reference_uncertainty_pct REAL;
	ALTER TABLE sessions ADD COLUMN series_json TEXT NOT NULL DEFAULT '[]';
	CREATE INDEX results_by_vial ON results (vial, quantity);`,
}

// Store is an open history database. It is safe for use by one goroutine
// at a time per Store; several processes may use the same file.
type Store struct {
	db   *sql.DB
	path string
}

// Options for Open; the zero value is right.
type Options struct {
	// BusyTimeout is how long to wait for another process's lock; default
	// DefaultBusyTimeout.
	BusyTimeout time.Duration
	// ReadOnly opens without creating or migrating.
	ReadOnly bool
	// maxVersion, for tests, stops migration at that version.
	maxVersion int
}

// ErrLocked reports a database another process kept locked beyond the
// busy timeout.
var ErrLocked = errors.New("database is locked by another process")

// Open opens (creating when needed) the history database at path and
// migrates its schema to SchemaVersion.
func Open(path string, opt *Options) (*Store, error) {
	if opt == nil {
		opt = &Options{}
	}
	bt := opt.BusyTimeout
	if bt == 0 {
		bt = DefaultBusyTimeout
	}
	if opt.ReadOnly {
		if _, err := os.Stat(path); err != nil {
			return nil, err
		}
	}
	if st, err := os.Stat(path); err == nil && st.IsDir() {
		return nil, fmt.Errorf("%s: is a folder, not a database file", path)
	}
	// SQLite would block for ever opening a FIFO with no writer.
	if err := regular.Check(path); err != nil {
		return nil, err
	}
	dsn := fmt.Sprintf("file:%s?_pragma=busy_timeout(%d)&_pragma=foreign_keys(1)&_txlock=immediate", path, bt.Milliseconds())
	if opt.ReadOnly {
		if writable(path) {
			// Opened for reading and writing but allowed no change, so that
			// the last connection folds the write-ahead log back into the
			// file and removes the -wal and -shm files when it closes (a
			// mode=ro connection cannot, and leaves them beside the
			// database).
			dsn += "&_pragma=query_only(1)"
		} else {
			// A read-only medium (or file): nothing can change the file, and
			// nothing beside it can be created; SQLite reads it as immutable.
			dsn += "&mode=ro&immutable=1"
		}
	}
	db, err := sql.Open("sqlite", dsn)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	db.SetMaxOpenConns(1)
	s := &Store{db: db, path: path}
	if err := s.init(opt); err != nil {
		db.Close()
		return nil, err
	}
	return s, nil
}

// Close closes the database.
func (s *Store) Close() error { return s.db.Close() }

// wrap turns driver errors into one line naming the file.
func (s *Store) wrap(err error) error {
	if err == nil {
		return nil
	}
	msg := err.Error()
	switch {
	case strings.Contains(msg, "SQLITE_BUSY") || strings.Contains(msg, "database is locked"):
		return fmt.Errorf("%s: %w (waited for the busy timeout; try again when the other tauvox finishes)", s.path, ErrLocked)
	case strings.Contains(msg, "file is not a database") || strings.Contains(msg, "SQLITE_NOTADB") || strings.Contains(msg, "malformed"):
		return fmt.Errorf("%s: not a tauvox history database or damaged (%s)", s.path, oneLine(msg))
	}
	return fmt.Errorf("%s: %s", s.path, oneLine(msg))
}

func oneLine(s string) string { return output.Message(s) }

func (s *Store) init(opt *Options) error {
	ctx := context.Background()
	// Check that the file is ours before changing anything in it: setting
	// WAL first rewrote another program's SQLite file before refusing it.
	var v int
	if err := s.db.QueryRowContext(ctx, "PRAGMA user_version").Scan(&v); err != nil {
		return s.wrap(err)
	}
	if v == 0 {
		// A file with tables but no version is not ours.
		var n int
		if err := s.db.QueryRowContext(ctx, "SELECT count(*) FROM sqlite_master").Scan(&n); err != nil {
			return s.wrap(err)
		}
		if n > 0 {
			return fmt.Errorf("%s: an SQLite database that is not a tauvox history", s.path)
		}
	}
	if v < 0 {
		return fmt.Errorf("%s: schema version %d is not one tauvox writes; not a tauvox history database", s.path, v)
	}
	if v > SchemaVersion {
		return fmt.Errorf("%s: schema version %d is newer than this tauvox (%d); upgrade tauvox", s.path, v, SchemaVersion)
	}
	if !opt.ReadOnly {
		// WAL lets readers work beside a writer; set once, persistent.
		var mode string
		if err := s.db.QueryRowContext(ctx, "PRAGMA journal_mode=WAL").Scan(&mode); err != nil {
			return s.wrap(err)
		}
	}
	target := SchemaVersion
	if opt.maxVersion > 0 {
		target = opt.maxVersion
	}
	if opt.ReadOnly {
		if v < SchemaVersion {
			return fmt.Errorf("%s: schema version %d needs migrating; open it once for writing", s.path, v)
		}
		return nil
	}
	for ; v < target; v++ {
		tx, err := s.db.BeginTx(ctx, nil)
		if err != nil {
			return s.wrap(err)
		}
		// Re-read inside the lock: another process may have migrated.
		var cur int
		if err := tx.QueryRowContext(ctx, "PRAGMA user_version").Scan(&cur); err != nil {
			tx.Rollback()
			return s.wrap(err)
		}
		if cur > v {
			tx.Rollback()
			v = cur - 1
			continue
		}
		if _, err := tx.ExecContext(ctx, migrations[v]); err != nil {
			tx.Rollback()
			return s.wrap(fmt.Errorf("migration to version %d: %w", v+1, err))
		}
		if _, err := tx.ExecContext(ctx, fmt.Sprintf("PRAGMA user_version = %d", v+1)); err != nil {
			tx.Rollback()
			return s.wrap(err)
		}
		if err := tx.Commit(); err != nil {
			return s.wrap(err)
		}
	}
	return nil
}

// AddResult says what Add did.
type AddResult struct {
	ID      int64
	Already bool // the same content was recorded before: nothing changed
}

// testPause, when set (tests only), is called inside the add transaction
// after the rows are written and before the commit.
var testPause func()

// Hash returns the content hash of a qa.json.
func Hash(b []byte) string {
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}

// ParseQA decodes and checks a qa.json; name is used in errors.
func ParseQA(b []byte, name string) (*phantom.QA, error) {
	var probe struct {
		Format string `json:"format"`
	}
	if err := json.Unmarshal(b, &probe); err != nil {
		return nil, fmt.Errorf("%s: not a qa.json: %v", name, err)
	}
	if probe.Format != phantom.QAFormat {
		return nil, fmt.Errorf("%s: format %q, this tauvox reads %q", name, probe.Format, phantom.QAFormat)
	}
	var qa phantom.QA
	if err := json.Unmarshal(b, &qa); err != nil {
		return nil, fmt.Errorf("%s: %v", name, err)
	}
	if err := phantom.Validate(&qa); err != nil {
		return nil, fmt.Errorf("%s: %v", name, err)
	}
	if qa.Verdict == phantom.Undetermined {
		return nil, fmt.Errorf("%s: the vials of this session could not be told apart (verdict undetermined), so its values belong to no vial; give the phantom's rotation and face to tauvox phantom and record the new qa.json", name)
	}
	return &qa, nil
}

// Acquired returns the session's "YYYY-MM-DD[ HH:MM]" key.
func Acquired(s phantom.Session) string {
	return strings.TrimSpace(s.Date + " " + s.Time)
}

func nullable(v float64) any {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return v
}

// Add records one session from the bytes of its qa.json (name for errors).
// Adding the same content again changes nothing and reports Already; a
// different content for the same scanner, time and phantom is an error.
func (s *Store) Add(ctx context.Context, b []byte, name string) (AddResult, error) {
	qa, err := ParseQA(b, name)
	if err != nil {
		return AddResult{}, err
	}
	hash := Hash(b)
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return AddResult{}, s.wrap(err)
	}
	defer tx.Rollback()
	var id int64
	var oldHash string
	err = tx.QueryRowContext(ctx, "SELECT id, hash FROM sessions WHERE hash = ? OR (scanner = ? AND acquired = ? AND phantom = ?)",
		hash, qa.Session.Scanner, Acquired(qa.Session), qa.Session.Phantom).Scan(&id, &oldHash)
	switch {
	case err == nil && oldHash == hash:
		return AddResult{ID: id, Already: true}, nil
	case err == nil:
		return AddResult{}, fmt.Errorf("%s: %s already holds a different session for %s %s (%s); remove it first (history remove --id %d --yes)",
			name, s.path, qa.Session.Scanner, Acquired(qa.Session), qa.Session.Phantom, id)
	case !errors.Is(err, sql.ErrNoRows):
		return AddResult{}, s.wrap(err)
	}
	series, _ := json.Marshal(qa.Series)
	res, err := tx.ExecContext(ctx, `INSERT INTO sessions (scanner, acquired, phantom, hash, field_t, temperature_c, tool_version, added, series_json)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)`,
		qa.Session.Scanner, Acquired(qa.Session), qa.Session.Phantom, hash, qa.Session.Field, qa.Session.Temperature,
		qa.Tool.Version, time.Now().UTC().Format(time.RFC3339), string(series))
	if err != nil {
		return AddResult{}, s.wrap(err)
	}
	if id, err = res.LastInsertId(); err != nil {
		return AddResult{}, s.wrap(err)
	}
	for _, v := range qa.Vials {
		ref, dev := nullable(v.Reference), nullable(v.Deviation)
		if v.Reference <= 0 {
			ref, dev = nil, nil
		}
		if v.Verdict == phantom.NotMeasured {
			dev = nil
		}
		if _, err := tx.ExecContext(ctx, `INSERT INTO results (session_id, vial, quantity, n, mean, median, sd, reference, deviation_pct, verdict, tolerance, reference_uncertainty_pct)
			VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
			id, v.ID, v.Quantity, v.N, nullable(v.Mean), nullable(v.Median), nullable(v.SD), ref, dev, v.Verdict,
			nullable(v.Tolerance), nullable(v.RefUncPct)); err != nil {
			return AddResult{}, s.wrap(fmt.Errorf("vial %s %s: %w", v.ID, v.Quantity, err))
		}
	}
	if testPause != nil {
		testPause()
	}
	if err := tx.Commit(); err != nil {
		return AddResult{}, s.wrap(err)
	}
	return AddResult{ID: id}, nil
}

// SessionInfo is one recorded session.
type SessionInfo struct {
	ID          int64
	Scanner     string
	Acquired    string
	Phantom     string
	Field       float64
	Temperature float64
	Tool        string
	Vials       int
	Failed      int
}

// Sessions lists the recorded sessions (of one scanner when not empty),
// oldest first.
func (s *Store) Sessions(ctx context.Context, scanner string) ([]SessionInfo, error) {
	rows, err := s.db.QueryContext(ctx, `SELECT s.id, s.scanner, s.acquired, s.phantom, s.field_t, s.temperature_c, s.tool_version,
		count(r.vial), sum(CASE WHEN r.verdict = 'fail' THEN 1 ELSE 0 END)
		FROM sessions s LEFT JOIN results r ON r.session_id = s.id
		WHERE ? = '' OR s.scanner = ? GROUP BY s.id ORDER BY s.scanner, s.acquired, s.id`, scanner, scanner)
	if err != nil {
		return nil, s.wrap(err)
	}
	defer rows.Close()
	var out []SessionInfo
	for rows.Next() {
		var si SessionInfo
		var failed sql.NullInt64
		if err := rows.Scan(&si.ID, &si.Scanner, &si.Acquired, &si.Phantom, &si.Field, &si.Temperature, &si.Tool, &si.Vials, &failed); err != nil {
			return nil, s.wrap(err)
		}
		si.Failed = int(failed.Int64)
		out = append(out, si)
	}
	return out, s.wrap(rows.Err())
}

// Remove deletes one session and its results. It reports false when no
// session has that id.
func (s *Store) Remove(ctx context.Context, id int64) (bool, error) {
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return false, s.wrap(err)
	}
	defer tx.Rollback()
	res, err := tx.ExecContext(ctx, "DELETE FROM sessions WHERE id = ?", id)
	if err != nil {
		return false, s.wrap(err)
	}
	n, _ := res.RowsAffected()
	return n == 1, s.wrap(tx.Commit())
}

// Point is one session's result of one vial and quantity.
type Point struct {
	SessionID   int64
	Scanner     string
	Acquired    string
	Time        time.Time
	Vial        string
	Quantity    string
	N           int
	Mean        float64
	Median      float64
	SD          float64
	Reference   float64 // NaN when none
	Deviation   float64 // percent; NaN when no reference
	Tolerance   float64
	RefUncPct   float64 // reference uncertainty, percent; NaN when not recorded
	Verdict     string
	Field       float64
	Temperature float64
}

// Points returns every result (of one scanner when not empty), ordered by
// scanner, vial, quantity and time.
func (s *Store) Points(ctx context.Context, scanner string) ([]Point, error) {
	rows, err := s.db.QueryContext(ctx, `SELECT s.id, s.scanner, s.acquired, r.vial, r.quantity, r.n, r.mean, r.median, r.sd,
		r.reference, r.deviation_pct, r.tolerance, r.reference_uncertainty_pct, r.verdict, s.field_t, s.temperature_c
		FROM results r JOIN sessions s ON s.id = r.session_id
		WHERE ? = '' OR s.scanner = ?
		ORDER BY s.scanner, r.vial, r.quantity, s.acquired, s.id`, scanner, scanner)
	if err != nil {
		return nil, s.wrap(err)
	}
	defer rows.Close()
	var out []Point
	for rows.Next() {
		var p Point
		var mean, median, sd, ref, dev, tol, unc sql.NullFloat64
		if err := rows.Scan(&p.SessionID, &p.Scanner, &p.Acquired, &p.Vial, &p.Quantity, &p.N, &mean, &median, &sd,
			&ref, &dev, &tol, &unc, &p.Verdict, &p.Field, &p.Temperature); err != nil {
			return nil, s.wrap(err)
		}
		f := func(n sql.NullFloat64) float64 {
			if n.Valid {
				return n.Float64
			}
			return math.NaN()
		}
		p.Mean, p.Median, p.SD, p.Reference, p.Deviation, p.Tolerance, p.RefUncPct = f(mean), f(median), f(sd), f(ref), f(dev), f(tol), f(unc)
		p.Time = parseAcquired(p.Acquired)
		out = append(out, p)
	}
	return out, s.wrap(rows.Err())
}

func parseAcquired(s string) time.Time {
	for _, l := range []string{"2006-01-02 15:04", "2006-01-02"} {
		if t, err := time.Parse(l, s); err == nil {
			return t
		}
	}
	return time.Time{}
}

// Integrity runs PRAGMA integrity_check and returns its verdict ("ok" when
// sound).
func (s *Store) Integrity(ctx context.Context) (string, error) {
	var r string
	err := s.db.QueryRowContext(ctx, "PRAGMA integrity_check").Scan(&r)
	return r, s.wrap(err)
}

// Version returns the schema version of the open database.
func (s *Store) Version(ctx context.Context) (int, error) {
	var v int
	err := s.db.QueryRowContext(ctx, "PRAGMA user_version").Scan(&v)
	return v, s.wrap(err)
}

// PointsOf returns the results of a session as Points recorded by Add
// would read back (no reference: NaN reference and deviation; a vial not
// measured: NaN deviation), without a session id.
func PointsOf(qa *phantom.QA) []Point {
	s := qa.Session
	acq := Acquired(s)
	var out []Point
	for _, v := range qa.Vials {
		p := Point{Scanner: s.Scanner, Acquired: acq, Time: parseAcquired(acq), Vial: v.ID, Quantity: v.Quantity, N: v.N,
			Mean: v.Mean, Median: v.Median, SD: v.SD, Reference: v.Reference, Deviation: v.Deviation, Tolerance: v.Tolerance,
			RefUncPct: v.RefUncPct, Verdict: v.Verdict, Field: s.Field, Temperature: s.Temperature}
		if !(v.Reference > 0) {
			p.Reference, p.Deviation = math.NaN(), math.NaN()
		}
		if v.Verdict == phantom.NotMeasured {
			p.Deviation = math.NaN()
		}
		if !(v.Tolerance > 0) {
			p.Tolerance = math.NaN()
		}
		if !(v.RefUncPct > 0) {
			p.RefUncPct = math.NaN()
		}
		out = append(out, p)
	}
	return out
}

// WithSession returns the recorded points of qa's scanner with the
// session of qa added (replacing a recorded session at the same time),
// ordered as Points orders them: the history a report of that session is
// judged against.
func WithSession(recorded []Point, qa *phantom.QA) []Point {
	acq := Acquired(qa.Session)
	var out []Point
	for _, p := range recorded {
		if p.Scanner == qa.Session.Scanner && p.Acquired != acq {
			out = append(out, p)
		}
	}
	out = append(out, PointsOf(qa)...)
	sort.SliceStable(out, func(i, j int) bool {
		a, b := out[i], out[j]
		if a.Vial != b.Vial {
			return a.Vial < b.Vial
		}
		if a.Quantity != b.Quantity {
			return a.Quantity < b.Quantity
		}
		return a.Acquired < b.Acquired
	})
	return out
}
