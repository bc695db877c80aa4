// Package monitor computes the state of an experiment read night after
// night: each comparison's sequential test over the looks in its history
// (group-sequential boundaries from alpha spending, or the always-valid
// mixture test), the progress toward the planned units and what changed
// since the previous look. It turns a readout and the earlier looks of
// experiment/history into an experiment.Monitoring, and the readout into
// the history.Look to store. It reads and writes no file.
package monitor

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/history"
	"github.com/armtally/armtally/experiment/sequential"
)

// Method is a metric's sequential method.
type Method int

const (
	// Fixed is no sequential test: the fixed-horizon analysis alone.
	Fixed Method = iota
	// OBrienFleming is a group-sequential test with O'Brien-Fleming-type
	// spending; Pocock with Pocock-type spending.
	OBrienFleming
	Pocock
	// Mixture is the always-valid mixture sequential probability ratio
	// test with its confidence sequence.
	Mixture
)

// ParseMethod reads obf, pocock, mixture or fixed.
func ParseMethod(s string) (Method, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "obf", "obrien-fleming":
		return OBrienFleming, nil
	case "pocock":
		return Pocock, nil
	case "mixture":
		return Mixture, nil
	case "fixed", "none":
		return Fixed, nil
	}
	return Fixed, fmt.Errorf("sequential method %q: want obf, pocock, mixture or fixed", s)
}

// Settings are a monitored run's choices.
type Settings struct {
	// Methods gives a metric's method by name; metrics not in it use
	// Default. Guardrails are never tested sequentially.
	Methods map[string]Method
	Default Method
	// PlannedUnits is the planned units per arm, the denominator of the
	// information fraction (needed by the group-sequential methods).
	PlannedUnits int64
	// MixingVariance is tau^2 of the mixture test; 0 is
	// sequential.DefaultMixingVariance.
	MixingVariance float64
	// At is the look's key and KeyKind what it is.
	At      time.Time
	KeyKind history.KeyKind
	// History says whether the earlier looks come from a history file.
	History bool
	// Now is the instant staleness is judged at: the --as-of instant
	// when rerunning a past night, else the run's clock.
	Now time.Time
	// MaxStaleness, when positive, raises the stale alert when the data's
	// freshness is older than this at At.
	MaxStaleness time.Duration
	// WarningName gives a warning's stable code (the JSON readout's), the
	// form the history stores; nil stores no warnings, and then no
	// warning is reported as new.
	WarningName func(experiment.WarningCode) string
}

func (s Settings) method(metric string) Method {
	if m, ok := s.Methods[metric]; ok {
		return m
	}
	return s.Default
}

// Compute returns the monitoring state of readout r at the look s.At,
// given the experiment's looks in the history (a look at s.At itself is
// the one being replaced and is not read), and the look to store.
func Compute(r experiment.Readout, s Settings, looks []history.Look) (*experiment.Monitoring, history.Look, error) {
	earlier := before(looks, s.At)
	m := &experiment.Monitoring{Look: len(earlier) + 1, LookAt: s.At.UTC(), KeyKind: string(s.KeyKind),
		History: s.History, PlannedUnits: s.PlannedUnits}
	if len(earlier) > 0 {
		p := earlier[len(earlier)-1].At.UTC()
		m.PreviousAt = &p
	}
	look := history.Look{Experiment: r.Experiment, At: s.At, KeyKind: s.KeyKind}
	for _, mr := range r.Metrics {
		for _, a := range mr.Arms {
			look.Arms = append(look.Arms, history.ArmLook{Metric: mr.Name, Arm: a.Arm, Units: a.Units, Conversions: a.Conversions})
		}
		for _, c := range mr.Comparisons {
			meth := s.method(mr.Name)
			if mr.Guardrail != nil {
				meth = Fixed
			}
			if meth == Fixed {
				look.Comparisons = append(look.Comparisons, fixedLook(mr, c))
				continue
			}
			sc, err := compare(r, mr, c, meth, s, earlier)
			if err != nil {
				return nil, history.Look{}, fmt.Errorf("experiment %q metric %q treatment %q: %w", r.Experiment, mr.Name, c.Treatment, err)
			}
			m.Comparisons = append(m.Comparisons, sc)
			look.Comparisons = append(look.Comparisons, toLook(sc))
			m.Alerts.BoundaryCrossed = m.Alerts.BoundaryCrossed || sc.CrossedAtLook > 0
		}
	}
	look.Warnings = warningNames(r, s.WarningName)
	progress(r, s, m)
	m.Changes = changes(r, s, earlier, look)
	stale(r, s, m)
	return m, look, nil
}

// before returns the looks strictly before at, in time order.
func before(looks []history.Look, at time.Time) []history.Look {
	var out []history.Look
	for _, l := range looks {
		if l.At.Before(at) {
			out = append(out, l)
		}
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].At.Before(out[j].At) })
	return out
}

