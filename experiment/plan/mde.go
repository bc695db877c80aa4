package plan

import (
	"math"
	"strconv"
	"strings"

	"github.com/armtally/armtally/experiment/stats"
)

// MDE is a minimum detectable effect: a change of the treatment's rate
// from the baseline, either absolute (a difference of rates) or relative to
// the baseline.
type MDE struct {
	// Text is the effect as written, for messages.
	Text string
	// Value is the change as a fraction: 0.02 for 2pp, 0.15 for 15%,
	// negative for a drop.
	Value float64
	// Relative is true for a change relative to the baseline (written with
	// %), false for an absolute one (written with pp).
	Relative bool
	// Signed is true when the effect was written with + or -; an unsigned
	// effect goes the tested way (see [MDE.TreatmentRate]).
	Signed bool
}

// MDEError is an effect that [ParseMDE] cannot read.
type MDEError struct {
	// Text is the effect as given.
	Text string
	// Reason says why it cannot be read.
	Reason string
}

func (e *MDEError) Error() string {
	return "plan: minimum detectable effect " + strconv.Quote(e.Text) + ": " + e.Reason
}

// ParseMDE parses a minimum detectable effect: an optional sign, a positive
// number and the unit pp (percentage points, an absolute change) or % (a
// change relative to the baseline), as in 2pp, 15% or -0.5pp. An effect it
// cannot read is an [*MDEError].
func ParseMDE(s string) (MDE, error) {
	m := MDE{Text: s}
	t := strings.TrimSpace(s)
	neg := false
	if t != "" && (t[0] == '+' || t[0] == '-') {
		neg, m.Signed = t[0] == '-', true
		t = t[1:]
	}
	var ok bool
	if t, m.Relative, ok = cutUnit(t); !ok {
		return m, &MDEError{s, "give a unit, pp for percentage points (absolute) or % for a change relative to the baseline, as in 2pp or 15%"}
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || strings.HasPrefix(t, "+") || strings.HasPrefix(t, "-") || math.IsInf(v, 0) || math.IsNaN(v) {
		return m, &MDEError{s, strconv.Quote(t) + " is not a number"}
	}
	if v == 0 {
		return m, &MDEError{s, "a zero effect cannot be detected"}
	}
	// The nearest float64 to the decimal written: v / 100 alone can be
	// one unit in the last place off (4.4 / 100 is 0.044000000000000004).
	m.Value = roundSignificant(v/100, 15)
	if neg {
		m.Value = -m.Value
	}
	return m, nil
}

// cutUnit cuts the unit off an effect: pp (absolute) or % (relative). It
// returns the number before it, space trimmed, and false when there is no
// unit.
func cutUnit(t string) (num string, relative, ok bool) {
	if num, ok = strings.CutSuffix(t, "pp"); !ok {
		num, relative = strings.CutSuffix(t, "%")
		ok = relative
	}
	return strings.TrimSpace(num), relative, ok
}

// TreatmentRate returns the treatment rate the effect aims at: the baseline
// plus the effect (absolute) or times one plus the effect (relative). An
// unsigned effect goes down under [stats.Less] and up otherwise.
//
// A signed effect against a one-sided alternative (a drop under
// [stats.Greater], a rise under [stats.Less]) is an [*Error] with problem
// [Direction]; a treatment rate outside (0, 1) is one with problem
// [RateOutOfRange]. The rate is rounded to [DerivedDigits] significant
// digits: 4% plus 10% of it is 0.044, not 0.044000000000000004.
func (m MDE) TreatmentRate(baseline float64, alt stats.Alternative) (float64, error) {
	v := m.Value
	if !m.Signed && alt == stats.Less {
		v = -v
	}
	if m.Signed && ((alt == stats.Greater && v < 0) || (alt == stats.Less && v > 0)) {
		return 0, &Error{Problem: Direction}
	}
	p2 := baseline + v
	if m.Relative {
		p2 = baseline * (1 + v)
	}
	p2 = RoundDerived(p2)
	if !(p2 > 0 && p2 < 1) {
		return 0, &Error{Problem: RateOutOfRange, Rate: p2}
	}
	return p2, nil
}
