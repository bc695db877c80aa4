package report

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"reflect"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
	"github.com/santhosh-tekuri/jsonschema/v6"
)

// compileSchema compiles Schema() with format assertions on, so that
// "date-time" is checked too.
func compileSchema(t *testing.T) *jsonschema.Schema {
	t.Helper()
	doc, err := jsonschema.UnmarshalJSON(bytes.NewReader(Schema()))
	if err != nil {
		t.Fatal(err)
	}
	c := jsonschema.NewCompiler()
	c.AssertFormat()
	if err := c.AddResource(SchemaID, doc); err != nil {
		t.Fatal(err)
	}
	sch, err := c.Compile(SchemaID)
	if err != nil {
		t.Fatal(err)
	}
	return sch
}

func decode(t *testing.T, b []byte) any {
	t.Helper()
	v, err := jsonschema.UnmarshalJSON(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func TestSchemaIdentity(t *testing.T) {
	var s struct {
		Schema     string `json:"$schema"`
		ID         string `json:"$id"`
		Properties struct {
			Schema        struct{ Const string } `json:"schema"`
			SchemaVersion struct{ Const string } `json:"schema_version"`
		} `json:"properties"`
	}
	if err := json.Unmarshal(Schema(), &s); err != nil {
		t.Fatal(err)
	}
	checks := []struct{ name, got, want string }{
		{"$schema", s.Schema, "https://json-schema.org/draft/2020-12/schema"},
		{"$id", s.ID, SchemaID},
		{"schema const", s.Properties.Schema.Const, SchemaID},
		{"schema_version const", s.Properties.SchemaVersion.Const, SchemaVersion},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("%s = %q, want %q", c.name, c.got, c.want)
		}
	}
	if !strings.Contains(SchemaID, ".invalid/") {
		t.Errorf("SchemaID %q should use a .invalid host", SchemaID)
	}
	// Schema returns a copy: changing it changes nothing for the next caller.
	b := Schema()
	b[0] = 'x'
	if Schema()[0] != '{' {
		t.Error("Schema() shares its bytes with callers")
	}
}

// TestSchemaValidatesOutput validates every golden case's real WriteJSON
// output against the schema.
func TestSchemaValidatesOutput(t *testing.T) {
	sch := compileSchema(t)
	for _, tc := range goldenCases() {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := WriteJSON(&buf, tc.readouts); err != nil {
				t.Fatal(err)
			}
			if err := sch.Validate(decode(t, buf.Bytes())); err != nil {
				t.Errorf("WriteJSON output does not follow the schema: %v", err)
			}
		})
	}
}

// TestFixturesCoverNullableBranches checks that the outputs validated
// above hold each nullable key both as null and as a value, and
// target_test both present and absent; otherwise the schema test would
// leave a branch unexercised. A key inside an object is also recorded
// under "parent.key", for keys whose name is shared.
func TestFixturesCoverNullableBranches(t *testing.T) {
	nullable := []string{
		"window_start", "window_end", "data_freshness", "window_seconds", "target_rate",
		"rate", "interval", "difference", "difference_interval", "relative_lift",
		"relative_lift_interval", "z_test", "exact_test",
		"guardrail", "adjusted", "non_inferiority",
		"adjusted.difference_interval", "non_inferiority.z_test", "non_inferiority.interval",
		"segments.value",
	}
	seenNull := map[string]bool{}
	seenValue := map[string]bool{}
	targetPresent, targetAbsent := false, false
	var walk func(parent string, v any)
	walk = func(parent string, v any) {
		switch v := v.(type) {
		case map[string]any:
			if _, isArmRate := v["conversions"]; isArmRate {
				if _, ok := v["target_test"]; ok {
					targetPresent = true
				} else {
					targetAbsent = true
				}
			}
			for k, x := range v {
				for _, name := range []string{k, parent + "." + k} {
					if x == nil {
						seenNull[name] = true
					} else {
						seenValue[name] = true
					}
				}
				walk(k, x)
			}
		case []any:
			for _, x := range v {
				walk(parent, x)
			}
		}
	}
	mismatch := false
	for _, tc := range goldenCases() {
		var buf bytes.Buffer
		if err := WriteJSON(&buf, tc.readouts); err != nil {
			t.Fatal(err)
		}
		doc := decode(t, buf.Bytes())
		walk("", doc)
		for _, r := range doc.(map[string]any)["readouts"].([]any) {
			if r.(map[string]any)["sample_ratio"].(map[string]any)["mismatch"] == true {
				mismatch = true
			}
		}
	}
	for _, k := range nullable {
		if !seenNull[k] || !seenValue[k] {
			t.Errorf("key %q: seen as null %v, as a value %v; want both", k, seenNull[k], seenValue[k])
		}
	}
	if !targetPresent || !targetAbsent {
		t.Errorf("target_test present %v, absent %v; want both", targetPresent, targetAbsent)
	}
	if !mismatch {
		t.Error("no fixture has a sample-ratio mismatch")
	}
}

