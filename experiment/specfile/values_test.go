package specfile

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
		// Event names with colons that are not windows (common practice:
		// namespaced event names).
		{"views=page:view:7d", experiment.Metric{Name: "views", Events: []string{"page:view"}, Window: 7 * 24 * time.Hour}, ""},
		{"c=app:checkout:done,app:pay:1d", experiment.Metric{Name: "c", Events: []string{"app:checkout:done", "app:pay"}, Window: 24 * time.Hour}, ""},
		{"v=ns:2d-signup:3d", experiment.Metric{Name: "v", Events: []string{"ns:2d-signup"}, Window: 3 * 24 * time.Hour}, ""},
		// A window written twice, or an event whose name ends in one: both
		// readings and how to write each.
		{"s=signup:1d:2d", experiment.Metric{}, `metric "s=signup:1d:2d" is ambiguous: it reads as the event "signup:1d" with a 2d window, or as the event "signup" with the window written twice (1d and 2d). ` +
			`For the event "signup" write s=signup:1d or s=signup:2d; for an event named "signup:1d", define the metric in a spec file: events = ["signup:1d"], window = "2d"`},
		{"b=order:7d,paid:1d@10%", experiment.Metric{}, `the event "order" with the window written twice (7d and 1d). For the event "order" write b=order,paid:7d or b=order,paid:1d`},
		{"ns:5m:1d", experiment.Metric{}, `reads as the event "ns:5m" with a 1d window, or as the event "ns" with the window written twice (5m and 1d). For the event "ns" write ns:5m or ns:1d;`},
	}
	for _, tc := range cases {
		got, err := ParseMetric(tc.in)
		if tc.err != "" {
			if err == nil || !strings.Contains(err.Error(), tc.err) {
				t.Errorf("ParseMetric(%q) error = %v, want %q", tc.in, err, tc.err)
			}
			continue
		}
		if err != nil || !reflect.DeepEqual(got, tc.want) {
			t.Errorf("ParseMetric(%q) = %+v, %v; want %+v", tc.in, got, err, tc.want)
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
		{"unsub=a:b:7d~0.2pp", experiment.Margin{Value: 0.002}, ""},
		{"unsub=unsub:1d:2d~0.2pp", experiment.Margin{}, `guardrail "unsub=unsub:1d:2d" is ambiguous: it reads as the event "unsub:1d" with a 2d window, ` +
			`or as the event "unsub" with the window written twice (1d and 2d). For the event "unsub" write unsub=unsub:1d~0.2pp or unsub=unsub:2d~0.2pp; ` +
			`for an event named "unsub:1d", define the guardrail in a spec file`},
	}
	for _, tc := range cases {
		got, err := ParseGuardrail(tc.in)
		if tc.err != "" {
			if err == nil || !strings.Contains(err.Error(), tc.err) {
				t.Errorf("ParseGuardrail(%q) error = %v, want %q", tc.in, err, tc.err)
			}
			continue
		}
		if err != nil || got.Guardrail == nil || *got.Guardrail != tc.want {
			t.Errorf("ParseGuardrail(%q) = %+v, %v; want margin %+v", tc.in, got, err, tc.want)
		}
	}
}

// TestParseValues checks the other value forms. A day is 24 hours and a
// week 7 days, a percentage a hundredth, by definition; the rest are the
// forms the help text documents.
func TestParseValues(t *testing.T) {
	date := time.Date(2027, 3, 1, 0, 0, 0, 0, time.UTC)
	for _, c := range []struct {
		name string
		got  func() (any, error)
		want any // nil: an error whose text contains err
		err  string
	}{
		{"window 36h", func() (any, error) { return ParseWindow("36h") }, 36 * time.Hour, ""},
		{"window 2w", func() (any, error) { return ParseWindow(" 2w ") }, 14 * 24 * time.Hour, ""},
		{"window 0.5s", func() (any, error) { return ParseWindow("0.5s") }, nil, "shorter than a second"},
		{"window 101 years", func() (any, error) { return ParseWindow("5300w") }, nil, "at most 100 years"},
		{"window empty", func() (any, error) { return ParseWindow("") }, nil, "empty window"},
		{"rate 12%", func() (any, error) { return ParseRate("12%") }, 0.12, ""},
		{"rate 0.3", func() (any, error) { return ParseRate("0.3") }, 0.3, ""},
		{"rate one", func() (any, error) { return ParseRate("one") }, nil, `"one" is not a number`},
		{"rate 1", func() (any, error) { return ParseRate("1") }, nil, "not strictly between 0 and 1"},
		{"margin 5%", func() (any, error) { return ParseMargin("5%") }, experiment.Margin{Value: 0.05, Relative: true}, ""},
		{"margin 100pp", func() (any, error) { return ParseMargin("100pp") }, nil, "above 0 and below 100"},
		{"shares", func() (any, error) { return ParseShares("50, 25,25") }, []float64{50, 25, 25}, ""},
		{"shares zero", func() (any, error) { return ParseShares("1,0") }, nil, `"1,0": "0" is not a positive number`},
		{"time date", func() (any, error) { return ParseTime("2027-03-01") }, &date, ""},
		{"time offset", func() (any, error) { return ParseTime("2027-03-01T02:00:00+02:00") }, &date, ""},
		{"time none", func() (any, error) { return ParseTime("") }, (*time.Time)(nil), ""},
		{"time bad", func() (any, error) { return ParseTime("yesterday") }, nil, `"yesterday": want RFC 3339`},
		{"delimiter tab", func() (any, error) { return ParseDelimiter("tab") }, '\t', ""},
		{"delimiter escaped tab", func() (any, error) { return ParseDelimiter(`\t`) }, '\t', ""},
		{"delimiter semicolon", func() (any, error) { return ParseDelimiter(";") }, ';', ""},
		{"delimiter quote", func() (any, error) { return ParseDelimiter(`"`) }, nil, "other than a quote"},
		{"delimiter two", func() (any, error) { return ParseDelimiter(";;") }, nil, "want one character"},
	} {
		got, err := c.got()
		if c.want == nil {
			if err == nil || !strings.Contains(err.Error(), c.err) {
				t.Errorf("%s: %v, %v; want an error with %q", c.name, got, err, c.err)
			}
			continue
		}
		if err != nil || !reflect.DeepEqual(got, c.want) {
			t.Errorf("%s: %v, %v; want %v", c.name, got, err, c.want)
		}
	}
}
