package pipeline

import (
	"context"
	"fmt"
	"slices"
	"strings"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// severalKeys is a key-less experiment whose exposure rows carry several
// keys; Run turns it into a *NotInDataError with their counts.
type severalKeys struct{ keys []string }

func (e *severalKeys) Error() string {
	return fmt.Sprintf("exposure rows carry %d experiment keys (%s): choose one", len(e.keys), strings.Join(e.keys, ", "))
}

// checkKeys returns a *severalKeys when the key-less tallier tl has seen
// the keys of several experiments, before its Tally refuses them.
func checkKeys(tl *experiment.Tallier, seen []string) ([]string, error) {
	for _, k := range tl.ExperimentKeys() {
		if !slices.Contains(seen, k) {
			seen = append(seen, k)
		}
	}
	if len(seen) > 1 {
		slices.Sort(seen)
		return seen, &severalKeys{seen}
	}
	return seen, nil
}

// addRows adds the tallier's rows per metric event to rows (nil: none
// yet) and returns the sum.
func addRows(rows []experiment.NameCount, tl *experiment.Tallier) []experiment.NameCount {
	got := tl.MetricEventRows()
	if rows == nil {
		return got
	}
	for i := range rows {
		rows[i].Count += got[i].Count
	}
	return rows
}

// inventory checks each experiment's tally against the names its settings
// give, and lists what the input holds when a check fails. The listing of
// experiment keys and event names reads the input a second time, without
// the event filter, only then: a run whose names are all found pays
// nothing for it.
type inventory struct {
	ctx     context.Context
	in      Input
	exps    []Experiment
	workers int
	// listed says whether keys, events and note hold the second read's
	// counts.
	listed bool
	keys   []experiment.NameCount // experiment keys on exposure rows, by rows
	events []experiment.NameCount // event names, by rows
	note   string                 // why the input's names are not listed
}

// check returns a *NotInDataError when the tally of experiment i lacks a
// name its settings give: the experiment key or the exposure event (no
// exposure row of the experiment at all), the control or a planned arm,
// or an event of a metric (rows holds the rows of each metric event; nil
// for a table).
func (v *inventory) check(i int, t experiment.Tally, rows []experiment.NameCount) error {
	e := v.exps[i]
	spec := e.Spec
	if v.in.Shape == experiment.InputEventLog && t.Diag.ExposureRows == 0 {
		if err := v.list(); err != nil {
			return err
		}
		if spec.Key != "" && t.Diag.OtherExperimentRows > 0 {
			return v.notHeld(spec.Key, MismatchExperimentKey, "experiment keys", "exposure rows", v.keys,
				Missing{Name: spec.Key, Role: "experiment key"})
		}
		return v.notHeld(spec.Key, MismatchExposureEvent, "event names", "rows", v.events,
			Missing{Name: spec.ExposureEvent, Role: "exposure event"})
	}
	if err := checkArms(spec, t); err != nil {
		return err
	}
	var missing []Missing
	for _, m := range spec.Metrics {
		role := fmt.Sprintf("event of metric %q", m.Name)
		if m.Guardrail != nil {
			role = fmt.Sprintf("event of guardrail %q", m.Name)
		}
		for _, ev := range m.Events {
			if slices.Contains(e.AllowAbsentEvents, ev) || slices.ContainsFunc(missing, func(x Missing) bool { return x.Name == ev }) {
				continue
			}
			if k := slices.IndexFunc(rows, func(r experiment.NameCount) bool { return r.Name == ev }); k >= 0 && rows[k].Count == 0 {
				missing = append(missing, Missing{Name: ev, Role: role})
			}
		}
	}
	if len(missing) == 0 {
		return nil
	}
	if err := v.list(); err != nil {
		return err
	}
	return v.notHeld(spec.Key, MismatchEvent, "event names", "rows", v.events, missing...)
}

// notHeld returns the error of the missing names, with suggestions from
// held.
func (v *inventory) notHeld(key string, kind MismatchKind, of, per string, held []experiment.NameCount, missing ...Missing) error {
	names := make([]string, len(held))
	for i, h := range held {
		names[i] = h.Name
	}
	for i := range missing {
		missing[i].Suggestion = experiment.Closest(missing[i].Name, names)
	}
	if !v.listed {
		per = ""
	}
	return &NotInDataError{Experiment: key, Kind: kind, Missing: missing, Held: held, Of: of, Per: per, Note: v.note}
}

// severalKeys returns the error of a key-less experiment over the
// exposure rows of the keys.
func (v *inventory) severalKeys(keys []string) error {
	if err := v.list(); err != nil {
		return err
	}
	held := v.keys
	per := "exposure rows"
	if !v.listed {
		held, per = nil, ""
		for _, k := range keys {
			held = append(held, experiment.NameCount{Name: k})
		}
	}
	return &NotInDataError{Kind: MismatchSeveralKeys, Held: held, Of: "experiment keys", Per: per, Note: v.note}
}

// checkArms returns a *NotInDataError when the control or a planned arm
// has no units in the tally: an arm is never made up with zero counts.
// The arms that have units are listed most first.
func checkArms(spec experiment.Spec, t experiment.Tally) error {
	held := experiment.ArmsWithUnits(t)
	slices.SortFunc(held, compareCounts)
	has := func(name string) bool {
		return slices.ContainsFunc(held, func(h experiment.NameCount) bool { return h.Name == name })
	}
	var missing []Missing
	if !has(spec.Control) {
		missing = append(missing, Missing{Name: spec.Control, Role: "control"})
	}
	for _, a := range spec.Arms {
		if a != spec.Control && !has(a) {
			missing = append(missing, Missing{Name: a, Role: "planned arm"})
		}
	}
	if len(missing) == 0 {
		return nil
	}
	names := make([]string, len(held))
	for i, h := range held {
		names[i] = h.Name
	}
	for i := range missing {
		if s := experiment.Closest(missing[i].Name, names); s != spec.Control && !slices.Contains(spec.Arms, s) {
			missing[i].Suggestion = s
		}
	}
	per, note := "exposed units in the analysis window", ""
	switch t.Input {
	case experiment.InputCounts:
		per = "units"
	case experiment.InputUnitTable:
		per = "units in the analysis window"
	}
	if n := t.Diag.ExposuresOutsideWindow; n > 0 {
		note = fmt.Sprintf("%s exposure rows of the experiment fall outside the analysis window", groupDigits(n))
		if n == 1 {
			note = "1 exposure row of the experiment falls outside the analysis window"
		}
	}
	return &NotInDataError{Experiment: spec.Key, Kind: MismatchArm, Missing: missing, Held: held, Of: "arms", Per: per, Note: note}
}

// list reads the input a second time, once, for its experiment keys and
// event names. An Arrow record stream cannot be read again: its names
// stay unlisted, and the note says why.
func (v *inventory) list() error {
	if v.listed || v.note != "" {
		return nil
	}
	if v.in.Records != nil {
		v.note = "an Arrow record stream is read once, so its names cannot be listed"
		return nil
	}
	srcs, err := sources(v.in)
	if err != nil {
		return err
	}
	opts := eventOptions(v.in, mappingOf(v.in), v.exps, nil, v.workers)
	opts.PlannedArms, opts.MaxBadRows, opts.MaxBadShare = nil, ingest.NoLimit, 0
	r, err := ingest.NewReader(srcs, opts)
	if err != nil {
		return &DataError{fmt.Errorf("listing what the input holds: %w", err)}
	}
	defer r.Close()
	keys, events := map[string]int64{}, map[string]int64{}
	for r.Next() {
		if err := v.ctx.Err(); err != nil {
			return err
		}
		countNames(r.RecordBatch(), opts.ExposureEvent, keys, events)
	}
	if err := r.Err(); err != nil {
		return &DataError{fmt.Errorf("listing what the input holds: %w", err)}
	}
	v.keys, v.events, v.listed = byCount(keys), byCount(events), true
	if len(v.events) == 0 {
		v.note = "it has no valid rows"
	}
	return nil
}

// countNames counts the rows of rec by event name, and its exposure rows
// by experiment key (a null or missing key is "").
func countNames(rec arrow.RecordBatch, exposure string, keys, events map[string]int64) {
	col := func(name string) *array.String {
		if idx := rec.Schema().FieldIndices(name); len(idx) > 0 {
			c, _ := rec.Column(idx[0]).(*array.String)
			return c
		}
		return nil
	}
	ev, ex := col(experiment.ColEvent), col(experiment.ColExperiment)
	if ev == nil {
		return
	}
	for i := range int(rec.NumRows()) {
		name := ev.Value(i)
		events[name]++
		if name == exposure {
			key := ""
			if ex != nil && ex.IsValid(i) {
				key = ex.Value(i)
			}
			keys[key]++
		}
	}
}

// byCount returns the counts, most first, then by name.
func byCount(m map[string]int64) []experiment.NameCount {
	out := make([]experiment.NameCount, 0, len(m))
	for k, n := range m {
		out = append(out, experiment.NameCount{Name: k, Count: n})
	}
	slices.SortFunc(out, compareCounts)
	return out
}

// compareCounts orders counts most first, then by name.
func compareCounts(a, b experiment.NameCount) int {
	if a.Count != b.Count {
		if a.Count > b.Count {
			return -1
		}
		return 1
	}
	return strings.Compare(a.Name, b.Name)
}
