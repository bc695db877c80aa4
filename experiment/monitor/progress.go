package monitor

import (
	"fmt"
	"math"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/history"
	"github.com/armtally/armtally/experiment/plan"
	"github.com/armtally/armtally/experiment/stats"
)

// DetectablePower is the power at which the smallest detectable effect of
// the units so far is stated.
const DetectablePower = 0.8

// progress fills the units so far per arm against the plan, the days left
// at each arm's observed daily rate (units over the days from the window's
// start to the look) and the smallest detectable effect.
func progress(r experiment.Readout, s Settings, m *experiment.Monitoring) {
	var days float64
	if r.WindowStart != nil {
		days = s.At.Sub(*r.WindowStart).Hours() / 24
	}
	var left float64
	known := s.PlannedUnits > 0 && days > 0
	for _, a := range r.Arms {
		p := experiment.ArmProgress{Arm: a.Name, Units: a.Units, PlannedUnits: s.PlannedUnits}
		if days > 0 {
			p.DailyUnits = ptr(float64(a.Units) / days)
		}
		if known {
			switch need := float64(s.PlannedUnits - a.Units); {
			case need <= 0:
			case *p.DailyUnits > 0:
				left = math.Max(left, need/(*p.DailyUnits))
			default:
				known = false
			}
		}
		m.Progress = append(m.Progress, p)
	}
	if known && len(r.Arms) > 0 {
		m.DaysLeft = ptr(left)
	}
	m.DetectableMetric, m.DetectableEffect = detectable(r)
}

// detectable returns the first primary metric and the smallest absolute
// difference a fixed-horizon test detects on it with the smallest arm's
// units so far, at the control's observed rate (plan.Compute).
func detectable(r experiment.Readout) (string, *float64) {
	for _, mr := range r.Metrics {
		if mr.Guardrail != nil || mr.Role != experiment.Primary || len(mr.Arms) < 2 {
			continue
		}
		units := int64(math.MaxInt64)
		var base *float64
		for _, a := range mr.Arms {
			units = min(units, a.Units)
			if a.Arm == r.Control {
				base = a.Rate
			}
		}
		alt, err1 := stats.ParseAlternative(r.Settings.Alternative)
		adj, err2 := stats.ParseAdjustMethod(r.Settings.Adjustment)
		if base == nil || *base <= 0 || *base >= 1 || units < 1 || err1 != nil || err2 != nil {
			return mr.Name, nil
		}
		res, err := plan.Compute(plan.Input{Solve: plan.SolveEffect, Baseline: *base, UnitsPerArm: units, Alpha: r.Settings.Alpha,
			Power: DetectablePower, Alternative: alt, Adjust: adj, Arms: len(mr.Arms), Metrics: primaryMetrics(r)})
		if err != nil {
			return mr.Name, nil
		}
		return mr.Name, ptr(math.Abs(res.EffectAbsolute))
	}
	return "", nil
}

func primaryMetrics(r experiment.Readout) int {
	n := 0
	for _, mr := range r.Metrics {
		if mr.Guardrail == nil && mr.Role == experiment.Primary {
			n++
		}
	}
	return max(n, 1)
}

// changes lists what changed since the previous look: a comparison whose
// decision (fixed-horizon significance, or the sequential crossing)
// flipped, an estimate whose previous value lies outside tonight's
// difference interval, and each warning code tonight has that the
// previous look did not (history.NewWarnings).
func changes(r experiment.Readout, s Settings, earlier []history.Look, now history.Look) []experiment.Change {
	if len(earlier) == 0 {
		return nil
	}
	prev := earlier[len(earlier)-1]
	var out []experiment.Change
	for _, code := range history.NewWarnings(prev, now) {
		out = append(out, experiment.Change{Kind: "new_warning", Details: code})
	}
	for _, mr := range r.Metrics {
		for _, c := range mr.Comparisons {
			before, ok1 := lookComparison(prev, mr.Name, c.Treatment)
			after, ok2 := lookComparison(now, mr.Name, c.Treatment)
			if ok1 && ok2 && before.Method == after.Method && before.Crossed != after.Crossed {
				out = append(out, experiment.Change{Kind: "decision_flipped", Metric: mr.Name, Treatment: c.Treatment,
					Details: fmt.Sprintf("%s: %s then, %s now", after.Method, crossedWord(before.Crossed), crossedWord(after.Crossed))})
			}
			n1, x1, ok1 := lookCounts(prev, mr.Name, c.Treatment)
			n2, x2, ok2 := lookCounts(prev, mr.Name, c.Control)
			iv := c.DifferenceInterval
			if !ok1 || !ok2 || n1 == 0 || n2 == 0 || iv == nil {
				continue
			}
			d := float64(x1)/float64(n1) - float64(x2)/float64(n2)
			if d < iv.Lower || d > iv.Upper {
				out = append(out, experiment.Change{Kind: "estimate_moved", Metric: mr.Name, Treatment: c.Treatment,
					Details: fmt.Sprintf("the difference was %.4f at the previous look, outside tonight's interval [%.4f, %.4f]", d, iv.Lower, iv.Upper)})
			}
		}
	}
	return out
}

func crossedWord(b bool) string {
	if b {
		return "significant"
	}
	return "not significant"
}

// stale raises the stale alert when the data's freshness is older than
// s.MaxStaleness at s.Now.
func stale(r experiment.Readout, s Settings, m *experiment.Monitoring) {
	m.Alerts.MaxStaleness = s.MaxStaleness
	if r.Freshness == nil {
		m.Alerts.Stale = s.MaxStaleness > 0
		return
	}
	age := s.Now.Sub(*r.Freshness)
	m.Alerts.Age = &age
	m.Alerts.Stale = s.MaxStaleness > 0 && age > s.MaxStaleness
}
