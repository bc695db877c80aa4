package history

import (
	"bufio"
	"context"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"slices"
	"sync"
	"testing"
	"time"
)

// The expectations here are the package's contract (common practice for a
// store: what is put is read back, a rerun replaces, a killed write leaves
// nothing), not numbers from elsewhere.

func night(day int, units int64) Look {
	at := time.Date(2026, 11, 2+day, 6, 0, 0, 0, time.UTC)
	return Look{
		Experiment: "checkout-flow-2026",
		At:         at,
		KeyKind:    AsOf,
		WrittenAt:  at.Add(time.Hour),
		// Put always records the warnings, so a look read back has this set.
		WarningsRecorded: true,
		Arms: []ArmLook{
			{Metric: "purchase", Arm: "control", Units: units, Conversions: units / 10},
			{Metric: "purchase", Arm: "one-page", Units: units + 7, Conversions: units/10 + 3},
		},
		Comparisons: []ComparisonLook{{
			Metric: "purchase", Arm: "one-page", Control: "control", Method: "group-sequential",
			Statistic: 1.2, InformationFraction: float64(day) / 30, Boundary: math.Inf(1), BoundaryNominalP: 0,
			AlphaSpent: 0.001, AlwaysValidP: math.NaN(), SequenceLower: math.NaN(), SequenceUpper: math.NaN(),
		}},
		Exposures: []DailyExposure{{Arm: "control", Day: at.Format(time.DateOnly), Units: units / 3}, {Arm: "one-page", Day: at.Format(time.DateOnly), Units: units/3 + 1}},
	}
}

func openT(t *testing.T, path string) *Store {
	t.Helper()
	s, err := Open(context.Background(), path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

func equalLooks(a, b []Look) bool {
	// NaN != NaN, so compare through their text forms.
	return fmt.Sprintf("%v", a) == fmt.Sprintf("%v", b)
}

func TestPutReadReplace(t *testing.T) {
	ctx := context.Background()
	s := openT(t, filepath.Join(t.TempDir(), "h.sqlite"))
	want := []Look{night(1, 1000), night(2, 2000)}
	for _, l := range []Look{want[1], night(1, 500), want[0]} { // out of order, night 1 twice
		if err := s.Put(ctx, l); err != nil {
			t.Fatal(err)
		}
	}
	got, err := s.Looks(ctx, "checkout-flow-2026")
	if err != nil {
		t.Fatal(err)
	}
	if !equalLooks(got, want) {
		t.Errorf("looks\n%v\nwant\n%v", got, want)
	}
	if !math.IsInf(got[0].Comparisons[0].Boundary, 1) || !math.IsNaN(got[0].Comparisons[0].AlwaysValidP) {
		t.Errorf("infinite boundary and missing p did not survive: %+v", got[0].Comparisons[0])
	}
	if f := Fractions(got, want[1].At, "purchase", "one-page"); !reflect.DeepEqual(f, []float64{1.0 / 30}) {
		t.Errorf("fractions before night 2: %v", f)
	}
	var n int
	if err := s.db.QueryRow(`SELECT count(*) FROM arm_looks`).Scan(&n); err != nil || n != 4 {
		t.Errorf("arm rows %d (%v), want 4: a rerun must replace, not add", n, err)
	}
}

func TestPutBadLook(t *testing.T) {
	s := openT(t, filepath.Join(t.TempDir(), "h.sqlite"))
	for _, l := range []Look{
		{At: time.Now(), KeyKind: AsOf},
		{Experiment: "e", KeyKind: AsOf},
		{Experiment: "e", At: time.Now(), KeyKind: "tonight"},
		{Experiment: "e", At: time.Now(), KeyKind: AsOf, Comparisons: []ComparisonLook{{Method: "peek"}}},
		{Experiment: "e", At: time.Now(), KeyKind: AsOf, Exposures: []DailyExposure{{Day: "2026-13-01"}}},
	} {
		if err := s.Put(context.Background(), l); err == nil {
			t.Errorf("%+v stored", l)
		}
	}
	// A duplicate row fails the whole look and leaves nothing.
	l := night(1, 10)
	l.Arms = append(l.Arms, l.Arms[0])
	if err := s.Put(context.Background(), l); err == nil {
		t.Error("duplicate arm row stored")
	}
	if got, err := s.Looks(context.Background(), l.Experiment); err != nil || len(got) != 0 {
		t.Errorf("after a failed put: %v looks, %v", len(got), err)
	}
}

// TestAbortedWriteLeavesPrevious cancels the context inside Put's
// transaction, after the old rows were deleted and the new ones written:
// the look must be the previous one.
func TestAbortedWriteLeavesPrevious(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	s := openT(t, filepath.Join(t.TempDir(), "h.sqlite"))
	if err := s.Put(ctx, night(1, 1000)); err != nil {
		t.Fatal(err)
	}
	s.midWrite = cancel
	if err := s.Put(ctx, night(1, 5000)); err == nil {
		t.Fatal("a cancelled put committed")
	}
	s.midWrite = nil
	got, err := s.Looks(context.Background(), "checkout-flow-2026")
	if err != nil {
		t.Fatal(err)
	}
	if want := []Look{night(1, 1000)}; !equalLooks(got, want) {
		t.Errorf("after the aborted rerun\n%v\nwant\n%v", got, want)
	}
}

const childEnv = "ARMTALLY_HISTORY_CHILD"

// TestMain lets the test binary act as a run killed mid-write: with
// childEnv set it opens the file, starts rewriting night 1 with other
// counts, says "mid-write" on standard output and waits to be killed.
func TestMain(m *testing.M) {
	if path := os.Getenv(childEnv); path != "" {
		s, err := Open(context.Background(), path)
		if err != nil {
			fmt.Println("open:", err)
			os.Exit(2)
		}
		s.midWrite = func() {
			fmt.Println("mid-write")
			time.Sleep(time.Minute)
		}
		fmt.Println("put:", s.Put(context.Background(), night(1, 5000)))
		os.Exit(3)
	}
	os.Exit(m.Run())
}

// TestKilledWriterLeavesPrevious kills (SIGKILL) a child process in the
// middle of its transaction; the next run finds the previous look whole,
// and can write at once (the dead process's lock is gone).
func TestKilledWriterLeavesPrevious(t *testing.T) {
	path := filepath.Join(t.TempDir(), "h.sqlite")
	s := openT(t, path)
	ctx := context.Background()
	if err := s.Put(ctx, night(1, 1000)); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), childEnv+"="+path)
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	line, err := bufio.NewReader(out).ReadString('\n')
	if err != nil || line != "mid-write\n" {
		cmd.Process.Kill()
		cmd.Wait()
		t.Fatalf("child said %q (%v)", line, err)
	}
	if err := cmd.Process.Kill(); err != nil {
		t.Fatal(err)
	}
	cmd.Wait()
	got, err := s.Looks(ctx, "checkout-flow-2026")
	if err != nil {
		t.Fatal(err)
	}
	if want := []Look{night(1, 1000)}; !equalLooks(got, want) {
		t.Errorf("after the killed rerun\n%v\nwant\n%v", got, want)
	}
	if err := s.Put(ctx, night(2, 2000)); err != nil {
		t.Errorf("write after the killed run: %v", err)
	}
}