// familyAlpha is the comparison's share of alpha: the family's alpha split
// equally over its comparisons (sequential.SplitAlpha) unless the run
// asked for no adjustment.
func familyAlpha(r experiment.Readout, mr experiment.MetricReadout) (float64, error) {
	size := 1
	if r.Settings.Adjustment != "none" {
		for _, f := range r.Families() {
			if f.Role == mr.Role && f.Size > 0 {
				size = f.Size
			}
		}
	}
	return sequential.SplitAlpha(r.Settings.Alpha, size)
}

// sidesOf returns the sides of the test and the sign that makes a
// positive statistic the tested direction.
func sidesOf(alternative string) (sequential.Sides, float64) {
	switch alternative {
	case "greater":
		return sequential.OneSided, 1
	case "less":
		return sequential.OneSided, -1
	}
	return sequential.TwoSided, 1
}

func compare(r experiment.Readout, mr experiment.MetricReadout, c experiment.Comparison, meth Method, s Settings, earlier []history.Look) (experiment.SequentialComparison, error) {
	alpha, err := familyAlpha(r, mr)
	if err != nil {
		return experiment.SequentialComparison{}, err
	}
	sc := experiment.SequentialComparison{Metric: mr.Name, Treatment: c.Treatment, Control: c.Control, Alpha: alpha}
	if meth == Mixture {
		return mixture(sc, mr, s, earlier)
	}
	return groupSequential(sc, r, mr, c, meth, s, earlier)
}

func ptr(v float64) *float64 { return &v }

// armCounts returns the units and conversions of arm on metric.
func armCounts(mr experiment.MetricReadout, arm string) (units, conv int64, ok bool) {
	for _, a := range mr.Arms {
		if a.Arm == arm {
			return a.Units, a.Conversions, true
		}
	}
	return 0, 0, false
}

// lookCounts returns the counts of arm on metric stored in a look.
func lookCounts(l history.Look, metric, arm string) (units, conv int64, ok bool) {
	for _, a := range l.Arms {
		if a.Metric == metric && a.Arm == arm {
			return a.Units, a.Conversions, true
		}
	}
	return 0, 0, false
}

// lookComparison returns the stored comparison of metric and treatment.
func lookComparison(l history.Look, metric, arm string) (history.ComparisonLook, bool) {
	for _, c := range l.Comparisons {
		if c.Metric == metric && c.Arm == arm {
			return c, true
		}
	}
	return history.ComparisonLook{}, false
}

func fixedLook(mr experiment.MetricReadout, c experiment.Comparison) history.ComparisonLook {
	cl := history.ComparisonLook{Metric: mr.Name, Arm: c.Treatment, Control: c.Control, Method: "fixed",
		Statistic: math.NaN(), InformationFraction: math.NaN(), Boundary: math.NaN(), BoundaryNominalP: math.NaN(),
		AlphaSpent: math.NaN(), AlwaysValidP: math.NaN(), SequenceLower: math.NaN(), SequenceUpper: math.NaN(),
		Crossed: c.Significant}
	if c.Z != nil {
		cl.Statistic = c.Z.Statistic
	}
	return cl
}

func val(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

func toLook(sc experiment.SequentialComparison) history.ComparisonLook {
	return history.ComparisonLook{Metric: sc.Metric, Arm: sc.Treatment, Control: sc.Control, Method: sc.Method,
		Statistic: val(sc.Statistic), InformationFraction: val(sc.InformationFraction), Boundary: val(sc.Boundary),
		BoundaryNominalP: val(sc.BoundaryP), AlphaSpent: val(sc.AlphaSpent), Crossed: sc.Crossed,
		AlwaysValidP: val(sc.AlwaysValidP), SequenceLower: val(sc.SequenceLower), SequenceUpper: val(sc.SequenceUpper)}
}

// firstRejected is the 1-based index of the first true, 0 when none.
func firstRejected(rejected []bool) int {
	if i := slices.Index(rejected, true); i >= 0 {
		return i + 1
	}
	return 0
}

// warningNames returns the names of the readout's warnings (readout-wide,
// per metric, per comparison and per non-inferiority test), each once,
// sorted; nil when name is nil.
func warningNames(r experiment.Readout, name func(experiment.WarningCode) string) []string {
	if name == nil {
		return nil
	}
	ws := slices.Clone(r.Warnings)
	for _, mr := range r.Metrics {
		ws = append(ws, mr.Warnings...)
		for _, c := range mr.Comparisons {
			ws = append(ws, c.Warnings...)
			if c.NonInferiority != nil {
				ws = append(ws, c.NonInferiority.Warnings...)
			}
		}
	}
	out := []string{}
	for _, w := range ws {
		out = append(out, name(w.Code))
	}
	slices.Sort(out)
	return slices.Compact(out)
}