// TestFixturesCoverNewBranches checks that the golden cases hold what the
// brief for schema 1.1.0 asks of them: each adjustment method the
// Markdown words differently, a decision changed by adjustment, a
// simultaneous interval, a guardrail that passes and one that fails, a
// relative margin, a lower-is-better metric and a one-sided alternative.
func TestFixturesCoverNewBranches(t *testing.T) {
	seen := map[string]bool{}
	for _, tc := range goldenCases() {
		for _, r := range tc.readouts {
			seen["adjustment "+r.Settings.Adjustment] = true
			if r.Settings.Alternative != "two-sided" {
				seen["one-sided"] = true
			}
			for _, m := range r.Metrics {
				if m.LowerIsBetter {
					seen["lower is better"] = true
				}
				if m.Guardrail != nil && m.Guardrail.Relative {
					seen["relative margin"] = true
				}
				for _, c := range m.Comparisons {
					if c.Adjusted != nil && c.SignificantUnadjusted && !c.Significant {
						seen["changed by "+c.Adjusted.Method] = true
					}
					if c.Adjusted != nil && c.Adjusted.DifferenceInterval != nil {
						seen["simultaneous interval"] = true
					}
					if ni := c.NonInferiority; ni != nil && ni.Z != nil {
						seen[fmt.Sprintf("guardrail passes %v", ni.NonInferior)] = true
					}
				}
			}
		}
	}
	for _, want := range []string{
		"adjustment holm", "adjustment bonferroni", "adjustment bh", "adjustment none",
		"one-sided", "lower is better", "relative margin", "changed by holm",
		"simultaneous interval", "guardrail passes true", "guardrail passes false",
	} {
		if !seen[want] {
			t.Errorf("no golden case has %s", want)
		}
	}
}

