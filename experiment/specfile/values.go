package specfile

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// ParseMetric parses a metric as the --metric flag gives it:
//
//	NAME=EVENT[,EVENT...][:WINDOW][@TARGET]
//	EVENT[:WINDOW][@TARGET]            (the metric is named after its event)
//
// WINDOW is a number with a unit s, m, h, d or w (7d, 36h, 90m); no window
// means unlimited. TARGET is a rate in (0, 1) or a percentage (0.12 or 12%).
//
// The window is the part after the last colon, so an event name may hold
// colons (page:view:7d is the event page:view with a 7-day window). An
// event name whose own last colon part is a window too (signup:1d:2d) is
// refused as ambiguous: it could be the event signup:1d with a 2-day
// window, or the event signup with a window written twice. A spec file
// (events and window apart) says the first.
func ParseMetric(s string) (experiment.Metric, error) {
	return parseMetric(s, "metric", "")
}

// parseMetric is ParseMetric for a definition of the given kind ("metric"
// or "guardrail"); suffix ends the forms the errors suggest (~MARGIN for
// a guardrail).
func parseMetric(s, kind, suffix string) (experiment.Metric, error) {
	var m experiment.Metric
	rest := s
	if at := strings.LastIndexByte(rest, '@'); at >= 0 {
		p, err := ParseRate(rest[at+1:])
		if err != nil {
			return m, fmt.Errorf("metric %q: target: %w", s, err)
		}
		m.Target = &p
		rest = rest[:at]
	}
	window := ""
	if colon := strings.LastIndexByte(rest, ':'); colon >= 0 {
		w, err := ParseWindow(rest[colon+1:])
		if err != nil {
			return m, fmt.Errorf("%s %q: window: %w", kind, s, err)
		}
		m.Window, window = w, strings.TrimSpace(rest[colon+1:])
		rest = rest[:colon]
	}
	name, events, named := strings.Cut(rest, "=")
	if !named {
		events = name
	}
	m.Name = strings.TrimSpace(name)
	for _, e := range strings.Split(events, ",") {
		if e = strings.TrimSpace(e); e != "" {
			m.Events = append(m.Events, e)
		}
	}
	if m.Name == "" || len(m.Events) == 0 {
		return m, fmt.Errorf("metric %q: want NAME=EVENT[,EVENT...][:WINDOW][@TARGET], for example purchase=purchase:7d", s)
	}
	if window != "" {
		if err := checkEventWindows(s, kind, suffix, m, named, window); err != nil {
			return m, err
		}
	}
	return m, nil
}

// checkEventWindows refuses a definition with a window (window, already
// taken off) one of whose events also ends in a colon and a window: the
// window is then written twice, or the event's name holds one. The error
// shows both readings and how to write each (named: s has NAME=).
func checkEventWindows(s, kind, suffix string, m experiment.Metric, named bool, window string) error {
	for i, ev := range m.Events {
		colon := strings.LastIndexByte(ev, ':')
		if colon < 0 {
			continue
		}
		inner := strings.TrimSpace(ev[colon+1:])
		if _, err := ParseWindow(inner); err != nil {
			continue
		}
		base := strings.TrimSpace(ev[:colon])
		events := append([]string(nil), m.Events...)
		events[i] = base
		short := strings.Join(events, ",")
		if named {
			short = m.Name + "=" + short
		}
		return fmt.Errorf("%s %q is ambiguous: it reads as the event %q with a %s window, or as the event %q with the window written twice (%s and %s). "+
			"For the event %q write %s:%s%s or %s:%s%s; for an event named %q, define the %s in a spec file: events = [%q], window = %q",
			kind, s, ev, window, base, inner, window,
			base, short, inner, suffix, short, window, suffix, ev, kind, ev, window)
	}
	return nil
}