// TestConcurrentWriters runs two stores on one file (as two runs would),
// each writing its nights while the other holds its transaction open for a
// while; both must succeed and every look be there.
func TestConcurrentWriters(t *testing.T) {
	path := filepath.Join(t.TempDir(), "h.sqlite")
	ctx := context.Background()
	var wg sync.WaitGroup
	errs := make(chan error, 2)
	for w := range 2 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			s, err := Open(ctx, path)
			if err != nil {
				errs <- err
				return
			}
			defer s.Close()
			s.midWrite = func() { time.Sleep(20 * time.Millisecond) }
			for d := range 10 {
				l := night(2*d+w, int64(100*(2*d+w+1)))
				if err := s.Put(ctx, l); err != nil {
					errs <- fmt.Errorf("writer %d night %d: %w", w, 2*d+w, err)
					return
				}
			}
		}()
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
	got, err := openT(t, path).Looks(ctx, "checkout-flow-2026")
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 20 {
		t.Fatalf("%d looks, want 20", len(got))
	}
	for d, l := range got {
		if !equalLooks([]Look{l}, []Look{night(d, int64(100*(d+1)))}) {
			t.Errorf("night %d: %v", d, l)
		}
	}
}

// TestMigrateFromVersion1 makes a version-1 file (the first migration
// only), writes a look in that schema, and opens it with Open: the file
// must come to SchemaVersion with its look intact and take the new
// columns and tables.
func TestMigrateFromVersion1(t *testing.T) {
	if SchemaVersion != len(migrations) {
		t.Fatalf("SchemaVersion %d, %d migrations", SchemaVersion, len(migrations))
	}
	path := filepath.Join(t.TempDir(), "v1.sqlite")
	ctx := context.Background()
	old, err := open(ctx, path, 1)
	if err != nil {
		t.Fatal(err)
	}
	for _, stmt := range []string{
		`INSERT INTO looks VALUES ('e', '2026-11-03T06:00:00.000000000Z', 'as-of', '2026-11-03T07:00:00.000000000Z')`,
		`INSERT INTO arm_looks VALUES ('e', '2026-11-03T06:00:00.000000000Z', 'purchase', 'control', 100, 10)`,
		`INSERT INTO comparison_looks VALUES ('e', '2026-11-03T06:00:00.000000000Z', 'purchase', 'b', 'control', 'mixture', 0.5, NULL, NULL, NULL, 0, 0.9, -0.01, 0.02)`,
	} {
		if _, err := old.db.Exec(stmt); err != nil {
			t.Fatal(err)
		}
	}
	old.Close()
	s := openT(t, path)
	var v int
	if err := s.db.QueryRow(`SELECT version FROM schema_version`).Scan(&v); err != nil || v != SchemaVersion {
		t.Fatalf("version %d (%v), want %d", v, err, SchemaVersion)
	}
	got, err := s.Looks(ctx, "e")
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 1 || len(got[0].Arms) != 1 || got[0].Arms[0].Units != 100 || len(got[0].Comparisons) != 1 ||
		got[0].Comparisons[0].SequenceUpper != 0.02 || !math.IsNaN(got[0].Comparisons[0].BoundaryNominalP) {
		t.Errorf("migrated look %+v", got)
	}
	l := night(3, 30)
	l.Experiment = "e"
	if err := s.Put(ctx, l); err != nil {
		t.Errorf("write after migration: %v", err)
	}
	// A file newer than this package is refused.
	if _, err := s.db.Exec(`UPDATE schema_version SET version = ?`, SchemaVersion+1); err != nil {
		t.Fatal(err)
	}
	if _, err := Open(ctx, path); err == nil {
		t.Error("a newer schema was opened")
	}
}

