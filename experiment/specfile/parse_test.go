package specfile

import (
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/stats"
	"github.com/armtally/armtally/ingest"
)

// TestParseErrors parses every file in testdata/bad. Each starts with a
// comment "# want: TEXT" giving the start of the error it must produce;
// the line numbers in TEXT were counted by hand in the file.
func TestParseErrors(t *testing.T) {
	files, err := filepath.Glob(filepath.Join("testdata", "bad", "*.toml"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no bad spec files: %v", err)
	}
	for _, path := range files {
		data, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		first, _, _ := strings.Cut(string(data), "\n")
		want, ok := strings.CutPrefix(first, "# want: ")
		if !ok {
			t.Fatalf("%s: first line is not '# want: ...'", path)
		}
		_, err = Parse(filepath.Base(path), data)
		if err == nil {
			t.Errorf("%s: parsed without error, want %q", path, want)
			continue
		}
		if !strings.HasPrefix(err.Error(), want) {
			t.Errorf("%s:\n got  %q\n want %q...", path, err.Error(), want)
		}
	}
}

// TestExampleSpec parses the annotated example and checks the values it
// sets, read off the file itself, and that it documents every key.
func TestExampleSpec(t *testing.T) {
	path := filepath.Join("testdata", "example.toml")
	sf, err := Read(path)
	if err != nil {
		t.Fatal(err)
	}
	dir := "testdata"
	if got, want := sf.Paths, []string{filepath.Join(dir, "exports/2027-03")}; !slices.Equal(got, want) {
		t.Errorf("paths = %q, want %q (relative to the file's folder)", got, want)
	}
	wantMapping := ingest.Mapping{User: "visitor_id", TS: "event_time", Event: "event_name", Experiment: "test_key",
		Arm: "variant", EpochUnit: "ms", Segments: []string{"platform", "city_size"}}
	if m := sf.Mapping; m.User != wantMapping.User || m.TS != wantMapping.TS || m.Event != wantMapping.Event ||
		m.Experiment != wantMapping.Experiment || m.Arm != wantMapping.Arm || m.EpochUnit != wantMapping.EpochUnit ||
		!slices.Equal(m.Segments, wantMapping.Segments) || !sf.TSMapped {
		t.Errorf("mapping = %+v (ts mapped %v), want %+v", m, sf.TSMapped, wantMapping)
	}
	if sf.Markdown != filepath.Join(dir, "readout.md") || sf.JSON != filepath.Join(dir, "readout.json") ||
		sf.Audit != filepath.Join(dir, "audit.parquet") ||
		sf.FailOnSampleRatio == nil || !*sf.FailOnSampleRatio {
		t.Errorf("output = %q, %q, %v", sf.Markdown, sf.JSON, sf.FailOnSampleRatio)
	}
	if err := sf.Unsupported(); err != nil {
		t.Errorf("the example uses a key that is not supported yet: %v", err)
	}
	if len(sf.Experiments) != 2 {
		t.Fatalf("%d experiments, want 2", len(sf.Experiments))
	}
	checkExampleExperiments(t, sf)

	// Every key is shown in the example (set, or commented out where a
	// value would need another shape or a feature still being built), and
	// Help ends with the example.
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasSuffix(Help(), string(data)) {
		t.Errorf("Help does not end with the example")
	}
	tables := map[string]bool{"input": true, "columns": true, "output": true, "experiment": true, "experiment.metric": true}
	for _, key := range documentedKeys() {
		if tables[key] {
			if !strings.Contains(string(data), "["+key+"]") {
				t.Errorf("example.toml has no table %s", key)
			}
			continue
		}
		name := key[strings.LastIndexByte(key, '.')+1:]
		re := regexp.MustCompile(`(?m)^(# )?` + regexp.QuoteMeta(name) + ` = `)
		if !re.MatchString(string(data)) {
			t.Errorf("example.toml does not show %s", key)
		}
	}
}

// checkExampleExperiments checks the two experiments of the example
// against the values written in it.
func checkExampleExperiments(t *testing.T, sf *File) {
	t.Helper()
	spec, opts, err := sf.Experiments[0].Build()
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2027, 3, 1, 0, 0, 0, 0, time.UTC)
	end := time.Date(2027, 3, 29, 0, 0, 0, 0, time.UTC)
	if spec.Key != "booking-form-2027" || spec.ExposureEvent != "assigned" || spec.Control != "classic-form" ||
		!slices.Equal(spec.Arms, []string{"classic-form", "one-step-form", "calendar-first"}) ||
		!slices.Equal(spec.Split, []float64{50, 25, 25}) ||
		spec.Start == nil || !spec.Start.Equal(start) || spec.End == nil || !spec.End.Equal(end) ||
		spec.MultiArm != experiment.MultiArmExclude || spec.Maturity != experiment.MaturityExclude ||
		!slices.Equal(spec.Segments, []string{"platform"}) {
		t.Errorf("experiment[0] = %+v", spec)
	}
	if opts.Stats.Alpha != 0.05 || opts.Stats.Alternative != stats.TwoSided || opts.Adjust != stats.Holm ||
		opts.Interval != experiment.IntervalWilson || opts.Difference != experiment.DifferenceNewcombe ||
		opts.NonInferiority != stats.FarringtonManning || opts.Stats.MinCount != 5 || opts.SampleRatioThreshold != 0.001 {
		t.Errorf("experiment[0] options = %+v", opts)
	}
	// Metrics: the primary one first. 0.5pp is 0.005 and 30% is 0.3 by
	// definition; 7d is 168 hours.
	if len(spec.Metrics) != 3 {
		t.Fatalf("metrics = %+v", spec.Metrics)
	}
	booked, signedUp, cancelled := spec.Metrics[0], spec.Metrics[1], spec.Metrics[2]
	if booked.Name != "booked" || !slices.Equal(booked.Events, []string{"booking_confirmed"}) || booked.Window != 168*time.Hour ||
		booked.Target == nil || *booked.Target != 0.3 || booked.LowerIsBetter || booked.Guardrail != nil {
		t.Errorf("booked = %+v", booked)
	}
	if signedUp.Name != "signed_up" || !slices.Equal(signedUp.Events, []string{"account_created", "newsletter_joined"}) ||
		signedUp.Window != 72*time.Hour || signedUp.Target != nil || signedUp.Guardrail != nil {
		t.Errorf("signed_up = %+v", signedUp)
	}
	if cancelled.Name != "cancelled" || cancelled.Window != 14*24*time.Hour || !cancelled.LowerIsBetter ||
		cancelled.Guardrail == nil || *cancelled.Guardrail != (experiment.Margin{Value: 0.005}) {
		t.Errorf("cancelled = %+v", cancelled)
	}
	spec2, _, err := sf.Experiments[1].Build()
	if err != nil {
		t.Fatal(err)
	}
	if spec2.Key != "reminder-sms-2027" || len(spec2.Split) != 0 || !spec2.Start.Equal(time.Date(2027, 3, 8, 0, 0, 0, 0, time.UTC)) ||
		len(spec2.Metrics) != 1 || spec2.Metrics[0].Window != 72*time.Hour {
		t.Errorf("experiment[1] = %+v", spec2)
	}
}

