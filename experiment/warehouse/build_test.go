package warehouse

import (
	"flag"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
)

var update = flag.Bool("update", false, "rewrite the golden files")

func at(s string) *time.Time {
	t, err := time.Parse(time.RFC3339, s)
	if err != nil {
		panic(err)
	}
	return &t
}

// goldenDefinition is the definition of the golden files: two
// experiments, a window, both policies, segments, several metrics with
// several events, windows in seconds and in microseconds.
func goldenDefinition() Definition {
	return Definition{
		Table:   []string{"analytics", "events"},
		Columns: Columns{User: "user_id", TS: "ts", Event: "event", Experiment: "experiment", Arm: "arm"},
		Experiments: []experiment.Spec{{
			Key: "checkout-2026", ExposureEvent: "exposure", Control: "control", Arms: []string{"control", "one-page"},
			Start: at("2026-11-02T00:00:00Z"), End: at("2026-11-23T00:00:00Z"),
			Metrics: []experiment.Metric{
				{Name: "purchase", Events: []string{"purchase"}, Window: 7 * 24 * time.Hour},
				{Name: "engaged", Events: []string{"signup", "share"}, Window: 1500 * time.Millisecond},
			},
			Segments: []string{"platform"},
		}, {
			Key: "search-ranking", ExposureEvent: "exposure", Control: "baseline",
			MultiArm: experiment.MultiArmFirst, Maturity: experiment.MaturityInclude,
			Metrics: []experiment.Metric{{Name: "signup", Events: []string{"signup"}, Window: 3 * 24 * time.Hour}},
		}},
	}
}

// hostileDefinition is a definition whose every name needs quoting.
func hostileDefinition() Definition {
	return Definition{
		Table:   []string{`sch"ema;`, "ta`ble'\\"},
		Columns: Columns{User: `u'ser"`, TS: "t`s", Event: `ev\ent`, Experiment: "exp;--", Arm: "a/*rm"},
		Experiments: []experiment.Spec{{
			Key: `k'ey"; DROP TABLE t; --`, ExposureEvent: `ex\'po`, Control: `c"on`, Arms: []string{`c"on`, "tr`t", "日本\n"},
			Start:    at("2026-11-02T00:00:00Z"),
			Metrics:  []experiment.Metric{{Name: `m'; --`, Events: []string{`e1\`, "e2`;", `e3"/*`}, Window: time.Hour}},
			Segments: []string{`s'eg"; DROP`},
		}},
	}
}

// TestGolden renders the golden definition in every dialect and compares
// it with testdata/DIALECT.sql below the file's header (the
// documentation pages each dialect's forms were checked against);
// -update rewrites the query part and keeps the header.
func TestGolden(t *testing.T) {
	q, err := Build(goldenDefinition())
	if err != nil {
		t.Fatal(err)
	}
	const marker = "-- armtally:"
	for d := DuckDB; d <= Snowflake; d++ {
		text, err := q.SQL(d)
		if err != nil {
			t.Fatal(err)
		}
		path := filepath.Join("testdata", d.String()+".sql")
		old, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		i := strings.Index(string(old), marker)
		if i < 0 {
			t.Fatalf("%s: no %q line", path, marker)
		}
		header := string(old[:i])
		if !strings.Contains(header, "https://") {
			t.Errorf("%s: the header names no documentation page", path)
		}
		if *update {
			if err := os.WriteFile(path, []byte(header+text+";\n"), 0o644); err != nil {
				t.Fatal(err)
			}
			continue
		}
		if got, want := text+";\n", string(old[i:]); got != want {
			t.Errorf("%s differs from the rendered query (go test ./experiment/warehouse -update, then read the diff):\n%s", path, got)
		}
	}
}

func TestBuildErrors(t *testing.T) {
	base := goldenDefinition
	tests := []struct {
		name   string
		change func(*Definition)
		want   string
	}{
		{"no table", func(d *Definition) { d.Table = nil }, "no table named"},
		{"empty table part", func(d *Definition) { d.Table = []string{"a", ""} }, "empty part"},
		{"no user column", func(d *Definition) { d.Columns.User = "" }, "no user column"},
		{"no arm column", func(d *Definition) { d.Columns.Arm = "" }, "no arm column"},
		{"no experiments", func(d *Definition) { d.Experiments = nil }, "no experiments"},
		{"two exposure events", func(d *Definition) { d.Experiments[1].ExposureEvent = "seen" }, "different exposure events"},
		{"same key twice", func(d *Definition) { d.Experiments[1].Key = d.Experiments[0].Key }, "appears twice"},
		{"metric counts the exposure", func(d *Definition) { d.Experiments[0].Metrics[0].Events = []string{"exposure"} }, "counts the exposure event"},
		{"segment named like a result column", func(d *Definition) { d.Experiments[0].Segments = []string{"Units"} }, "result column"},
		{"invalid UTF-8", func(d *Definition) { d.Experiments[0].Arms[1] = "a\xff" }, "not valid UTF-8"},
		{"NUL", func(d *Definition) { d.Columns.Event = "ev\x00" }, "NUL"},
	}
	for _, tc := range tests {
		def := base()
		tc.change(&def)
		_, err := Build(def)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: got %v, want an error containing %q", tc.name, err, tc.want)
		}
	}
}

// TestWindowUnits checks the windows each dialect can express: whole
// microseconds everywhere, whole milliseconds in Trino (date_add has no
// microsecond unit).
func TestWindowUnits(t *testing.T) {
	for _, tc := range []struct {
		w     time.Duration
		d     Dialect
		ok    bool
		wants string
	}{
		{7 * 24 * time.Hour, PostgreSQL, true, "INTERVAL '604800 seconds'"},
		{1500 * time.Microsecond, DuckDB, true, "INTERVAL '1500 microseconds'"},
		{1500 * time.Nanosecond, DuckDB, false, "microseconds"},
		{1500 * time.Millisecond, Trino, true, "date_add('millisecond', 1500, x)"},
		{1500 * time.Microsecond, Trino, false, "milliseconds"},
		{1500 * time.Millisecond, SparkSQL, true, "INTERVAL '1.500000' SECOND"},
		{3 * time.Second, BigQuery, true, "TIMESTAMP_ADD(x, INTERVAL 3 SECOND)"},
		{1500 * time.Microsecond, Snowflake, true, "DATEADD(microsecond, 1500, x)"},
	} {
		got, err := tc.d.addDuration("x", tc.w)
		if tc.ok && (err != nil || !strings.Contains(got, tc.wants)) {
			t.Errorf("%v %v: got %q, %v; want %q", tc.d, tc.w, got, err, tc.wants)
		}
		if !tc.ok && (err == nil || !strings.Contains(err.Error(), tc.wants)) {
			t.Errorf("%v %v: got %q, %v; want an error about %s", tc.d, tc.w, got, err, tc.wants)
		}
	}
}

func TestParseDialect(t *testing.T) {
	for _, n := range Dialects() {
		d, err := ParseDialect(n)
		if err != nil || d.String() != n {
			t.Errorf("%s: got %v, %v", n, d, err)
		}
	}
	if _, err := ParseDialect("mysql"); err == nil {
		t.Error("mysql: no error")
	}
}
