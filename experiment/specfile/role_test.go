package specfile

import (
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
)

// Roles reach the experiment's metrics: a spec file's role key and the
// --metric and --secondary-metric flags; a guardrail keeps the primary
// zero value (its margin makes it a guardrail). Without a primary metric
// the spec is refused, naming the file's experiment.
func TestMetricRoles(t *testing.T) {
	metricFlags := func(f string) bool { return f == "metric" || f == "secondary-metric" || f == "guardrail" }
	const file = `[[experiment]]
key = "gift-wrap-2027"
[[experiment.metric]]
name = "share"
events = ["share"]
role = "secondary"
[[experiment.metric]]
name = "refund"
events = ["refund"]
role = "guardrail"
margin = "0.5pp"
[[experiment.metric]]
name = "buy"
events = ["buy"]
`
	type role struct {
		name      string
		role      experiment.Role
		guardrail bool
	}
	check := func(what string, e *Settings, want []role) {
		t.Helper()
		spec, _, err := e.Build()
		if err != nil {
			t.Fatalf("%s: %v", what, err)
		}
		var got []role
		for _, m := range spec.Metrics {
			got = append(got, role{m.Name, m.Role, m.Guardrail != nil})
		}
		if len(got) != len(want) {
			t.Fatalf("%s: metrics %+v, want %+v", what, got, want)
		}
		for i := range got {
			if got[i] != want[i] {
				t.Errorf("%s: metric %d = %+v, want %+v", what, i, got[i], want[i])
			}
		}
	}
	sf, err := Parse("s.toml", []byte(file))
	if err != nil {
		t.Fatal(err)
	}
	check("file", sf.Experiments[0], []role{{"buy", experiment.Primary, false},
		{"share", experiment.Secondary, false}, {"refund", experiment.Primary, true}})

	o := Overrides{Given: metricFlags, Metrics: []string{"buy=buy:7d"}, Secondary: []string{"share=share:7d", "view=view"},
		Guardrails: []string{"refund=refund:7d~0.5pp"}}
	e := NewSettings()
	if err := o.Apply(e, false); err != nil {
		t.Fatal(err)
	}
	check("flags", e, []role{{"buy", experiment.Primary, false}, {"share", experiment.Secondary, false},
		{"view", experiment.Secondary, false}, {"refund", experiment.Primary, true}})

	// Only secondary metrics and guardrails: refused.
	noPrimary := strings.Replace(file, "name = \"buy\"\nevents = [\"buy\"]\n", "name = \"buy\"\nevents = [\"buy\"]\nrole = \"secondary\"\n", 1)
	sf, err = Parse("s.toml", []byte(noPrimary))
	if err == nil {
		_, _, err = sf.Experiments[0].Build()
	}
	if err == nil || !strings.Contains(err.Error(), "no primary metric") || !strings.Contains(err.Error(), "s.toml:") {
		t.Errorf("no primary metric in a file: %v", err)
	}
	o = Overrides{Given: metricFlags, Secondary: []string{"share=share:7d"}}
	e = NewSettings()
	if err := o.Apply(e, false); err != nil {
		t.Fatal(err)
	}
	if _, _, err := e.Build(); err == nil || !strings.Contains(err.Error(), "no primary metric") {
		t.Errorf("--secondary-metric alone: %v", err)
	}
	o = Overrides{Given: metricFlags, Secondary: []string{"share="}}
	if err := o.Apply(NewSettings(), false); err == nil || !strings.HasPrefix(err.Error(), "--secondary-metric:") {
		t.Errorf("bad --secondary-metric: %v", err)
	}
}
