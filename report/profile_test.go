package report

import (
	"bytes"
	"encoding/json"
	"testing"
	"time"
	"unicode/utf8"

	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/ingest/profile"
)

// TestWriteProfile writes a profile built by hand; the expected text is
// laid out by hand from it (common practice: columns two spaces apart).
func TestWriteProfile(t *testing.T) {
	first := time.Date(2027, 4, 1, 9, 0, 0, 0, time.UTC)
	last := time.Date(2027, 4, 3, 17, 0, 0, 0, time.UTC)
	p := &profile.Report{
		Files: []profile.File{{
			Name: "dt=2027-04-01/e.csv.gz", Format: "CSV (gzip)", Rows: 1234, RowsFrom: "counted",
			Columns:    []profile.Column{{Name: "user_id", Type: "text"}, {Name: "ts", Type: "text"}},
			Partitions: []ingest.Partition{{Key: "dt", Value: "2027-04-01"}},
			Mapping: []profile.ColumnMapping{
				{Logical: "user", Physical: "user_id", Status: profile.StatusColumn},
				{Logical: "ts", Physical: "dt", Status: profile.StatusPartition},
				{Logical: "event", Physical: "event", Status: profile.StatusMissing},
				{Logical: "experiment", Physical: "", Status: profile.StatusNotMapped},
			},
			Error: "e.csv.gz: column \"event\": missing column",
		}},
		RowsRead: 1234, ValidRows: 1230,
		BadRows:        []ingest.BadRowCount{{Reason: ingest.ReasonNullUser, Count: 4}},
		BadRowExamples: []string{"e.csv.gz:7: column \"user_id\": null or empty user id"},
		ExposureEvent:  "exposure",
		Exposures:      []profile.ExposureCount{{Experiment: "tyre-offer", Arm: "control", Rows: 1000}, {Experiment: profile.NoValue, Arm: "b", Rows: 2}},
		Events:         []profile.EventCount{{Event: "exposure", Rows: 1002}, {Event: "page_view", Rows: 200}, {Event: "a", Rows: 27}, {Event: "b", Rows: 1}},
		EventsShown:    2,
		First:          &first, Last: &last,
	}
	want := `dt=2027-04-01/e.csv.gz
  format: CSV (gzip), 2 columns, 1,234 rows counted
  partitions: dt=2027-04-01
  columns:
    user_id  text
    ts       text
  mapping:
    user        <- user_id
    ts          <- dt (partition folder)
    event       MISSING: no column "event"
    experiment  not mapped
  rows not read: e.csv.gz: column "event": missing column

rows read: 1,234 in 1 file; 1,230 valid, 4 bad
  null_user: 4
  first bad row of each reason:
    e.csv.gz:7: column "user_id": null or empty user id
time range: 2027-04-01T09:00:00Z to 2027-04-03T17:00:00Z

exposure rows (event "exposure") by experiment and arm:
  tyre-offer  control  1,000
  (none)      b        2
  total 1,002

events (4 names) by rows:
  exposure   1,002
  page_view  200
  2 more names (28 rows)
`
	var b bytes.Buffer
	if err := WriteProfile(&b, p); err != nil {
		t.Fatal(err)
	}
	if b.String() != want {
		t.Errorf("got\n%s\nwant\n%s", b.String(), want)
	}

	// No rows, no exposures, one event name left over.
	p = &profile.Report{ExposureEvent: "exp", Events: []profile.EventCount{{Event: "x", Rows: 1}}}
	want = `rows read: 0 in 0 files; 0 valid, 0 bad
time range: no valid rows

exposure rows (event "exp") by experiment and arm:
  none

events (1 names) by rows:
  1 more name (1 row)
`
	b.Reset()
	if err := WriteProfile(&b, p); err != nil {
		t.Fatal(err)
	}
	if b.String() != want {
		t.Errorf("got\n%s\nwant\n%s", b.String(), want)
	}
}

// TestWriteProfileHostileNames checks that names from the files reach the
// terminal with their control characters, bidi controls and invalid bytes
// as escapes (internal/safetext.Visible) and the columns still aligned.
func TestWriteProfileHostileNames(t *testing.T) {
	p := &profile.Report{
		Files: []profile.File{{
			Name: "e\x1b[2J.csv", Format: "CSV", Rows: 3, RowsFrom: "counted",
			Columns:    []profile.Column{{Name: "us\ter", Type: "text"}},
			Partitions: []ingest.Partition{{Key: "d\u202et", Value: "\xff"}},
		}},
		BadRows:        []ingest.BadRowCount{},
		BadRowExamples: []string{"e.csv:2: \x07"},
		ExposureEvent:  "exposure",
		Exposures:      []profile.ExposureCount{{Experiment: "x\x00", Arm: "tr\xe9at", Rows: 3}},
		Events:         []profile.EventCount{{Event: "bu\x1by", Rows: 3}},
		EventsShown:    1,
	}
	var buf bytes.Buffer
	if err := WriteProfile(&buf, p); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{
		"e\\x1b[2J.csv\n",
		"    us\\x09er  text\n",
		"  partitions: d\\u202et=\\xff\n",
		"    e.csv:2: \\x07\n",
		"  x\\x00  tr\\xe9at  3\n",
		"  bu\\x1by  3\n",
	} {
		if !bytes.Contains(buf.Bytes(), []byte(want)) {
			t.Errorf("profile lacks %q:\n%s", want, buf.String())
		}
	}
	for i, r := range buf.String() {
		if r != '\n' && (r < 0x20 || r == 0x7f || r == utf8.RuneError || r == 0x202e) {
			t.Fatalf("profile holds %U at byte %d:\n%q", r, i, buf.String())
		}
	}
}

// Two arms whose names differ in a byte that is not UTF-8 stay two names
// in the inspect JSON (encoding/json alone turns both into U+FFFD), and a
// report with valid names is encoded as encoding/json encodes it.
func TestWriteProfileJSONKeepsNamesApart(t *testing.T) {
	p := &profile.Report{
		Files:     []profile.File{{Name: "e.csv", Format: "CSV", Columns: []profile.Column{}}},
		Exposures: []profile.ExposureCount{{Experiment: "x", Arm: "tr\xe9at", Rows: 1}, {Experiment: "x", Arm: "tr\xe8at", Rows: 2}},
		Events:    []profile.EventCount{},
	}
	var buf bytes.Buffer
	if err := WriteProfileJSON(&buf, p); err != nil {
		t.Fatal(err)
	}
	var got profile.Report
	if err := json.Unmarshal(buf.Bytes(), &got); err != nil {
		t.Fatal(err)
	}
	if a, b := got.Exposures[0].Arm, got.Exposures[1].Arm; a == b || a != `tr\xe9at` || b != `tr\xe8at` {
		t.Errorf("arms %q and %q, want tr\\xe9at and tr\\xe8at", a, b)
	}
	if p.Exposures[0].Arm != "tr\xe9at" {
		t.Errorf("WriteProfileJSON changed its argument: %q", p.Exposures[0].Arm)
	}

	p.Exposures = []profile.ExposureCount{{Experiment: "x", Arm: "control", Rows: 1}}
	buf.Reset()
	if err := WriteProfileJSON(&buf, p); err != nil {
		t.Fatal(err)
	}
	want, err := json.MarshalIndent(p, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	if got := bytes.TrimSuffix(buf.Bytes(), []byte("\n")); !bytes.Equal(got, want) {
		t.Errorf("valid names: got\n%s\nwant\n%s", got, want)
	}
}
