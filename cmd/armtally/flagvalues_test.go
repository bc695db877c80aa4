package main

import (
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
)

func ptrFloat(v float64) *float64 { return &v }

// TestParseMetric checks the metric syntax NAME=EVENT[,EVENT...][:WINDOW][@TARGET].
func TestParseMetric(t *testing.T) {
	cases := []struct {
		in   string
		want experiment.Metric
		err  string
	}{
		{"purchase", experiment.Metric{Name: "purchase", Events: []string{"purchase"}}, ""},
		{"purchase=purchase:7d", experiment.Metric{Name: "purchase", Events: []string{"purchase"}, Window: 7 * 24 * time.Hour}, ""},
		{"signup=account_created, newsletter_signup:36h@12%", experiment.Metric{
			Name: "signup", Events: []string{"account_created", "newsletter_signup"}, Window: 36 * time.Hour, Target: ptrFloat(0.12)}, ""},
		{"buy:2w@0.3", experiment.Metric{Name: "buy", Events: []string{"buy"}, Window: 14 * 24 * time.Hour, Target: ptrFloat(0.3)}, ""},
		{"buy:90m", experiment.Metric{Name: "buy", Events: []string{"buy"}, Window: 90 * time.Minute}, ""},
		{"buy:7", experiment.Metric{}, "has no unit"},
		{"buy:0d", experiment.Metric{}, "not a positive length"},
		{"buy:-1d", experiment.Metric{}, "not a positive length"},
		{"buy@1.5", experiment.Metric{}, "not strictly between 0 and 1"},
		{"buy@0%", experiment.Metric{}, "not strictly between 0 and 1"},
		{"=buy", experiment.Metric{}, "want NAME=EVENT"},
		{"buy=", experiment.Metric{}, "want NAME=EVENT"},
	}
	for _, tc := range cases {
		got, err := parseMetric(tc.in)
		if tc.err != "" {
			if err == nil || !strings.Contains(err.Error(), tc.err) {
				t.Errorf("parseMetric(%q) error = %v, want %q", tc.in, err, tc.err)
			}
			continue
		}
		if err != nil || !reflect.DeepEqual(got, tc.want) {
			t.Errorf("parseMetric(%q) = %+v, %v; want %+v", tc.in, got, err, tc.want)
		}
	}
}

// TestParseGuardrail checks the margin forms: percentage points and a
// share of the control's rate.
func TestParseGuardrail(t *testing.T) {
	cases := []struct {
		in   string
		want experiment.Margin
		err  string
	}{
		{"unsub=newsletter_unsubscribe:7d~0.2pp", experiment.Margin{Value: 0.002}, ""},
		{"refund~5%", experiment.Margin{Value: 0.05, Relative: true}, ""},
		{"refund~5", experiment.Margin{}, "want percentage points"},
		{"refund~0pp", experiment.Margin{}, "above 0"},
		{"refund", experiment.Margin{}, "~MARGIN"},
	}
	for _, tc := range cases {
		got, err := parseGuardrail(tc.in)
		if tc.err != "" {
			if err == nil || !strings.Contains(err.Error(), tc.err) {
				t.Errorf("parseGuardrail(%q) error = %v, want %q", tc.in, err, tc.err)
			}
			continue
		}
		if err != nil || got.Guardrail == nil || *got.Guardrail != tc.want {
			t.Errorf("parseGuardrail(%q) = %+v, %v; want margin %+v", tc.in, got, err, tc.want)
		}
	}
}

func TestParseBytes(t *testing.T) {
	// The unit values are the SI and IEC definitions (powers of 1000 and
	// 1024); K, M, G alone as powers of 1024 is common practice.
	for _, c := range []struct {
		in   string
		want int64
		ok   bool
	}{
		{"1", 1, true},
		{"800MB", 800_000_000, true},
		{"1.5GB", 1_500_000_000, true},
		{"2GiB", 2 << 30, true},
		{" 512 KiB ", 512 << 10, true},
		{"3G", 3 << 30, true},
		{"40kB", 40_000, true},
		{"0", 0, false},
		{"0.5B", 0, false},
		{"-1GB", 0, false},
		{"GB", 0, false},
		{"1.2.3MB", 0, false},
		{"10 parsecs", 0, false},
		{"9999999TB", 0, false},
	} {
		got, err := parseBytes(c.in)
		if c.ok && (err != nil || got != c.want) {
			t.Errorf("parseBytes(%q) = %d, %v; want %d", c.in, got, err, c.want)
		}
		if !c.ok && err == nil {
			t.Errorf("parseBytes(%q) = %d, want an error", c.in, got)
		}
	}
}