// TestFixturesConsistent checks each fixture's decisions against its own
// numbers, as the analysis would make them: the reported decision is the
// adjusted one when there is an adjustment, the unadjusted one follows the
// test relied on, an adjusted p-value is never below the raw one, the
// family size matches the comparisons in the family, and a guardrail
// passes exactly when its z test rejects.
func TestFixturesConsistent(t *testing.T) {
	for _, tc := range goldenCases() {
		for _, r := range tc.readouts {
			inFamily := 0
			for _, m := range r.Metrics {
				for _, c := range m.Comparisons {
					where := r.Experiment + "/" + m.Name + "/" + c.Treatment
					by := decider(c.DecidedBy, c.Z, c.Exact)
					if by != "" {
						p := decisionP(c.DecidedBy, c.Z, c.Exact)
						if got, want := c.SignificantUnadjusted, p <= r.Settings.Alpha; got != want {
							t.Errorf("%s: significant_unadjusted %v, p = %v", where, got, p)
						}
					}
					want := c.SignificantUnadjusted
					if adj := c.Adjusted; adj != nil {
						inFamily++
						want = adj.Significant
						if adj.Significant != (adj.PValue <= r.Settings.Alpha) {
							t.Errorf("%s: adjusted significant %v, adjusted p = %v", where, adj.Significant, adj.PValue)
						}
						if adj.PValue < decisionP(c.DecidedBy, c.Z, c.Exact) {
							t.Errorf("%s: adjusted p %v below the raw p", where, adj.PValue)
						}
						fam := r.Multiplicity
						if adj.Family == experiment.Secondary && r.SecondaryMultiplicity != nil {
							fam = *r.SecondaryMultiplicity
						}
						if adj.Method != r.Settings.Adjustment || adj.FamilySize != fam.Size || fam.Role != adj.Family {
							t.Errorf("%s: adjusted by %s over %d in the %v family, readout says %s over %d", where, adj.Method, adj.FamilySize, adj.Family, r.Settings.Adjustment, fam.Size)
						}
						if m.Guardrail != nil {
							t.Errorf("%s: a guardrail comparison is in the family", where)
						}
					}
					if c.Significant != want {
						t.Errorf("%s: significant %v, want %v", where, c.Significant, want)
					}
					if (m.Guardrail != nil) != (c.NonInferiority != nil) {
						t.Errorf("%s: guardrail %v but non_inferiority %v", where, m.Guardrail != nil, c.NonInferiority != nil)
					}
					if ni := c.NonInferiority; ni != nil && ni.Z != nil {
						if ni.NonInferior != ni.Z.RejectByPValue {
							t.Errorf("%s: non_inferior %v, z test rejects %v", where, ni.NonInferior, ni.Z.RejectByPValue)
						}
						wantAlt := "greater"
						if m.LowerIsBetter {
							wantAlt = "less"
						}
						if ni.Z.Alternative != wantAlt {
							t.Errorf("%s: guardrail alternative %s, want %s", where, ni.Z.Alternative, wantAlt)
						}
						if ni.Interval.Level != 1-2*r.Settings.Alpha {
							t.Errorf("%s: guardrail interval level %v", where, ni.Interval.Level)
						}
					}
				}
			}
			size := 0
			for _, f := range r.Families() {
				size += f.Size
				if f.Method != r.Settings.Adjustment {
					t.Errorf("%s: %v family adjusted by %s, settings say %s", r.Experiment, f.Role, f.Method, r.Settings.Adjustment)
				}
			}
			if inFamily != size {
				t.Errorf("%s: %d comparisons adjusted, multiple_comparisons says %d", r.Experiment, inFamily, size)
			}
			level := 1 - r.Settings.Alpha
			if r.Settings.Alternative != "two-sided" {
				level = 1 - 2*r.Settings.Alpha
			}
			if math.Abs(r.Settings.ConfidenceLevel-level) > 1e-12 {
				t.Errorf("%s: confidence level %v with alternative %s", r.Experiment, r.Settings.ConfidenceLevel, r.Settings.Alternative)
			}
		}
	}
}

