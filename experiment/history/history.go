package history

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"net/url"
	"slices"
	"sort"
	"time"

	_ "modernc.org/sqlite" // the pure-Go SQLite driver, "sqlite"
)

// ErrBadLook is wrapped by every error about a look that cannot be stored:
// no experiment, a zero instant, an unknown key kind or method, a bad day.
var ErrBadLook = errors.New("history: bad look")

// BusyTimeout is how long a run waits for another run's write to finish
// before giving up.
const BusyTimeout = 60 * time.Second

// Store is a history of looks in one SQLite file.
type Store struct {
	db   *sql.DB
	path string
	// midWrite, when set (by tests), runs inside Put's transaction after
	// the look's rows are written and before the commit.
	midWrite func()
}

// Open opens (creating when absent) the history file at path and brings
// its schema to SchemaVersion. Writes take the file's lock when they begin
// (immediate transactions) and a run that finds it taken waits up to
// BusyTimeout.
func Open(ctx context.Context, path string) (*Store, error) {
	return open(ctx, path, SchemaVersion)
}

func open(ctx context.Context, path string, version int) (*Store, error) {
	q := url.Values{}
	q.Add("_pragma", fmt.Sprintf("busy_timeout(%d)", BusyTimeout.Milliseconds()))
	q.Add("_pragma", "foreign_keys(1)")
	q.Add("_pragma", "journal_mode(WAL)")
	q.Add("_pragma", "synchronous(FULL)")
	q.Set("_txlock", "immediate")
	db, err := sql.Open("sqlite", "file:"+(&url.URL{Path: path}).EscapedPath()+"?"+q.Encode())
	if err != nil {
		return nil, fmt.Errorf("history %s: %w", path, err)
	}
	if err := migrate(ctx, db, version); err != nil {
		db.Close()
		return nil, fmt.Errorf("history %s: %w", path, err)
	}
	return &Store{db: db, path: path}, nil
}

// Close closes the file.
func (s *Store) Close() error { return s.db.Close() }

// KeyKind says what a look's instant is.
type KeyKind string

const (
	// Freshness keys a look by its data's freshness: the latest event time
	// in the export.
	Freshness KeyKind = "freshness"
	// AsOf keys a look by an instant given by the user: a past night rerun
	// from a later export.
	AsOf KeyKind = "as-of"
)

// Look is everything one run stores about one experiment: its rows
// replace any earlier look of the same experiment and instant.
type Look struct {
	Experiment string
	At         time.Time // the key, stored in UTC to the nanosecond
	KeyKind    KeyKind
	// WrittenAt is when the run wrote the look (set by Put when zero).
	WrittenAt   time.Time
	Arms        []ArmLook
	Comparisons []ComparisonLook
	Exposures   []DailyExposure
	// Warnings are the codes of the readout's warnings at the look
	// (readout-wide, per metric and per comparison), each once; Put
	// stores them sorted. WarningsRecorded is false for a look written
	// before schema version 3, whose warnings are unknown (Put always
	// records them).
	Warnings         []string
	WarningsRecorded bool
}

// ArmLook is one arm's counts for one metric at the look.
type ArmLook struct {
	Metric, Arm        string
	Units, Conversions int64
}

// ComparisonLook is one treatment-versus-control comparison's sequential
// state at the look. Fields that do not apply to the method are NaN (NULL
// in the file): a group-sequential look has no always-valid p, a mixture
// look no boundary.
type ComparisonLook struct {
	Metric, Arm, Control string
	Method               string // "group-sequential", "mixture" or "fixed"
	Statistic            float64
	InformationFraction  float64
	Boundary             float64 // the critical value; +Inf when nothing is left to spend
	BoundaryNominalP     float64
	AlphaSpent           float64
	Crossed              bool
	AlwaysValidP         float64
	SequenceLower        float64
	SequenceUpper        float64
}

