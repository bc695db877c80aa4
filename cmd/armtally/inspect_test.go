package main

import (
	"bytes"
	"encoding/json"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/parquet-go/parquet-go"

	"github.com/armtally/armtally/ingest/profile"
	"github.com/armtally/armtally/sampledata"
)

// TestInspectSmallCSV inspects testdata/inspect/small.csv, 14 data rows
// written by hand. Worked out by hand from the file:
//
//   - lines 13 (ts "not-a-time"), 14 (empty user) and 15 (an exposure
//     without an arm) are bad: 11 valid rows, 3 bad;
//   - exposure rows: tyre-offer/control u1 twice (2), tyre-offer/discount
//     u2 and u3 (2), saddle-test/gel u4 (1): 5;
//   - events among valid rows: exposure 5, page_view 3 (u1, u2, u3),
//     tyre_ordered 2, saddle_ordered 1; with --top 3 the last is "1 more";
//   - time range: 2027-04-01T09:00:00Z (line 2) to 2027-04-03T17:00:00Z
//     (line 12).
func TestInspectSmallCSV(t *testing.T) {
	path := filepath.Join("testdata", "inspect", "small.csv")
	jsonPath := filepath.Join(t.TempDir(), "inspect.json")
	code, stdout, stderr := runCmd(t, "inspect", path, "--top", "3", "--json", jsonPath)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	want := path + `
  format: CSV, 5 columns, 14 rows counted
  columns:
    user_id     text
    ts          text
    event       text
    experiment  text
    arm         text
  mapping:
    user        <- user_id
    ts          <- ts
    event       <- event
    experiment  <- experiment
    arm         <- arm

rows read: 14 in 1 file; 11 valid, 3 bad
  null_user: 1
  bad_timestamp: 1
  exposure_without_arm: 1
  first bad row of each reason:
time range: 2027-04-01T09:00:00Z to 2027-04-03T17:00:00Z

exposure rows (event "exposure") by experiment and arm:
  saddle-test  gel       1
  tyre-offer   control   2
  tyre-offer   discount  2
  total 5

events (4 names) by rows:
  exposure      5
  page_view     3
  tyre_ordered  2
  1 more name (1 row)
`
	// The bad-row examples are the reader's own messages; check where they
	// point and leave their wording to the reader's tests.
	var got, examples []string
	for _, line := range strings.SplitAfter(stdout, "\n") {
		if strings.HasPrefix(line, "    "+path+":") {
			examples = append(examples, line)
			continue
		}
		got = append(got, line)
	}
	if g := strings.Join(got, ""); g != want {
		t.Errorf("inspect output:\n%s\nwant:\n%s", g, want)
	}
	for i, prefix := range []string{path + `:14: column "user_id"`, path + `:13: column "ts"`, path + `:15: column "arm"`} {
		if i >= len(examples) || !strings.Contains(examples[i], prefix) {
			t.Errorf("bad-row example %d = %q, want %q", i, examples, prefix)
		}
	}

	raw, err := os.ReadFile(jsonPath)
	if err != nil {
		t.Fatal(err)
	}
	var rep profile.Report
	if err := json.Unmarshal(raw, &rep); err != nil {
		t.Fatal(err)
	}
	if rep.RowsRead != 14 || rep.ValidRows != 11 || len(rep.Events) != 4 || rep.EventsShown != 3 ||
		rep.Events[3] != (profile.EventCount{Event: "saddle_ordered", Rows: 1}) || len(rep.Exposures) != 3 ||
		!rep.First.Equal(time.Date(2027, 4, 1, 9, 0, 0, 0, time.UTC)) {
		t.Errorf("JSON report = %s", raw)
	}
}