// TestSchemaRejectsBrokenDocuments shows that the schema check can fail:
// each case breaks one thing in a valid document.
func TestSchemaRejectsBrokenDocuments(t *testing.T) {
	sch := compileSchema(t)
	var buf bytes.Buffer
	if err := WriteJSON(&buf, []experiment.Readout{threeArmReadout()}); err != nil {
		t.Fatal(err)
	}
	good := buf.Bytes()
	if err := sch.Validate(decode(t, good)); err != nil {
		t.Fatalf("the unbroken document fails: %v", err)
	}
	readout := func(doc any) map[string]any {
		return doc.(map[string]any)["readouts"].([]any)[0].(map[string]any)
	}
	comparison := func(doc any, metric, i int) map[string]any {
		m := readout(doc)["metrics"].([]any)[metric].(map[string]any)
		return m["comparisons"].([]any)[i].(map[string]any)
	}
	tests := []struct {
		name  string
		spoil func(doc any)
	}{
		{"missing key", func(doc any) { delete(readout(doc), "control") }},
		{"missing multiple_comparisons", func(doc any) { delete(readout(doc), "multiple_comparisons") }},
		{"unknown adjustment", func(doc any) {
			readout(doc)["settings"].(map[string]any)["adjustment"] = "sidak"
		}},
		{"missing interval method", func(doc any) {
			delete(readout(doc)["settings"].(map[string]any), "interval_method")
		}},
		{"unknown error rate", func(doc any) {
			readout(doc)["multiple_comparisons"].([]any)[0].(map[string]any)["error_rate"] = "familywise"
		}},
		{"fractional family size", func(doc any) {
			readout(doc)["multiple_comparisons"].([]any)[0].(map[string]any)["family_size"] = json.Number("2.5")
		}},
		{"missing significant_unadjusted", func(doc any) { delete(comparison(doc, 0, 0), "significant_unadjusted") }},
		{"adjusted p above one", func(doc any) {
			comparison(doc, 0, 0)["adjusted"].(map[string]any)["p_value"] = json.Number("1.2")
		}},
		{"adjusted family of zero", func(doc any) {
			comparison(doc, 0, 0)["adjusted"].(map[string]any)["family_size"] = json.Number("0")
		}},
		{"adjusted extra key", func(doc any) {
			comparison(doc, 0, 0)["adjusted"].(map[string]any)["rank"] = json.Number("1")
		}},
		{"lower_is_better not boolean", func(doc any) {
			readout(doc)["metrics"].([]any)[0].(map[string]any)["lower_is_better"] = "no"
		}},
		{"missing schema version", func(doc any) { delete(doc.(map[string]any), "schema_version") }},
		{"wrong schema version", func(doc any) { doc.(map[string]any)["schema_version"] = "1.2.0" }},
		{"wrong type", func(doc any) {
			readout(doc)["arms"].([]any)[0].(map[string]any)["units"] = "1050"
		}},
		{"fractional count", func(doc any) {
			readout(doc)["diagnostics"].(map[string]any)["rows_read"] = json.Number("1.5")
		}},
		{"extra key", func(doc any) { readout(doc)["lift_percent"] = json.Number("3") }},
		{"unknown alternative", func(doc any) {
			readout(doc)["settings"].(map[string]any)["alternative"] = "both"
		}},
		{"unknown policy", func(doc any) {
			readout(doc)["settings"].(map[string]any)["multi_arm_policy"] = "last"
		}},
		{"null where not nullable", func(doc any) {
			readout(doc)["sample_ratio"].(map[string]any)["p_value"] = nil
		}},
		{"rate above one", func(doc any) {
			m := readout(doc)["metrics"].([]any)[0].(map[string]any)
			m["arms"].([]any)[0].(map[string]any)["rate"] = json.Number("30")
		}},
		{"bad timestamp", func(doc any) { readout(doc)["window_start"] = "2026-02-01 00:00" }},
		{"interval missing method", func(doc any) {
			m := readout(doc)["metrics"].([]any)[0].(map[string]any)
			c := m["comparisons"].([]any)[0].(map[string]any)
			delete(c["difference_interval"].(map[string]any), "method")
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			doc := decode(t, good)
			tc.spoil(doc)
			if err := sch.Validate(doc); err == nil {
				t.Error("broken document passes the schema")
			}
		})
	}

	// Guardrail fields, on the guardrail readout: metric 1 has a relative
	// margin, metric 2 an absolute one.
	buf.Reset()
	if err := WriteJSON(&buf, []experiment.Readout{guardrailReadout()}); err != nil {
		t.Fatal(err)
	}
	guarded := buf.Bytes()
	if err := sch.Validate(decode(t, guarded)); err != nil {
		t.Fatalf("the unbroken guardrail document fails: %v", err)
	}
	metric := func(doc any, i int) map[string]any {
		return readout(doc)["metrics"].([]any)[i].(map[string]any)
	}
	nonInf := func(doc any) map[string]any { return comparison(doc, 2, 0)["non_inferiority"].(map[string]any) }
	guardrailTests := []struct {
		name  string
		spoil func(doc any)
	}{
		{"guardrail missing relative", func(doc any) { delete(metric(doc, 2)["guardrail"].(map[string]any), "relative") }},
		{"negative margin", func(doc any) {
			metric(doc, 2)["guardrail"].(map[string]any)["margin"] = json.Number("-0.005")
		}},
		// 0.5 is a valid relative margin (metric 1) but no absolute one.
		{"absolute margin of one or more", func(doc any) {
			metric(doc, 2)["guardrail"].(map[string]any)["margin"] = json.Number("1.5")
		}},
		{"guardrail as a number", func(doc any) { metric(doc, 1)["guardrail"] = json.Number("0.03") }},
		{"non_inferiority missing verdict", func(doc any) { delete(nonInf(doc), "non_inferior") }},
		{"non_inferiority warnings null", func(doc any) { nonInf(doc)["warnings"] = nil }},
		{"non_inferiority z test without alternative", func(doc any) {
			delete(nonInf(doc)["z_test"].(map[string]any), "alternative")
		}},
		{"non_inferiority negative margin", func(doc any) { nonInf(doc)["absolute_margin"] = json.Number("-0.005") }},
	}
	for _, tc := range guardrailTests {
		t.Run(tc.name, func(t *testing.T) {
			doc := decode(t, guarded)
			tc.spoil(doc)
			if err := sch.Validate(doc); err == nil {
				t.Error("broken document passes the schema")
			}
		})
	}
	// A relative margin above 1 (the rate may double) is valid.
	doc := decode(t, guarded)
	metric(doc, 1)["guardrail"].(map[string]any)["margin"] = json.Number("1.5")
	if err := sch.Validate(doc); err != nil {
		t.Errorf("a relative margin of 1.5 fails the schema: %v", err)
	}
}

