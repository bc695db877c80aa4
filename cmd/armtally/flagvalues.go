package main

import (
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
)

// parseMetric parses the value of --metric:
//
//	NAME=EVENT[,EVENT...][:WINDOW][@TARGET]
//	EVENT[:WINDOW][@TARGET]            (the metric is named after its event)
//
// WINDOW is a number with a unit s, m, h, d or w (7d, 36h, 90m); no window
// means unlimited. TARGET is a rate in (0, 1) or a percentage (0.12 or 12%).
func parseMetric(s string) (experiment.Metric, error) {
	var m experiment.Metric
	rest := s
	if at := strings.LastIndexByte(rest, '@'); at >= 0 {
		p, err := parseRate(rest[at+1:])
		if err != nil {
			return m, fmt.Errorf("metric %q: target: %w", s, err)
		}
		m.Target = &p
		rest = rest[:at]
	}
	if colon := strings.LastIndexByte(rest, ':'); colon >= 0 {
		w, err := parseWindow(rest[colon+1:])
		if err != nil {
			return m, fmt.Errorf("metric %q: window: %w", s, err)
		}
		m.Window = w
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
	return m, nil
}

// parseGuardrail parses the value of --guardrail: a metric as parseMetric
// reads it followed by ~MARGIN, where MARGIN is absolute in percentage
// points (0.5pp) or relative to the control's rate (5%).
func parseGuardrail(s string) (experiment.Metric, error) {
	spec, margin, ok := strings.Cut(s, "~")
	if !ok {
		return experiment.Metric{}, fmt.Errorf("guardrail %q: want NAME=EVENT[,EVENT...][:WINDOW]~MARGIN, for example unsubscribe=newsletter_unsubscribe:7d~0.2pp", s)
	}
	m, err := parseMetric(spec)
	if err != nil {
		return m, err
	}
	g, err := parseMargin(margin)
	if err != nil {
		return m, fmt.Errorf("guardrail %q: margin: %w", s, err)
	}
	m.Guardrail = &g
	return m, nil
}

// parseMargin parses a non-inferiority margin: 0.5pp (absolute, in
// percentage points) or 5% (relative to the control's rate).
func parseMargin(s string) (experiment.Margin, error) {
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

// parseWindow parses an attribution window: a positive number followed by
// s, m, h, d (24 hours) or w (7 days).
func parseWindow(s string) (time.Duration, error) {
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

// parseRate parses a rate in (0, 1), written as 0.12 or 12%.
func parseRate(s string) (float64, error) {
	s = strings.TrimSpace(s)
	scale := 1.0
	if strings.HasSuffix(s, "%") {
		s, scale = strings.TrimSuffix(s, "%"), 0.01
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return 0, fmt.Errorf("%q is not a number", s)
	}
	v *= scale
	if !(v > 0 && v < 1) {
		return 0, fmt.Errorf("%v is not strictly between 0 and 1", v)
	}
	return v, nil
}

// parseTime parses a window bound: RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]]
// (UTC unless an offset is given), the forms event logs use.
func parseTime(flag, s string) (*time.Time, error) {
	if s == "" {
		return nil, nil
	}
	ns, err := ingest.ParseTimestamp([]byte(s))
	if err != nil {
		return nil, usagef("--%s %q: want RFC 3339 or YYYY-MM-DD[ HH:MM:SS] (UTC unless an offset is given)", flag, s)
	}
	t := time.Unix(0, ns).UTC()
	return &t, nil
}

// parseShares parses --split: comma-separated positive numbers.
func parseShares(s string) ([]float64, error) {
	var out []float64
	for _, f := range strings.Split(s, ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		if err != nil || !(v > 0) || v > 1e12 {
			return nil, fmt.Errorf("--split %q: %q is not a positive number", s, f)
		}
		out = append(out, v)
	}
	return out, nil
}

// parseBytes parses a size in bytes: a positive number with an optional
// unit, B, kB, MB, GB, TB (powers of 1000) or KiB, MiB, GiB, TiB (powers of
// 1024); K, M, G and T alone are taken as the powers of 1024, as most
// memory settings take them. "1.5GB" is 1,500,000,000 bytes.
func parseBytes(s string) (int64, error) {
	t := strings.TrimSpace(s)
	i := 0
	for i < len(t) && (t[i] >= '0' && t[i] <= '9' || t[i] == '.') {
		i++
	}
	num, unit := t[:i], strings.TrimSpace(t[i:])
	v, err := strconv.ParseFloat(num, 64)
	if err != nil || num == "" {
		return 0, fmt.Errorf("%q: want a size such as 800MB or 2GiB", s)
	}
	mult := map[string]float64{
		"": 1, "B": 1,
		"kB": 1e3, "KB": 1e3, "MB": 1e6, "GB": 1e9, "TB": 1e12,
		"KiB": 1 << 10, "MiB": 1 << 20, "GiB": 1 << 30, "TiB": 1 << 40,
		"K": 1 << 10, "M": 1 << 20, "G": 1 << 30, "T": 1 << 40,
	}[unit]
	if mult == 0 {
		return 0, fmt.Errorf("%q: unknown unit %q (want B, kB, MB, GB, TB, KiB, MiB, GiB or TiB)", s, unit)
	}
	b := v * mult
	if !(b >= 1) || b > 1<<62 {
		return 0, fmt.Errorf("%q: want a size from 1 byte to 4 EiB", s)
	}
	return int64(b), nil
}
