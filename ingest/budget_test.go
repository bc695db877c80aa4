package ingest

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// budgetCSV has 10 data rows on lines 2-11: 2 good (lines 2 and 11) and 8
// bad, one of each reason and a second null user. The comment after each
// line is not part of the file.
var budgetCSV = strings.Join([]string{
	"user_id,ts,event,experiment,arm",
	"u1,2026-03-01,view,,",           // line 2: good
	",2026-03-01,view,,",             // line 3: null_user (the first)
	"u2,2026-13-01,view,,",           // line 4: bad_timestamp (month 13)
	"u3,2026-03-01,exposure,exp-1,",  // line 5: exposure_without_arm
	"u4,2026-03-01",                  // line 6: wrong_field_count (2 of 5)
	",2026-03-02,view,,",             // line 7: null_user (the second)
	"u5,9999-01-01,view,,",           // line 8: timestamp_out_of_range
	"u6,,view,,",                     // line 9: null_timestamp
	"u7,2026-03-01,,,",               // line 10: null_event
	"u8,2026-03-01,purchase,exp-1,b", // line 11: good
}, "\n") + "\n"

func TestErrorBudget(t *testing.T) {
	src := []Source{BytesSource("b.csv", []byte(budgetCSV))}
	// Counted by hand from the comments in budgetCSV, in the order of the
	// Reason constants.
	allBad := []BadRowCount{
		{Reason: "null_user", Count: 2},
		{Reason: "null_timestamp", Count: 1},
		{Reason: "bad_timestamp", Count: 1},
		{Reason: "timestamp_out_of_range", Count: 1},
		{Reason: "null_event", Count: 1},
		{Reason: "exposure_without_arm", Count: 1},
		{Reason: "wrong_field_count", Count: 1},
	}
	// The first row of each reason, in the same order.
	allFirst := []string{
		`b.csv:3: column "user_id": null or empty user id`,
		`b.csv:9: column "ts": null timestamp`,
		`b.csv:4: column "ts": cannot parse "2026-13-01" as a timestamp (want RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]])`,
		`b.csv:8: column "ts": timestamp "9999-01-01" is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)`,
		`b.csv:10: column "event": null or empty event name`,
		`b.csv:5: column "arm": exposure row without an arm`,
		`b.csv:6: wrong number of fields: got 2, the header has 5`,
	}
	good := []string{
		"u1 | 2026-03-01T00:00:00Z | view | ∅ | ∅",
		"u8 | 2026-03-01T00:00:00Z | purchase | exp-1 | b",
	}
	lastBad := `b.csv:10: column "event": null or empty event name` // line 10 is the 8th bad row
	tests := []struct {
		name      string
		maxRows   int64
		maxShare  float64
		rows      []string // delivered, when there is no error
		read      int64
		bad       []BadRowCount
		first     []string
		err       string // "" for none
		budgetErr bool
	}{
		{name: "no budget: the first bad row stops", read: 2,
			bad: []BadRowCount{{Reason: "null_user", Count: 1}}, first: allFirst[:1], err: allFirst[0]},
		{name: "no limit", maxRows: NoLimit, rows: good, read: 10, bad: allBad, first: allFirst},
		// 8 bad rows are not more than 8.
		{name: "count at the limit", maxRows: 8, rows: good, read: 10, bad: allBad, first: allFirst},
		// The 8th bad row (line 10, the 9th record) is one too many.
		{name: "count exceeded", maxRows: 7, read: 9, bad: allBad, first: allFirst, budgetErr: true,
			err: "bad-row budget exceeded: 8 bad rows, more than the 7 allowed (max bad rows); last bad row: " + lastBad},
		// 8 of 10 is a share of 0.8: not more than 0.8.
		{name: "share at the limit", maxShare: 0.8, rows: good, read: 10, bad: allBad, first: allFirst},
		// 0.8 > 0.79, found once all 10 rows are read.
		{name: "share exceeded", maxShare: 0.79, rows: good, read: 10, bad: allBad, first: allFirst, budgetErr: true,
			err: "bad-row budget exceeded: 8 bad rows of 10 read (80%), more than the 79% allowed (max bad share); last bad row: " + lastBad},
		// Both limits: the count one stops the reader first.
		{name: "both", maxRows: 7, maxShare: 0.9, read: 9, bad: allBad, first: allFirst, budgetErr: true,
			err: "bad-row budget exceeded: 8 bad rows, more than the 7 allowed (max bad rows); last bad row: " + lastBad},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rows, st, err := readAll(t, src, Options{Mapping: DefaultMapping(), ExposureEvent: "exposure",
				MaxBadRows: tc.maxRows, MaxBadShare: tc.maxShare, BatchSize: 1})
			if tc.err == "" {
				if err != nil {
					t.Fatalf("error %v", err)
				}
				equalRows(t, rows, tc.rows)
				if st.Rows != int64(len(tc.rows)) {
					t.Errorf("stats rows %d, want %d", st.Rows, len(tc.rows))
				}
			} else if err == nil || err.Error() != tc.err {
				t.Fatalf("error\n got %v\nwant %s", err, tc.err)
			}
			if tc.budgetErr {
				var be *BudgetError
				var re *RowError
				if !errors.As(err, &be) || !errors.Is(err, ErrBudgetExceeded) || !errors.As(err, &re) || !errors.Is(err, ErrNullEvent) {
					t.Errorf("error %T: want a *BudgetError wrapping ErrBudgetExceeded and the last *RowError", err)
				}
				if be != nil && (be.BadRows != 8 || be.Last == nil || be.Last.Row != 10) {
					t.Errorf("budget error %+v: want 8 bad rows, the last on line 10", *be)
				}
			}
			if st.RowsRead != tc.read {
				t.Errorf("rows read %d, want %d", st.RowsRead, tc.read)
			}
			if !equalReasons(st.BadRows, tc.bad) {
				t.Errorf("bad rows %v, want %v", st.BadRows, tc.bad)
			}
			if len(st.BadRowExamples) != len(tc.first) {
				t.Fatalf("%d examples, want %d", len(st.BadRowExamples), len(tc.first))
			}
			for i, e := range st.BadRowExamples {
				if e.Error() != tc.first[i] || e.Reason() != st.BadRows[i].Reason || Reason(e) != e.Reason() {
					t.Errorf("example %d: %v (reason %s), want %s (reason %s)", i, e, e.Reason(), tc.first[i], st.BadRows[i].Reason)
				}
			}
			if tc.err == "" {
				var sum int64
				for _, rc := range st.BadRows {
					sum += rc.Count
				}
				if st.RowsRead != st.Rows+sum {
					t.Errorf("rows read %d != rows %d + bad %d", st.RowsRead, st.Rows, sum)
				}
			}
		})
	}
}