// TestWriteJSONRoundTrip decodes the output and compares it with the
// normalised input: every float survives at full precision.
func TestWriteJSONRoundTrip(t *testing.T) {
	for _, tc := range goldenCases() {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := WriteJSON(&buf, tc.readouts); err != nil {
				t.Fatal(err)
			}
			if !bytes.HasSuffix(buf.Bytes(), []byte("}\n")) {
				t.Error("output does not end with a newline after the document")
			}
			var got Document
			if err := json.Unmarshal(buf.Bytes(), &got); err != nil {
				t.Fatal(err)
			}
			want := NewDocument(tc.readouts)
			if !reflect.DeepEqual(got, want) {
				t.Errorf("decoded document differs from the input:\ngot  %+v\nwant %+v", got, want)
			}
		})
	}
}

// TestNewDocumentLeavesInputAlone checks that the JSON form is a copy:
// the input is unchanged, nil slices become empty ones and times UTC.
func TestNewDocumentLeavesInputAlone(t *testing.T) {
	in := []experiment.Readout{twoArmReadout(), emptyReadout()}
	before := []experiment.Readout{twoArmReadout(), emptyReadout()}
	doc := NewDocument(in)
	if !reflect.DeepEqual(in, before) {
		t.Error("NewDocument changed its input")
	}
	// The copy has empty slices where the input had nil ones, and UTC times.
	e := doc.Readouts[1]
	if e.Warnings == nil || e.Diagnostics.BadRows == nil || e.Metrics[0].Comparisons[0].Warnings == nil {
		t.Error("nil slices were not replaced by empty ones")
	}
	if loc := doc.Readouts[0].Freshness.Location(); loc.String() != "UTC" {
		t.Errorf("freshness location %v, want UTC", loc)
	}
	doc.Readouts[0].Metrics[0].Events[0] = "changed"
	if in[0].Metrics[0].Events[0] != "purchase" {
		t.Error("the document shares a slice with the input")
	}
	// The guardrail test holds a slice too: copied, and never nil.
	g := []experiment.Readout{guardrailReadout()}
	gdoc := NewDocument(g)
	ni := gdoc.Readouts[0].Metrics[2].Comparisons[0].NonInferiority
	if ni.Warnings == nil {
		t.Error("nil non-inferiority warnings were not replaced by an empty slice")
	}
}