// DailyExposure is one arm's units first exposed on one UTC day.
type DailyExposure struct {
	Arm   string
	Day   string // YYYY-MM-DD
	Units int64
}

// keyLayout is a fixed-width UTC form, so the text sorts as the time does.
const keyLayout = "2006-01-02T15:04:05.000000000Z"

func (l Look) check() error {
	switch {
	case l.Experiment == "":
		return fmt.Errorf("%w: no experiment", ErrBadLook)
	case l.At.IsZero():
		return fmt.Errorf("%w: experiment %q: no instant", ErrBadLook, l.Experiment)
	case l.KeyKind != Freshness && l.KeyKind != AsOf:
		return fmt.Errorf("%w: experiment %q: key kind %q", ErrBadLook, l.Experiment, l.KeyKind)
	}
	for _, c := range l.Comparisons {
		switch c.Method {
		case "group-sequential", "mixture", "fixed":
		default:
			return fmt.Errorf("%w: experiment %q metric %q arm %q: method %q", ErrBadLook, l.Experiment, c.Metric, c.Arm, c.Method)
		}
	}
	for _, e := range l.Exposures {
		if _, err := time.Parse(time.DateOnly, e.Day); err != nil {
			return fmt.Errorf("%w: experiment %q arm %q: day %q", ErrBadLook, l.Experiment, e.Arm, e.Day)
		}
	}
	return nil
}

// Put stores the look in one transaction: the earlier look of the same
// experiment and instant, if any, is deleted and the new rows written, so
// a rerun of the same night replaces it and a run killed mid-write leaves
// the file as it was.
func (s *Store) Put(ctx context.Context, l Look) error {
	if err := l.check(); err != nil {
		return err
	}
	if l.WrittenAt.IsZero() {
		l.WrittenAt = time.Now()
	}
	key := l.At.UTC().Format(keyLayout)
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("history %s: begin: %w", s.path, err)
	}
	defer tx.Rollback()
	if err := writeLook(ctx, tx, l, key); err != nil {
		return fmt.Errorf("history %s: experiment %q look %s: %w", s.path, l.Experiment, key, err)
	}
	if s.midWrite != nil {
		s.midWrite()
	}
	if err := tx.Commit(); err != nil {
		return fmt.Errorf("history %s: commit: %w", s.path, err)
	}
	return nil
}