// TestMigrateFromVersion2 makes a version-2 file with one look, opens it
// with Open (version 3 adds the looks' warning codes): the old look reads
// back with its warnings not recorded, so NewWarnings calls nothing new
// against it; a look written now stores its codes sorted and once; a
// rerun of the same night replaces them; NewWarnings lists the codes the
// later look has and the earlier did not.
func TestMigrateFromVersion2(t *testing.T) {
	path := filepath.Join(t.TempDir(), "v2.sqlite")
	ctx := context.Background()
	old, err := open(ctx, path, 2)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := old.db.Exec(`INSERT INTO looks VALUES ('checkout-flow-2026', '2026-11-03T06:00:00.000000000Z', 'as-of', '2026-11-03T07:00:00.000000000Z')`); err != nil {
		t.Fatal(err)
	}
	old.Close()
	s := openT(t, path)
	l2 := night(2, 200)
	l2.Warnings = []string{"few_conversions", "open_window_event_log", "few_conversions"}
	if err := s.Put(ctx, l2); err != nil {
		t.Fatal(err)
	}
	got, err := s.Looks(ctx, "checkout-flow-2026")
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 2 || got[0].WarningsRecorded || got[0].Warnings != nil || !got[1].WarningsRecorded ||
		!slices.Equal(got[1].Warnings, []string{"few_conversions", "open_window_event_log"}) {
		t.Fatalf("looks after migration: %+v", got)
	}
	if n := NewWarnings(got[0], got[1]); n != nil {
		t.Errorf("new warnings against a look whose warnings were not recorded: %v", n)
	}
	l3 := night(3, 300)
	l3.Warnings = []string{"state_recomputed", "few_conversions"}
	if err := s.Put(ctx, l3); err != nil {
		t.Fatal(err)
	}
	if n := NewWarnings(got[1], l3); !slices.Equal(n, []string{"state_recomputed"}) {
		t.Errorf("new warnings %v, want [state_recomputed]", n)
	}
	l3.Warnings = nil
	if err := s.Put(ctx, l3); err != nil {
		t.Fatal(err)
	}
	got, err = s.Looks(ctx, "checkout-flow-2026")
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 3 || got[2].Warnings != nil || !got[2].WarningsRecorded {
		t.Errorf("the rerun of night 3 kept warnings %v (recorded %v)", got[2].Warnings, got[2].WarningsRecorded)
	}
}