// TestInspectMissingColumn maps the user to a column the file lacks: the
// file is still described, its 14 rows counted, the mapping says what is
// missing, and the exit code is 3.
func TestInspectMissingColumn(t *testing.T) {
	path := filepath.Join("testdata", "inspect", "small.csv")
	code, stdout, stderr := runCmd(t, "inspect", path, "--user-col", "visitor_id", "--experiment-col", "")
	if code != exitData || !strings.Contains(stderr, "rows of "+path+" were not read") {
		t.Errorf("exit %d, stderr %q; want exit %d", code, stderr, exitData)
	}
	for _, want := range []string{
		"format: CSV, 5 columns, 14 rows counted",
		`user        MISSING: no column "visitor_id"`,
		"experiment  not mapped",
		`rows not read: ` + path + `: column "visitor_id": missing column`,
		"rows read: 0 in 1 file; 0 valid, 0 bad",
	} {
		if !strings.Contains(stdout, want) {
			t.Errorf("output lacks %q:\n%s", want, stdout)
		}
	}
}

// demoRow is the demo's Parquet layout, read with parquet-go alone.
type demoRow struct {
	UserID     string  `parquet:"user_id"`
	TS         int64   `parquet:"ts"`
	Event      string  `parquet:"event"`
	Experiment *string `parquet:"experiment,optional"`
	Arm        *string `parquet:"arm,optional"`
}

// TestInspectDemo inspects the embedded demo and checks the counts against
// the generator's own summary (rows, exposure rows, time range) and
// against counts made here by reading the file with parquet-go, without
// armtally's reader.
func TestInspectDemo(t *testing.T) {
	jsonPath := filepath.Join(t.TempDir(), "demo.json")
	code, stdout, stderr := runCmd(t, "inspect", "--demo", "--json", jsonPath)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	raw, err := os.ReadFile(jsonPath)
	if err != nil {
		t.Fatal(err)
	}
	var rep profile.Report
	if err := json.Unmarshal(raw, &rep); err != nil {
		t.Fatal(err)
	}
	sum, err := sampledata.WriteDemo(io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Files) != 1 || rep.Files[0].Rows != sum.Rows || rep.Files[0].RowsFrom != "metadata" ||
		rep.RowsRead != sum.Rows || rep.ValidRows != sum.Rows {
		t.Errorf("rows: %+v; generator %d", rep.Files, sum.Rows)
	}
	if !rep.First.Equal(sum.MinTS) || !rep.Last.Equal(sum.MaxTS) {
		t.Errorf("time range %v to %v; generator %v to %v", rep.First, rep.Last, sum.MinTS, sum.MaxTS)
	}
	var exposures int64
	for _, e := range rep.Exposures {
		exposures += e.Rows
	}
	if exposures != sum.ExposureRows {
		t.Errorf("%d exposure rows; generator %d", exposures, sum.ExposureRows)
	}

	// Count events and exposures by arm with parquet-go directly.
	_, data := sampledata.Demo()
	r := parquet.NewGenericReader[demoRow](bytes.NewReader(data))
	defer r.Close()
	events := map[string]int64{}
	arms := map[string]int64{}
	buf := make([]demoRow, 1024)
	for {
		n, err := r.Read(buf)
		for _, row := range buf[:n] {
			events[row.Event]++
			if row.Event == "exposure" && row.Experiment != nil && row.Arm != nil {
				arms[*row.Experiment+"/"+*row.Arm]++
			}
		}
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	if len(rep.Events) != len(events) {
		t.Errorf("%d event names, parquet-go %d", len(rep.Events), len(events))
	}
	for _, e := range rep.Events {
		if events[e.Event] != e.Rows {
			t.Errorf("event %s: %d rows, parquet-go %d", e.Event, e.Rows, events[e.Event])
		}
	}
	if len(rep.Exposures) != len(arms) {
		t.Errorf("%d experiment/arm pairs, parquet-go %d", len(rep.Exposures), len(arms))
	}
	for _, e := range rep.Exposures {
		if arms[e.Experiment+"/"+e.Arm] != e.Rows {
			t.Errorf("exposures %s/%s: %d, parquet-go %d", e.Experiment, e.Arm, e.Rows, arms[e.Experiment+"/"+e.Arm])
		}
	}
	for _, want := range []string{"format: Parquet, 6 columns", "ts          required INT64 TIMESTAMP(isAdjustedToUTC=true,unit=MICROS)", "arm         <- arm"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("output lacks %q", want)
		}
	}
	// Same input, same bytes.
	_, again, _ := runCmd(t, "inspect", "--demo")
	if again != stdout {
		t.Error("two runs differ")
	}
}
