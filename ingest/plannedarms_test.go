package ingest

import (
	"errors"
	"reflect"
	"strings"
	"testing"
)

// TestPlannedArms checks the unknown-arm rule on a hand-made log. Line 1 is
// the header; line 3 is an exposure of experiment "exp" in arm "blue",
// which is not planned; line 4 belongs to another experiment and is not
// checked; line 5 is an exposure without an arm.
func TestPlannedArms(t *testing.T) {
	const log = "user_id,ts,event,experiment,arm\n" +
		"u1,2026-11-02T10:00:00Z,exposure,exp,control\n" +
		"u2,2026-11-02T10:00:00Z,exposure,exp,blue\n" +
		"u3,2026-11-02T10:00:00Z,exposure,other,green\n" +
		"u4,2026-11-02T10:00:00Z,exposure,exp,\n" +
		"u5,2026-11-02T11:00:00Z,purchase,,\n"
	read := func(opts Options) (int64, Stats, error) {
		r, err := NewReader([]Source{BytesSource("log.csv", []byte(log))}, opts)
		if err != nil {
			t.Fatal(err)
		}
		defer r.Close()
		var rows int64
		for r.Next() {
			rows += r.RecordBatch().NumRows()
		}
		return rows, r.Stats(), r.Err()
	}
	opts := Options{Mapping: DefaultMapping(), ExposureEvent: "exposure",
		PlannedArms: map[string][]string{"exp": {"control", "treat"}}}

	// No budget: the first bad row, line 3, stops the read.
	_, _, err := read(opts)
	var re *RowError
	if !errors.As(err, &re) || re.Row != 3 || re.Column != "arm" || !errors.Is(err, ErrUnknownArm) || Reason(err) != ReasonUnknownArm {
		t.Fatalf("error = %v, want line 3, column arm, unknown_arm", err)
	}
	if !strings.Contains(err.Error(), `log.csv:3: column "arm"`) || !strings.Contains(err.Error(), `"blue"`) {
		t.Errorf("message %q does not name file, line, column and value", err)
	}

	// Any number of bad rows: lines 3 and 5 are counted, the other three
	// rows delivered.
	opts.MaxBadRows = NoLimit
	rows, st, err := read(opts)
	if err != nil {
		t.Fatal(err)
	}
	want := []BadRowCount{{Reason: ReasonExposureWithoutArm, Count: 1}, {Reason: ReasonUnknownArm, Count: 1}}
	if rows != 3 || !reflect.DeepEqual(st.BadRows, want) {
		t.Errorf("rows %d, bad rows %+v; want 3 and %+v", rows, st.BadRows, want)
	}

	// The key "" applies to any experiment not listed: now line 4's arm
	// "green" is checked too.
	opts.PlannedArms = map[string][]string{"": {"control", "treat"}}
	rows, st, err = read(opts)
	if err != nil {
		t.Fatal(err)
	}
	if rows != 2 || st.BadRows[len(st.BadRows)-1] != (BadRowCount{Reason: ReasonUnknownArm, Count: 2}) {
		t.Errorf("with the key \"\": rows %d, bad rows %+v", rows, st.BadRows)
	}
}