func equalReasons(a, b []BadRowCount) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// Stats hands out copies: changing them does not change the reader's.
func TestStatsAreCopies(t *testing.T) {
	r, err := NewReader([]Source{BytesSource("b.csv", []byte(budgetCSV))}, Options{Mapping: DefaultMapping(), MaxBadRows: NoLimit})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	for r.Next() {
	}
	st := r.Stats()
	st.BadRows[0].Count = 99
	st.BadRowExamples[0].Row = 99
	again := r.Stats()
	if again.BadRows[0].Count != 2 || again.BadRowExamples[0].Row != 3 { // 2 null users, the first on line 3 (budgetCSV)
		t.Errorf("stats changed through a copy: %v, example row %d", again.BadRows, again.BadRowExamples[0].Row)
	}
}

// Parquet rows are skipped the same way: an exposure without an arm in row
// group 2 (row 5 of the file) and a null user in row group 0 (row 2).
func TestErrorBudgetParquet(t *testing.T) {
	type event struct {
		User  *string `parquet:"user_id,optional"`
		TS    int64   `parquet:"ts"`
		Event string  `parquet:"event"`
		Arm   *string `parquet:"arm,optional"`
	}
	u, a := "u", "a"
	rows := []event{
		{&u, 1, "exposure", &a}, {nil, 2, "view", nil},
		{&u, 3, "view", nil}, {&u, 4, "view", nil},
		{&u, 5, "exposure", nil},
	}
	data := writeParquet(t, rows, parquet.MaxRowsPerRowGroup(2))
	m := Mapping{User: "user_id", TS: "ts", Event: "event", Arm: "arm", EpochUnit: "s"}
	got, st, err := readAll(t, []Source{BytesSource("e.parquet", data)}, Options{Mapping: m, ExposureEvent: "exposure", MaxBadRows: NoLimit})
	if err != nil {
		t.Fatal(err)
	}
	equalRows(t, got, []string{ // rows 1, 3 and 4; ts in seconds since the epoch
		"u | 1970-01-01T00:00:01Z | exposure | a",
		"u | 1970-01-01T00:00:03Z | view | ∅",
		"u | 1970-01-01T00:00:04Z | view | ∅",
	})
	want := []BadRowCount{{Reason: "null_user", Count: 1}, {Reason: "exposure_without_arm", Count: 1}}
	if !equalReasons(st.BadRows, want) || st.RowsRead != 5 || st.Rows != 3 {
		t.Fatalf("stats %+v, want 5 read, 3 rows, bad %v", st, want)
	}
	for i, w := range []string{
		`e.parquet:2: row group 0: column "user_id": null or empty user id`,
		`e.parquet:5: row group 2: column "arm": exposure row without an arm`,
	} {
		if got := st.BadRowExamples[i].Error(); got != w {
			t.Errorf("example %d: %s, want %s", i, got, w)
		}
	}
}

func TestErrorBudgetOptionErrors(t *testing.T) {
	tests := []struct {
		name string
		opts Options
		want string
	}{
		{"rows below -1", Options{MaxBadRows: -2}, "max bad rows -2: want a positive count, 0 or -1 (no limit)"},
		{"negative share", Options{MaxBadShare: -0.1}, "max bad share -0.1: want a share from 0 to 1"},
		{"share above 1", Options{MaxBadShare: 1.5}, "max bad share 1.5: want a share from 0 to 1"},
		{"NaN share", Options{MaxBadShare: math.NaN()}, "max bad share NaN: want a share from 0 to 1"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tc.opts.Mapping = DefaultMapping()
			_, err := NewReader(nil, tc.opts)
			if err == nil || err.Error() != tc.want {
				t.Errorf("error %v, want %s", err, tc.want)
			}
		})
	}
}

func TestReason(t *testing.T) {
	// The names are part of the readout's JSON; they must not change.
	// Common practice: snake_case words.
	tests := []struct {
		err  error
		want BadRowReason
	}{
		{ErrNullUser, "null_user"},
		{ErrNullTimestamp, "null_timestamp"},
		{ErrBadTimestamp, "bad_timestamp"},
		{ErrTimestampRange, "timestamp_out_of_range"},
		{ErrNullEvent, "null_event"},
		{ErrNoArm, "exposure_without_arm"},
		{ErrFieldCount, "wrong_field_count"},
		{&RowError{Err: ErrNullEvent}, "null_event"},
		{ErrMissingColumn, ""},
		{nil, ""},
	}
	for _, tc := range tests {
		if got := Reason(tc.err); got != tc.want || got.String() != string(tc.want) {
			t.Errorf("Reason(%v) = %q, want %q", tc.err, got, tc.want)
		}
	}
}