// ParseGuardrail parses a guardrail metric as the --guardrail flag gives
// it: a metric as ParseMetric reads it followed by ~MARGIN, where MARGIN is
// absolute in percentage points (0.5pp) or relative to the control's rate
// (5%).
func ParseGuardrail(s string) (experiment.Metric, error) {
	spec, margin, ok := strings.Cut(s, "~")
	if !ok {
		return experiment.Metric{}, fmt.Errorf("guardrail %q: want NAME=EVENT[,EVENT...][:WINDOW]~MARGIN, for example unsubscribe=newsletter_unsubscribe:7d~0.2pp", s)
	}
	m, err := parseMetric(spec, "guardrail", "~"+strings.TrimSpace(margin))
	if err != nil {
		return m, err
	}
	g, err := ParseMargin(margin)
	if err != nil {
		return m, fmt.Errorf("guardrail %q: margin: %w", s, err)
	}
	m.Guardrail = &g
	return m, nil
}

// ParseMargin parses a non-inferiority margin: 0.5pp (absolute, in
// percentage points) or 5% (relative to the control's rate).
func ParseMargin(s string) (experiment.Margin, error) {
	s = strings.TrimSpace(s)
	var g experiment.Margin
	var num string
	switch {
	case strings.HasSuffix(s, "pp"):
		num = strings.TrimSuffix(s, "pp")
	case strings.HasSuffix(s, "%"):
		num, g.Relative = strings.TrimSuffix(s, "%"), true
	default:
		return g, fmt.Errorf("%q: want percentage points (0.5pp) or a share of the control's rate (5%%)", s)
	}
	v, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
	if err != nil || !(v > 0 && v < 100) {
		return g, fmt.Errorf("%q: want a number above 0 and below 100", s)
	}
	g.Value = v / 100
	return g, nil
}

// ParseWindow parses an attribution window: a positive number followed by
// s, m, h, d (24 hours) or w (7 days).
func ParseWindow(s string) (time.Duration, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, fmt.Errorf("empty window")
	}
	units := map[byte]time.Duration{'s': time.Second, 'm': time.Minute, 'h': time.Hour, 'd': 24 * time.Hour, 'w': 7 * 24 * time.Hour}
	unit, ok := units[s[len(s)-1]]
	if !ok {
		return 0, fmt.Errorf("%q has no unit (want s, m, h, d or w, as in 7d)", s)
	}
	v, err := strconv.ParseFloat(s[:len(s)-1], 64)
	if err != nil || !(v > 0) || v*float64(unit) > float64(100*365*24*time.Hour) {
		return 0, fmt.Errorf("%q is not a positive length of at most 100 years", s)
	}
	d := time.Duration(v * float64(unit))
	if d < time.Second {
		return 0, fmt.Errorf("%q is shorter than a second", s)
	}
	return d, nil
}

// ParseRate parses a rate in (0, 1), written as 0.12 or 12%.
func ParseRate(s string) (float64, error) {
	s = strings.TrimSpace(s)
	scale := 1.0
	if strings.HasSuffix(s, "%") {
		s, scale = strings.TrimSuffix(s, "%"), 0.01
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return 0, fmt.Errorf("%q is not a number", s)
	}
	// Rounded to 15 significant digits: the float64 nearest to the
	// decimal written, which 12 x 0.01 is not always.
	v, _ = strconv.ParseFloat(strconv.FormatFloat(v*scale, 'g', 15, 64), 64)
	if !(v > 0 && v < 1) {
		return 0, fmt.Errorf("%v is not strictly between 0 and 1", v)
	}
	return v, nil
}

// ParseTime parses a window bound: RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]]
// (UTC unless an offset is given), the forms event logs use, in the years
// 1678 to 2261. The empty string is no bound (nil).
func ParseTime(s string) (*time.Time, error) {
	if s == "" {
		return nil, nil
	}
	t, msg := parseTime(s)
	if msg != "" {
		return nil, errors.New(msg)
	}
	return &t, nil
}

