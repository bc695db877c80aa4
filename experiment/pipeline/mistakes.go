package pipeline

import (
	"fmt"
	"strconv"
	"strings"

	"github.com/armtally/armtally/experiment"
)

// MismatchKind says which name of the settings the input does not hold.
type MismatchKind int

// The kinds of NotInDataError.
const (
	// MismatchExperimentKey: no exposure row carries the experiment's
	// key. Held lists the keys on exposure rows, by exposure rows.
	MismatchExperimentKey MismatchKind = iota + 1
	// MismatchSeveralKeys: the experiment has no key, and the exposure
	// rows carry several. Held lists them, by exposure rows.
	MismatchSeveralKeys
	// MismatchExposureEvent: no row has the exposure event. Held lists
	// the event names, by rows.
	MismatchExposureEvent
	// MismatchArm: the control, or a planned arm, has no exposed unit in
	// the analysis window. Held lists the arms that have, by exposed
	// units (by units for a counts table).
	MismatchArm
	// MismatchEvent: an event of a metric or guardrail occurs in no row
	// of the input. Held lists the event names, by rows.
	MismatchEvent
)

// Missing is one name of the settings that the input does not hold.
type Missing struct {
	// Name is the name as the settings give it.
	Name string
	// Role says what names it: "experiment key", "exposure event",
	// "control", "planned arm", or `event of metric "NAME"` (of guardrail
	// "NAME" for a guardrail).
	Role string
	// Suggestion is a name the input holds that Name is likely a
	// mistyped form of (experiment.Closest), or "".
	Suggestion string
}

// NotInDataError is data that contradicts the settings by not holding a
// name they give: an experiment key, the exposure event, an arm or a
// metric's event (see MismatchKind), or, without a key, exposure rows of
// several experiments. It lists what the input holds instead, so that the
// mistake can be seen and corrected; a run never goes on with zero counts
// in place of a name it did not find. Run returns it wrapped in a
// *DataError.
type NotInDataError struct {
	// Experiment is the experiment's key as the settings give it ("" for
	// none).
	Experiment string
	Kind       MismatchKind
	// Missing lists the names not found (empty for MismatchSeveralKeys).
	Missing []Missing
	// Held lists what the input holds of the kind Of names, with the count
	// Per names ("" when the names could not be counted), most first, then
	// by name.
	Held []experiment.NameCount
	Of   string
	Per  string
	// Note says more about Held: why it is empty or what it leaves out
	// (exposures outside the analysis window, an Arrow stream that cannot
	// be read twice); "" for nothing.
	Note string
}

// heldShown is how many entries of Held the message shows.
const heldShown = 12

func (e *NotInDataError) Error() string {
	var b strings.Builder
	if e.Experiment != "" {
		fmt.Fprintf(&b, "experiment %q: ", e.Experiment)
	}
	switch {
	case e.Kind == MismatchSeveralKeys:
		fmt.Fprintf(&b, "no experiment key given, and the exposure rows carry %d experiment keys: choose one", len(e.Held))
	case len(e.Missing) == 1:
		b.WriteString(e.missingText(e.Missing[0]))
		if s := e.Missing[0].Suggestion; s != "" {
			fmt.Fprintf(&b, " (did you mean %q?)", s)
		}
	default:
		fmt.Fprintf(&b, "%d names are not in the input:", len(e.Missing))
		for _, m := range e.Missing {
			fmt.Fprintf(&b, "\n  %s", e.missingText(m))
			if m.Suggestion != "" {
				fmt.Fprintf(&b, " (did you mean %q?)", m.Suggestion)
			}
		}
	}
	e.writeHeld(&b)
	return b.String()
}

// missingText says what is wrong with one missing name.
func (e *NotInDataError) missingText(m Missing) string {
	switch e.Kind {
	case MismatchExperimentKey:
		return fmt.Sprintf("no exposure row carries the experiment key %q", m.Name)
	case MismatchExposureEvent:
		return fmt.Sprintf("no row has the exposure event %q", m.Name)
	case MismatchArm:
		return fmt.Sprintf("the %s %q has no exposed units", m.Role, m.Name)
	case MismatchEvent:
		return fmt.Sprintf("the %s, %q, occurs in no row of the input", m.Role, m.Name)
	}
	return fmt.Sprintf("%s %q not found", m.Role, m.Name)
}

// writeHeld lists Held, the first heldShown entries, and the note, on
// lines of their own.
func (e *NotInDataError) writeHeld(b *strings.Builder) {
	switch {
	case len(e.Held) == 0:
		fmt.Fprintf(b, "\nthe input holds no %s", e.Of)
		if e.Note != "" {
			fmt.Fprintf(b, " (%s)", e.Note)
		}
		return
	case e.Per == "":
		fmt.Fprintf(b, "\nthe input holds these %s:", e.Of)
	default:
		fmt.Fprintf(b, "\nthe input holds these %s (%s):", e.Of, e.Per)
	}
	shown := e.Held[:min(len(e.Held), heldShown)]
	width := 0
	for _, h := range shown {
		width = max(width, len(strconv.Quote(h.Name)))
	}
	for _, h := range shown {
		if e.Per == "" {
			fmt.Fprintf(b, "\n  %q", h.Name)
			continue
		}
		fmt.Fprintf(b, "\n  %-*s  %s", width, strconv.Quote(h.Name), groupDigits(h.Count))
	}
	if more := len(e.Held) - len(shown); more > 0 {
		var rest int64
		for _, h := range e.Held[len(shown):] {
			rest += h.Count
		}
		if e.Per == "" {
			fmt.Fprintf(b, "\n  and %d more", more)
		} else {
			fmt.Fprintf(b, "\n  and %d more (%s %s)", more, groupDigits(rest), e.Per)
		}
	}
	if e.Note != "" {
		fmt.Fprintf(b, "\n(%s)", e.Note)
	}
}

// groupDigits writes a count with a comma between groups of three
// digits.
func groupDigits(n int64) string {
	if n < 0 {
		return "-" + groupUint(uint64(-(n+1))+1)
	}
	return groupUint(uint64(n))
}

func groupUint(u uint64) string {
	if u < 1000 {
		return strconv.FormatUint(u, 10)
	}
	return groupUint(u/1000) + fmt.Sprintf(",%03d", u%1000)
}