func writeLook(ctx context.Context, tx *sql.Tx, l Look, key string) error {
	if _, err := tx.ExecContext(ctx, `DELETE FROM looks WHERE experiment = ? AND look_at = ?`, l.Experiment, key); err != nil {
		return err
	}
	if _, err := tx.ExecContext(ctx, `INSERT INTO looks (experiment, look_at, key_kind, written_at, warnings_recorded) VALUES (?, ?, ?, ?, 1)`,
		l.Experiment, key, string(l.KeyKind), l.WrittenAt.UTC().Format(keyLayout)); err != nil {
		return err
	}
	codes := slices.Clone(l.Warnings)
	slices.Sort(codes)
	for _, code := range slices.Compact(codes) {
		if _, err := tx.ExecContext(ctx, `INSERT INTO look_warnings (experiment, look_at, code) VALUES (?, ?, ?)`, l.Experiment, key, code); err != nil {
			return fmt.Errorf("warning %q: %w", code, err)
		}
	}
	for _, a := range l.Arms {
		if _, err := tx.ExecContext(ctx, `INSERT INTO arm_looks (experiment, look_at, metric, arm, units, conversions) VALUES (?, ?, ?, ?, ?, ?)`,
			l.Experiment, key, a.Metric, a.Arm, a.Units, a.Conversions); err != nil {
			return fmt.Errorf("metric %q arm %q: %w", a.Metric, a.Arm, err)
		}
	}
	for _, c := range l.Comparisons {
		if _, err := tx.ExecContext(ctx, `INSERT INTO comparison_looks (experiment, look_at, metric, arm, control, method,
			statistic, information_fraction, boundary, boundary_nominal_p, alpha_spent, crossed, always_valid_p, sequence_lower, sequence_upper)
			VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
			l.Experiment, key, c.Metric, c.Arm, c.Control, c.Method,
			real(c.Statistic), real(c.InformationFraction), real(c.Boundary), real(c.BoundaryNominalP), real(c.AlphaSpent),
			c.Crossed, real(c.AlwaysValidP), real(c.SequenceLower), real(c.SequenceUpper)); err != nil {
			return fmt.Errorf("metric %q arm %q: %w", c.Metric, c.Arm, err)
		}
	}
	for _, e := range l.Exposures {
		if _, err := tx.ExecContext(ctx, `INSERT INTO daily_exposures (experiment, look_at, arm, day, units) VALUES (?, ?, ?, ?, ?)`,
			l.Experiment, key, e.Arm, e.Day, e.Units); err != nil {
			return fmt.Errorf("arm %q day %s: %w", e.Arm, e.Day, err)
		}
	}
	return nil
}

// real maps NaN to NULL; infinities are stored as SQLite's infinite REALs.
func real(f float64) any {
	if math.IsNaN(f) {
		return nil
	}
	return f
}

func unreal(n sql.NullFloat64) float64 {
	if !n.Valid {
		return math.NaN()
	}
	return n.Float64
}

// Looks returns the experiment's looks in the order of their instants,
// each with its rows in a fixed order (metric, then arm; exposures by arm
// and day). Read in one transaction, so a concurrent write is seen whole
// or not at all.
func (s *Store) Looks(ctx context.Context, experiment string) ([]Look, error) {
	tx, err := s.db.BeginTx(ctx, &sql.TxOptions{ReadOnly: true})
	if err != nil {
		return nil, fmt.Errorf("history %s: begin: %w", s.path, err)
	}
	defer tx.Rollback()
	looks, err := readLooks(ctx, tx, experiment)
	if err != nil {
		return nil, fmt.Errorf("history %s: experiment %q: %w", s.path, experiment, err)
	}
	return looks, nil
}

func readLooks(ctx context.Context, tx *sql.Tx, experiment string) ([]Look, error) {
	rows, err := tx.QueryContext(ctx, `SELECT look_at, key_kind, written_at, warnings_recorded FROM looks WHERE experiment = ? ORDER BY look_at`, experiment)
	if err != nil {
		return nil, err
	}
	var looks []Look
	index := map[string]int{}
	for rows.Next() {
		var at, kind, written string
		var recorded bool
		if err := rows.Scan(&at, &kind, &written, &recorded); err != nil {
			rows.Close()
			return nil, err
		}
		l := Look{Experiment: experiment, KeyKind: KeyKind(kind), WarningsRecorded: recorded}
		if l.At, err = time.Parse(keyLayout, at); err != nil {
			rows.Close()
			return nil, fmt.Errorf("look_at %q: %w", at, err)
		}
		if l.WrittenAt, err = time.Parse(keyLayout, written); err != nil {
			rows.Close()
			return nil, fmt.Errorf("written_at %q: %w", written, err)
		}
		index[at] = len(looks)
		looks = append(looks, l)
	}
	if err := rows.Close(); err != nil {
		return nil, err
	}
	if err := readArms(ctx, tx, experiment, looks, index); err != nil {
		return nil, err
	}
	if err := readComparisons(ctx, tx, experiment, looks, index); err != nil {
		return nil, err
	}
	if err := readExposures(ctx, tx, experiment, looks, index); err != nil {
		return nil, err
	}
	return looks, readWarnings(ctx, tx, experiment, looks, index)
}

func readWarnings(ctx context.Context, tx *sql.Tx, experiment string, looks []Look, index map[string]int) error {
	rows, err := tx.QueryContext(ctx, `SELECT look_at, code FROM look_warnings WHERE experiment = ? ORDER BY look_at, code`, experiment)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var at, code string
		if err := rows.Scan(&at, &code); err != nil {
			return err
		}
		looks[index[at]].Warnings = append(looks[index[at]].Warnings, code)
	}
	return rows.Err()
}

// NewWarnings returns the warning codes of now that prev did not have, in
// order; nil when prev's warnings were not recorded (a look written before
// schema version 3), since then nothing can be called new.
func NewWarnings(prev, now Look) []string {
	if !prev.WarningsRecorded {
		return nil
	}
	var out []string
	for _, c := range now.Warnings {
		if !slices.Contains(prev.Warnings, c) && !slices.Contains(out, c) {
			out = append(out, c)
		}
	}
	slices.Sort(out)
	return out
}

func readArms(ctx context.Context, tx *sql.Tx, experiment string, looks []Look, index map[string]int) error {
	rows, err := tx.QueryContext(ctx, `SELECT look_at, metric, arm, units, conversions FROM arm_looks WHERE experiment = ? ORDER BY look_at, metric, arm`, experiment)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var at string
		var a ArmLook
		if err := rows.Scan(&at, &a.Metric, &a.Arm, &a.Units, &a.Conversions); err != nil {
			return err
		}
		looks[index[at]].Arms = append(looks[index[at]].Arms, a)
	}
	return rows.Err()
}

func readComparisons(ctx context.Context, tx *sql.Tx, experiment string, looks []Look, index map[string]int) error {
	rows, err := tx.QueryContext(ctx, `SELECT look_at, metric, arm, control, method, statistic, information_fraction, boundary,
		boundary_nominal_p, alpha_spent, crossed, always_valid_p, sequence_lower, sequence_upper
		FROM comparison_looks WHERE experiment = ? ORDER BY look_at, metric, arm`, experiment)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var at string
		var c ComparisonLook
		var f [8]sql.NullFloat64
		if err := rows.Scan(&at, &c.Metric, &c.Arm, &c.Control, &c.Method, &f[0], &f[1], &f[2], &f[3], &f[4], &c.Crossed, &f[5], &f[6], &f[7]); err != nil {
			return err
		}
		c.Statistic, c.InformationFraction, c.Boundary, c.BoundaryNominalP = unreal(f[0]), unreal(f[1]), unreal(f[2]), unreal(f[3])
		c.AlphaSpent, c.AlwaysValidP, c.SequenceLower, c.SequenceUpper = unreal(f[4]), unreal(f[5]), unreal(f[6]), unreal(f[7])
		looks[index[at]].Comparisons = append(looks[index[at]].Comparisons, c)
	}
	return rows.Err()
}

func readExposures(ctx context.Context, tx *sql.Tx, experiment string, looks []Look, index map[string]int) error {
	rows, err := tx.QueryContext(ctx, `SELECT look_at, arm, day, units FROM daily_exposures WHERE experiment = ? ORDER BY look_at, arm, day`, experiment)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var at string
		var e DailyExposure
		if err := rows.Scan(&at, &e.Arm, &e.Day, &e.Units); err != nil {
			return err
		}
		looks[index[at]].Exposures = append(looks[index[at]].Exposures, e)
	}
	return rows.Err()
}

// Fractions returns the information fractions of one comparison's looks
// before (not at) the instant at, in order: what Boundaries needs besides
// tonight's fraction. Looks that do not hold the comparison are skipped.
func Fractions(looks []Look, at time.Time, metric, arm string) []float64 {
	sorted := append([]Look(nil), looks...)
	sort.SliceStable(sorted, func(i, j int) bool { return sorted[i].At.Before(sorted[j].At) })
	var out []float64
	for _, l := range sorted {
		if !l.At.Before(at) {
			break
		}
		for _, c := range l.Comparisons {
			if c.Metric == metric && c.Arm == arm && !math.IsNaN(c.InformationFraction) {
				out = append(out, c.InformationFraction)
			}
		}
	}
	return out
}