// parseTime parses a window bound written as a string; on a problem it
// returns what is wrong.
func parseTime(s string) (time.Time, string) {
	ns, err := ingest.ParseTimestamp([]byte(s))
	switch {
	case errors.Is(err, ingest.ErrTimestampRange):
		return time.Time{}, fmt.Sprintf("%q is out of range: %s", s, yearsRange)
	case err != nil:
		return time.Time{}, timeFormsError(s)
	}
	t := time.Unix(0, ns).UTC()
	if msg := checkYears(t); msg != "" {
		return t, msg
	}
	return t, ""
}

// yearsRange says which times armtally holds: nanoseconds since 1970 in
// 64 bits reach from September 1677 to April 2262.
const yearsRange = "want a time in the years 1678 to 2261"

// checkYears says what is wrong with a window bound outside the years
// 1678 to 2261, or returns "".
func checkYears(t time.Time) string {
	if t.Year() < 1678 || t.Year() > 2261 {
		return fmt.Sprintf("%s is out of range: %s", t.Format(time.RFC3339), yearsRange)
	}
	return ""
}

// timeFormsError says which forms a time is written in.
func timeFormsError(s string) string {
	return fmt.Sprintf("%q: want RFC 3339 or YYYY-MM-DD[ HH:MM:SS] (UTC unless an offset is given)", s)
}

// MaxShare is the largest traffic share of a split, and MaxShareRatio
// the most the largest share of a split may be times its smallest. Shares
// are relative (50,50 and 1,1 are the same split); beyond these bounds the
// expected counts of the sample ratio check are no longer representable
// numbers (a share of 1e-320 next to 1 gives an infinite statistic).
const (
	MaxShare      = 1e12
	MaxShareRatio = 1e9
)

// ParseShares parses a list of traffic shares: comma-separated positive
// numbers (50,25,25), each at most MaxShare, the largest at most
// MaxShareRatio times the smallest.
func ParseShares(s string) ([]float64, error) {
	fields := strings.Split(s, ",")
	var out []float64
	for _, f := range fields {
		v, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		if err != nil && !errors.Is(err, strconv.ErrRange) {
			return nil, fmt.Errorf("%q: %q is not a positive number", s, f)
		}
		out = append(out, v)
	}
	if i, msg := checkShares(out); msg != "" {
		return nil, fmt.Errorf("%q: %q %s", s, fields[i], msg)
	}
	return out, nil
}

// checkShares checks traffic shares as ParseShares does. On a problem it
// returns the index of the share at fault and what is wrong with it.
func checkShares(shares []float64) (int, string) {
	lo, hi := 0, 0
	for i, v := range shares {
		switch {
		case !(v > 0):
			return i, "is not a positive number"
		case v > MaxShare:
			return i, fmt.Sprintf("is too large: want a share above 0 and at most %g (shares are relative: 1,1 is 50,50)", float64(MaxShare))
		}
		if v < shares[lo] {
			lo = i
		}
		if v > shares[hi] {
			hi = i
		}
	}
	if len(shares) > 0 && shares[hi] > shares[lo]*MaxShareRatio {
		return lo, fmt.Sprintf("is too small next to %v: the largest share may be at most %g times the smallest", shares[hi], float64(MaxShareRatio))
	}
	return 0, ""
}

// ParseDelimiter reads a CSV delimiter: one character other than a quote or
// a line break; `\t` (backslash, t) and "tab" mean a tab.
func ParseDelimiter(s string) (rune, error) {
	switch s {
	case `\t`, "tab":
		return '\t', nil
	}
	if r := []rune(s); len(r) == 1 && r[0] != '"' && r[0] != '\r' && r[0] != '\n' && r[0] != 0xFFFD {
		return r[0], nil
	}
	return 0, fmt.Errorf("%q: want one character other than a quote or a line break, such as \",\", \";\" or \"\\t\"", s)
}
