package profile

import (
	"bytes"
	"compress/gzip"
	"errors"
	"reflect"
	"testing"
	"time"

	"github.com/armtally/armtally/ingest"
)

// small is a hand-written log of 6 data rows. Worked out by hand: line 5
// has an empty user and line 6 an exposure without an arm (bad, 2), so 4
// rows are valid; exposures: e1/a twice (lines 2 and 3, u1 and u2), and
// line 4 an exposure with no experiment, arm b; events: exposure 3, view 1;
// time range 2027-04-01T09:00:00Z (line 2) to 2027-04-02T00:00:00Z
// (line 7).
const small = "user_id,ts,event,experiment,arm\n" +
	"u1,2027-04-01T09:00:00Z,exposure,e1,a\n" +
	"u2,2027-04-01T10:00:00Z,exposure,e1,a\n" +
	"u3,2027-04-01T11:00:00Z,exposure,,b\n" +
	",2027-04-01T12:00:00Z,view,,\n" +
	"u4,2027-04-01T13:00:00Z,exposure,e1,\n" +
	"u1,2027-04-02,view,,\n"

func gz(t *testing.T, s string) []byte {
	var b bytes.Buffer
	w := gzip.NewWriter(&b)
	w.Write([]byte(s))
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func TestBuild(t *testing.T) {
	opts := ingest.Options{Mapping: ingest.DefaultMapping(), ExposureEvent: "exposure", MaxBadRows: ingest.NoLimit}
	// The gzipped copy has a plain .csv name: gzip is told by content.
	srcs := []ingest.Source{ingest.BytesSource("a.csv", []byte(small)), ingest.BytesSource("b.csv", gz(t, small))}
	rep, err := Build(srcs, opts, 1)
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Files) != 2 || rep.Files[0].Format != "CSV" || rep.Files[1].Format != "CSV (gzip)" {
		t.Fatalf("files %+v", rep.Files)
	}
	for _, f := range rep.Files {
		if f.Rows != 6 || f.RowsFrom != "counted" || len(f.Columns) != 5 || f.Mapping[4] != (ColumnMapping{"arm", "arm", StatusColumn}) {
			t.Errorf("file %+v", f)
		}
	}
	// Two copies: every count doubles.
	wantBad := []ingest.BadRowCount{{Reason: ingest.ReasonNullUser, Count: 2}, {Reason: ingest.ReasonExposureWithoutArm, Count: 2}}
	wantExp := []ExposureCount{{NoValue, "b", 2}, {"e1", "a", 4}}
	wantEv := []EventCount{{"exposure", 6}, {"view", 2}}
	if rep.RowsRead != 12 || rep.ValidRows != 8 || !reflect.DeepEqual(rep.BadRows, wantBad) || len(rep.BadRowExamples) != 2 ||
		!reflect.DeepEqual(rep.Exposures, wantExp) || !reflect.DeepEqual(rep.Events, wantEv) || rep.EventsShown != 1 {
		t.Errorf("report %+v", rep)
	}
	if !rep.First.Equal(time.Date(2027, 4, 1, 9, 0, 0, 0, time.UTC)) || !rep.Last.Equal(time.Date(2027, 4, 2, 0, 0, 0, 0, time.UTC)) {
		t.Errorf("time range %v to %v", rep.First, rep.Last)
	}

	// A missing column: described and counted, not read.
	m := opts
	m.Mapping.User = "visitor"
	rep, err = Build(srcs[:1], m, 5)
	if err != nil {
		t.Fatal(err)
	}
	if f := rep.Files[0]; f.Rows != 6 || f.Error == "" || f.Mapping[0].Status != StatusMissing || rep.RowsRead != 0 {
		t.Errorf("missing column: %+v", rep)
	}

	// Options the reader refuses are an *OptionsError.
	m = opts
	m.Mapping.Arm = ""
	var oe *OptionsError
	if _, err := Build(srcs[:1], m, 5); !errors.As(err, &oe) {
		t.Errorf("exposure without an arm column: error %v, want an *OptionsError", err)
	}
}
