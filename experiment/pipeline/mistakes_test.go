package pipeline

import (
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow/memory"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// mistakesLog is the hand-made event log testdata/mistakes/two.csv (one
// key: one.csv), read with os.ReadFile. Its counts, by construction (count
// the lines): experiment checkout-flow-2026 exposes u1-u3 in control and
// u4-u5 in one-page (5 exposure rows), search-ranking exposes s1 and s2 (2
// rows); page_view has 4 rows, purchase 3, newsletter_signup 1. one.csv
// holds only the checkout-flow-2026 rows (5 exposures, purchase 3,
// page_view 2).
func mistakesLog(t *testing.T, oneKey bool) ingest.Source {
	t.Helper()
	name := "two.csv"
	if oneKey {
		name = "one.csv"
	}
	data, err := os.ReadFile(filepath.Join("testdata", "mistakes", name))
	if err != nil {
		t.Fatal(err)
	}
	return ingest.BytesSource(name, data)
}

// mistakeSpec is the experiment the log holds, with one metric.
func mistakeSpec() experiment.Spec {
	return experiment.Spec{Key: "checkout-flow-2026", ExposureEvent: "exposure", Control: "control",
		Metrics: []experiment.Metric{{Name: "purchase", Events: []string{"purchase"}, Window: 24 * time.Hour}}}
}

// nc is a shorthand for the listings, and n makes one entry.
type nc = experiment.NameCount

func n(name string, count int64) nc { return nc{Name: name, Count: count} }

// TestRunNotInData runs each mistake through Run, in memory and spilled,
// and checks the typed error: its kind, the missing names with their
// suggestion, and the listing with the counts of the log's construction.
func TestRunNotInData(t *testing.T) {
	events := []nc{n("exposure", 7), n("page_view", 4), n("purchase", 3), n("newsletter_signup", 1)}
	keys := []nc{n("checkout-flow-2026", 5), n("search-ranking", 2)}
	arms := []nc{n("control", 3), n("one-page", 2)}
	guard := experiment.Margin{Value: 0.01}
	cases := []struct {
		name    string
		oneKey  bool
		edit    func(*Experiment)
		kind    MismatchKind
		missing []Missing
		held    []nc
		per     string
	}{
		{"key not found", false, func(e *Experiment) { e.Spec.Key = "checkout-flow" }, MismatchExperimentKey,
			[]Missing{{"checkout-flow", "experiment key", "checkout-flow-2026"}}, keys, "exposure rows"},
		{"several keys", false, func(e *Experiment) { e.Spec.Key = "" }, MismatchSeveralKeys, nil, keys, "exposure rows"},
		{"exposure event", false, func(e *Experiment) { e.Spec.ExposureEvent = "exposed" }, MismatchExposureEvent,
			[]Missing{{"exposed", "exposure event", ""}}, events, "rows"},
		{"control", true, func(e *Experiment) { e.Spec.Control = "Control" }, MismatchArm,
			[]Missing{{"Control", "control", "control"}}, arms, "exposed units in the analysis window"},
		{"planned arm", true, func(e *Experiment) { e.Spec.Arms = []string{"control", "one-page", "saved-basket"} }, MismatchArm,
			[]Missing{{"saved-basket", "planned arm", ""}}, arms, "exposed units in the analysis window"},
		{"metric event", false, func(e *Experiment) { e.Spec.Metrics[0].Events = []string{"purchses"} }, MismatchEvent,
			[]Missing{{"purchses", `event of metric "purchase"`, "purchase"}}, events, "rows"},
		{"guardrail event", false, func(e *Experiment) {
			e.Spec.Metrics = append(e.Spec.Metrics, experiment.Metric{Name: "refunds", Events: []string{"purchase", "refund"}, Guardrail: &guard})
		}, MismatchEvent, []Missing{{"refund", `event of guardrail "refunds"`, ""}}, events, "rows"},
	}
	for _, tc := range cases {
		for _, limit := range []int64{0, 1 << 20} {
			e := Experiment{Spec: mistakeSpec(), Options: experiment.DefaultAnalysisOptions()}
			tc.edit(&e)
			_, err := Run(context.Background(), Input{Sources: []ingest.Source{mistakesLog(t, tc.oneKey)}}, []Experiment{e}, Options{MemoryLimit: limit})
			var de *DataError
			var nd *NotInDataError
			if !errors.As(err, &de) || !errors.As(err, &nd) {
				t.Errorf("%s (memory limit %d): error %v, want a *NotInDataError in a *DataError", tc.name, limit, err)
				continue
			}
			if nd.Kind != tc.kind || !reflect.DeepEqual(nd.Missing, tc.missing) || !reflect.DeepEqual(nd.Held, tc.held) || nd.Per != tc.per {
				t.Errorf("%s (memory limit %d): got kind %d, missing %+v, held %v (%s); want %d, %+v, %v (%s)", tc.name, limit,
					nd.Kind, nd.Missing, nd.Held, nd.Per, tc.kind, tc.missing, tc.held, tc.per)
			}
			// The message lists what the log holds, with the counts.
			for _, h := range tc.held {
				if line := fmt.Sprintf("%q", h.Name); !strings.Contains(err.Error(), line) || !strings.Contains(err.Error(), fmt.Sprint(h.Count)) {
					t.Errorf("%s: message %q does not list %s %d", tc.name, err, line, h.Count)
				}
			}
		}
	}
}

// TestRunOneKey analyses a log of one experiment without a key under that
// key, and lets an allowed absent event through with zero conversions.
func TestRunOneKey(t *testing.T) {
	e := Experiment{Spec: mistakeSpec(), Options: experiment.DefaultAnalysisOptions()}
	e.Spec.Key = ""
	e.Spec.Metrics = append(e.Spec.Metrics, experiment.Metric{Name: "refunds", Events: []string{"refund"}})
	e.AllowAbsentEvents = []string{"refund"}
	res, err := Run(context.Background(), Input{Sources: []ingest.Source{mistakesLog(t, true)}}, []Experiment{e}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	r := res.Readouts[0]
	if r.Experiment != "checkout-flow-2026" {
		t.Errorf("readout experiment %q, want checkout-flow-2026", r.Experiment)
	}
	// By construction: 3 control and 2 one-page units, no refund rows.
	for _, a := range r.Metrics[1].Arms {
		if a.Conversions != 0 {
			t.Errorf("refunds, arm %s: %d conversions, want 0", a.Arm, a.Conversions)
		}
	}
	if got := []int64{r.Arms[0].Units, r.Arms[1].Units}; !reflect.DeepEqual(got, []int64{3, 2}) {
		t.Errorf("units %v, want [3 2]", got)
	}
}

// TestRunAllowUnknownEvent refuses an allowance for an event no metric
// counts, before anything is read.
func TestRunAllowUnknownEvent(t *testing.T) {
	e := Experiment{Spec: mistakeSpec(), Options: experiment.DefaultAnalysisOptions(), AllowAbsentEvents: []string{"refund"}}
	_, err := Run(context.Background(), Input{Sources: []ingest.Source{mistakesLog(t, true)}}, []Experiment{e}, Options{})
	var ce *ConfigError
	if !errors.As(err, &ce) || !strings.Contains(err.Error(), `"refund"`) {
		t.Errorf("error %v, want a ConfigError naming refund", err)
	}
}

// TestRunNotInDataArrowStream: a stream cannot be read twice, so the
// error says so instead of listing the event names.
func TestRunNotInDataArrowStream(t *testing.T) {
	_, _, cfg, _ := genData(t, 200, false)
	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	rr := arrowStream(t, mem, cfg, 5000)
	defer rr.Release()
	exps := oneExperiment(cfg)
	exps[0].Spec.Metrics[0].Events = []string{"purchses"}
	in := Input{Records: rr, Mapping: ingest.Mapping{User: "visitor", TS: "at", Event: "what", Experiment: "test", Arm: "variant"}}
	_, err := Run(context.Background(), in, exps, Options{})
	var nd *NotInDataError
	if !errors.As(err, &nd) || nd.Kind != MismatchEvent || nd.Note == "" || len(nd.Held) != 0 {
		t.Fatalf("error %v, want a *NotInDataError with a note and no listing", err)
	}
	if !strings.Contains(err.Error(), "Arrow record stream") {
		t.Errorf("message %q does not say why nothing is listed", err)
	}
}

// TestRunNotInDataTables: the control and planned arms of a unit table
// and a counts table (hand-made; counts by construction).
func TestRunNotInDataTables(t *testing.T) {
	units := ingest.BytesSource("units.csv", []byte("unit,variant,booked\nu1,classic,1\nu2,classic,0\nu3,one-step,1\n"))
	counts := ingest.BytesSource("counts.csv", []byte("variant,metric,units,conversions\nclassic,booked,200,20\none-step,booked,210,30\n"))
	spec := experiment.Spec{Key: "booking-form", Control: "classic", Arms: []string{"classic", "one-step", "two-step"},
		Metrics: []experiment.Metric{{Name: "booked"}}}
	cases := []struct {
		name string
		in   Input
		held []nc
		per  string
	}{
		{"units", Input{Sources: []ingest.Source{units}, Shape: experiment.InputUnitTable,
			Mapping: ingest.Mapping{User: "unit", Arm: "variant"}}, []nc{n("classic", 2), n("one-step", 1)}, "units in the analysis window"},
		{"counts", Input{Sources: []ingest.Source{counts}, Shape: experiment.InputCounts, Mapping: ingest.Mapping{Arm: "variant"},
			Counts: ingest.CountsOptions{Metric: "metric", Units: "units", Conversions: "conversions"}}, []nc{n("one-step", 210), n("classic", 200)}, "units"},
	}
	for _, tc := range cases {
		for _, control := range []string{"classic", "classik"} {
			s := spec
			s.Control = control
			s.Arms = append([]string{control}, spec.Arms[1:]...)
			want := []Missing{{"two-step", "planned arm", ""}}
			if control == "classik" {
				want = []Missing{{"classik", "control", "classic"}, {"two-step", "planned arm", ""}}
			}
			_, err := Run(context.Background(), tc.in, []Experiment{{Spec: s, Options: experiment.DefaultAnalysisOptions()}}, Options{})
			var nd *NotInDataError
			if !errors.As(err, &nd) {
				t.Errorf("%s, control %s: error %v, want a *NotInDataError", tc.name, control, err)
				continue
			}
			if nd.Kind != MismatchArm || !reflect.DeepEqual(nd.Missing, want) || !reflect.DeepEqual(nd.Held, tc.held) || nd.Per != tc.per {
				t.Errorf("%s, control %s: got %d %+v %v (%s); want arms, %+v, %v (%s)", tc.name, control, nd.Kind, nd.Missing, nd.Held, nd.Per, want, tc.held, tc.per)
			}
		}
	}
}

// TestNotInDataMessage checks the listing's layout: the first heldShown
// names, then how many more and their total (common practice).
func TestNotInDataMessage(t *testing.T) {
	var held []nc
	for i := range 15 {
		held = append(held, nc{Name: fmt.Sprintf("e%02d", i), Count: int64(2000 - i)})
	}
	err := &NotInDataError{Experiment: "x", Kind: MismatchEvent, Missing: []Missing{{"buy", `event of metric "buy"`, ""}},
		Held: held, Of: "event names", Per: "rows"}
	msg := err.Error()
	for _, want := range []string{
		`experiment "x": the event of metric "buy", "buy", occurs in no row of the input`,
		"the input holds these event names (rows):\n  \"e00\"  2,000\n",
		"\n  \"e11\"  1,989\n  and 3 more (5,961 rows)", // 1988 + 1987 + 1986
	} {
		if !strings.Contains(msg, want) {
			t.Errorf("message\n%s\ndoes not contain %q", msg, want)
		}
	}
	if strings.Contains(msg, "e12") {
		t.Errorf("message lists more than %d names:\n%s", heldShown, msg)
	}
}

// TestGroupDigits checks the thousands separators (common practice).
func TestGroupDigits(t *testing.T) {
	for n, want := range map[int64]string{0: "0", 999: "999", 1000: "1,000", 1234567: "1,234,567", 1000005: "1,000,005",
		-1234: "-1,234", math.MinInt64: "-9,223,372,036,854,775,808"} {
		if got := groupDigits(n); got != want {
			t.Errorf("groupDigits(%d) = %q, want %q", n, got, want)
		}
	}
}