// TestUnsupported checks that keys whose feature is still being built are
// refused with "not supported yet: KEY" and the line, and that the values
// armtally uses anyway are accepted.
func TestUnsupported(t *testing.T) {
	const eventsExperiment = "\n[[experiment]]\nkey = \"bike-bell-2027\"\n[[experiment.metric]]\nname = \"rang\"\nevents = [\"bell_rung\"]\n"
	const tableExperiment = "\n[[experiment]]\nkey = \"bike-bell-2027\"\n[[experiment.metric]]\nname = \"rang\"\n"
	cases := []struct {
		name, text, want string
	}{
		{"budget of a table", "[input]\nshape = \"counts\"\nmax_bad_rows = 5\n" + tableExperiment, "s.toml:3: not supported yet: input.max_bad_rows"},
		{"share of a table", "[input]\nshape = \"units\"\nmax_bad_share = 0.5\n" + tableExperiment, "s.toml:3: not supported yet: input.max_bad_share"},
		{"delimiter of a table", "[input]\nshape = \"units\"\ndelimiter = \";\"\n" + tableExperiment, "s.toml:3: not supported yet: input.delimiter"},
		{"defaults", "[input]\nshape = \"events\"\ndelimiter = \",\"\nmax_bad_rows = 0\nmax_bad_share = 0.0\n" + eventsExperiment, ""},
		{"comma of a table", "[input]\nshape = \"units\"\ndelimiter = \",\"\n" + tableExperiment, ""},
	}
	for _, tc := range cases {
		sf, err := Parse("s.toml", []byte(tc.text))
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		err = sf.Unsupported()
		if tc.want == "" && err != nil {
			t.Errorf("%s: refused: %v", tc.name, err)
		}
		if tc.want != "" && (err == nil || !strings.HasPrefix(err.Error(), tc.want)) {
			t.Errorf("%s: error %v, want %q", tc.name, err, tc.want)
		}
	}
}

// TestCheckPartitions checks that a source without a folder of a
// partition column is named with the key and the line of the setting.
func TestCheckPartitions(t *testing.T) {
	sf, err := Parse("s.toml", []byte("[input]\npartition_columns = [\"dt\"]\n"))
	if err != nil {
		t.Fatal(err)
	}
	good := ingest.Source{Name: "exports/dt=2027-03-01/a.csv", Partitions: []ingest.Partition{{Key: "dt", Value: "2027-03-01"}}}
	bad := ingest.Source{Name: "exports/b.csv"}
	if err := sf.CheckPartitions([]ingest.Source{good}); err != nil {
		t.Errorf("a source with the folder: %v", err)
	}
	want := "exports/b.csv: no partition folder dt=... on its path (input.partition_columns at s.toml:2; its partitions: none)"
	if err := sf.CheckPartitions([]ingest.Source{good, bad}); err == nil || err.Error() != want {
		t.Errorf("error %v, want %q", err, want)
	}
}