// TestWritersRejectNonFinite puts a NaN or infinity in different places;
// both writers must fail, name the path and write nothing.
func TestWritersRejectNonFinite(t *testing.T) {
	tests := []struct {
		name     string
		path     string
		spoil    func(r *experiment.Readout)
		wantPath string
	}{
		{"rate NaN", "", func(r *experiment.Readout) { r.Metrics[0].Arms[1].Rate = ptr(math.NaN()) },
			"$.readouts[0].metrics[0].arms[1].rate"},
		{"z statistic +Inf", "", func(r *experiment.Readout) { r.Metrics[1].Comparisons[0].Z.Statistic = math.Inf(1) },
			"$.readouts[0].metrics[1].comparisons[0].z_test.statistic"},
		{"alpha -Inf", "", func(r *experiment.Readout) { r.Settings.Alpha = math.Inf(-1) },
			"$.readouts[0].settings.alpha"},
		{"observed share NaN", "", func(r *experiment.Readout) { r.Arms[0].ObservedShare = math.NaN() },
			"$.readouts[0].arms[0].observed_share"},
		{"adjusted p NaN", "", func(r *experiment.Readout) { r.Metrics[0].Comparisons[0].Adjusted.PValue = math.NaN() },
			"$.readouts[0].status.rows[0].adjusted_p_value"},
		{"guardrail margin +Inf", "", func(r *experiment.Readout) {
			r.Metrics[0].Guardrail = &experiment.Guardrail{Margin: math.Inf(1)}
		}, "$.readouts[0].metrics[0].guardrail.margin"},
		{"non-inferiority z NaN", "", func(r *experiment.Readout) {
			r.Metrics[1].Comparisons[0].NonInferiority = &experiment.NonInferiorityTest{Z: &experiment.Test{Statistic: math.NaN()}}
		}, "$.readouts[0].metrics[1].comparisons[0].non_inferiority.z_test.statistic"},
		{"target exact p NaN", "", func(r *experiment.Readout) {
			r.Metrics[0].Arms[0].TargetTest = &experiment.TargetTest{Exact: &experiment.ExactTest{PValue: math.NaN()}}
		}, "$.readouts[0].metrics[0].arms[0].target_test.exact_test.p_value"},
	}
	writers := []struct {
		name  string
		write func(*bytes.Buffer, []experiment.Readout) error
	}{
		{"json", func(b *bytes.Buffer, rs []experiment.Readout) error { return WriteJSON(b, rs) }},
		{"markdown", func(b *bytes.Buffer, rs []experiment.Readout) error { return WriteMarkdown(b, rs, MarkdownOptions{}) }},
	}
	for _, tc := range tests {
		for _, w := range writers {
			t.Run(tc.name+"/"+w.name, func(t *testing.T) {
				r := twoArmReadout()
				tc.spoil(&r)
				var buf bytes.Buffer
				err := w.write(&buf, []experiment.Readout{r})
				if err == nil {
					t.Fatal("no error")
				}
				if !strings.Contains(err.Error(), tc.wantPath+" ") {
					t.Errorf("error %q does not name %s", err, tc.wantPath)
				}
				if buf.Len() != 0 {
					t.Errorf("wrote %d bytes before failing", buf.Len())
				}
			})
		}
	}
}

// TestJSONKeyOrder checks that keys come in declaration order, not
// sorted: each key first appears after the one before it.
func TestJSONKeyOrder(t *testing.T) {
	var buf bytes.Buffer
	if err := WriteJSON(&buf, []experiment.Readout{twoArmReadout()}); err != nil {
		t.Fatal(err)
	}
	out := buf.String()
	order := []string{
		"schema", "schema_version", "readouts", "experiment", "exposure_event", "control",
		"window_start", "window_end", "data_freshness", "settings", "arms", "sample_ratio",
		"multiple_comparisons", "metrics", "diagnostics",
	}
	last := -1
	for _, k := range order {
		i := strings.Index(out, `"`+k+`":`)
		if i <= last {
			t.Errorf("key %q at offset %d, not after the previous key (offset %d)", k, i, last)
		}
		last = i
	}
	if strings.Contains(out, `\u003c`) || !strings.HasPrefix(out, "{\n  \"schema\": ") {
		t.Errorf("output does not start as an indented document: %.40q", out)
	}
}
