package main

import (
	"path/filepath"
	"strings"
	"testing"

	toml "github.com/pelletier/go-toml/v2"
)

// FuzzSpecFile feeds arbitrary bytes to the spec parser. No input may
// panic; every error must name the file; and a file that parses must keep
// every value it sets: the values decoded here by go-toml into plain maps,
// without armtally's types, must be the values armtally's settings hold.
// The seed corpus is testdata/fuzz/FuzzSpecFile (the example, the
// two-experiment spec and every file of testdata/spec/bad).
func FuzzSpecFile(f *testing.F) {
	f.Fuzz(func(t *testing.T, data []byte) {
		sf, err := parseSpecFile("fuzz.toml", data)
		if err != nil {
			if !strings.HasPrefix(err.Error(), "fuzz.toml") {
				t.Errorf("error does not start with the file name: %v", err)
			}
			return
		}
		_ = sf.unsupported()
		var raw map[string]any
		if err := toml.Unmarshal(data, &raw); err != nil {
			t.Fatalf("armtally accepted a file go-toml rejects: %v", err)
		}
		checkRoundTrip(t, sf, raw)
	})
}

// checkRoundTrip compares the parsed spec file with the raw decoded
// document.
func checkRoundTrip(t *testing.T, sf *specFile, raw map[string]any) {
	t.Helper()
	table := func(m map[string]any, key string) map[string]any {
		v, _ := m[key].(map[string]any)
		return v
	}
	str := func(m map[string]any, key, def string) string {
		if v, ok := m[key].(string); ok {
			return v
		}
		return def
	}
	strs := func(m map[string]any, key string) []string {
		var out []string
		list, _ := m[key].([]any)
		for _, v := range list {
			s, _ := v.(string)
			out = append(out, s)
		}
		return out
	}
	num := func(v any) float64 {
		switch x := v.(type) {
		case int64:
			return float64(x)
		case float64:
			return x
		}
		return -1
	}

	in := table(raw, "input")
	paths := strs(in, "paths")
	if len(paths) != len(sf.paths) {
		t.Fatalf("input.paths: %d in the file, %d parsed", len(paths), len(sf.paths))
	}
	for i, p := range paths {
		want := p
		if !filepath.IsAbs(p) {
			want = filepath.Join(".", p)
		}
		if sf.paths[i] != want {
			t.Errorf("input.paths[%d] = %q, parsed %q", i, p, sf.paths[i])
		}
	}
	if got := str(in, "shape", shapeEvents); got != sf.shape {
		t.Errorf("input.shape = %q, parsed %q", got, sf.shape)
	}

	cols := table(raw, "columns")
	m := sf.mapping
	for _, c := range []struct{ key, def, got string }{
		{"user", "user_id", m.User}, {"ts", "ts", m.TS}, {"event", "event", m.Event},
		{"experiment", "experiment", m.Experiment}, {"arm", "arm", m.Arm}, {"epoch_unit", "", m.EpochUnit},
	} {
		if want := str(cols, c.key, c.def); want != c.got {
			t.Errorf("columns.%s = %q, parsed %q", c.key, want, c.got)
		}
	}
	if want := strs(cols, "segments"); !equalStrings(want, m.Segments) {
		t.Errorf("columns.segments = %q, parsed %q", want, m.Segments)
	}

	exps, _ := raw["experiment"].([]any)
	if len(exps) != len(sf.experiments) {
		t.Fatalf("%d experiments in the file, %d parsed", len(exps), len(sf.experiments))
	}
	for i, x := range exps {
		re, _ := x.(map[string]any)
		e := sf.experiments[i]
		for _, c := range []struct{ key, def, got string }{
			{"key", "", e.key}, {"exposure_event", "exposure", e.exposureEvent}, {"control", "control", e.control},
		} {
			if want := str(re, c.key, c.def); want != c.got {
				t.Errorf("experiment[%d].%s = %q, parsed %q", i, c.key, want, c.got)
			}
		}
		if want := strs(re, "arms"); !equalStrings(want, e.arms) {
			t.Errorf("experiment[%d].arms = %q, parsed %q", i, want, e.arms)
		}
		split, _ := re["split"].([]any)
		if len(split) != len(e.split) {
			t.Errorf("experiment[%d].split: %d shares, parsed %d", i, len(split), len(e.split))
		}
		for j := range min(len(split), len(e.split)) {
			if num(split[j]) != e.split[j] {
				t.Errorf("experiment[%d].split[%d] = %v, parsed %v", i, j, split[j], e.split[j])
			}
		}
		if v, ok := re["alpha"]; ok && num(v) != e.opts.Stats.Alpha {
			t.Errorf("experiment[%d].alpha = %v, parsed %v", i, v, e.opts.Stats.Alpha)
		}
		if v, ok := re["min_count"]; ok && num(v) != float64(e.opts.Stats.MinCount) {
			t.Errorf("experiment[%d].min_count = %v, parsed %v", i, v, e.opts.Stats.MinCount)
		}
		if v, ok := re["sample_ratio_threshold"]; ok && num(v) != e.opts.SampleRatioThreshold {
			t.Errorf("experiment[%d].sample_ratio_threshold = %v, parsed %v", i, v, e.opts.SampleRatioThreshold)
		}
		metrics, _ := re["metric"].([]any)
		if len(metrics) != len(e.metrics) {
			t.Fatalf("experiment[%d]: %d metrics in the file, %d parsed", i, len(metrics), len(e.metrics))
		}
		for j, y := range metrics {
			rm, _ := y.(map[string]any)
			ms := e.metrics[j]
			if str(rm, "name", "") != ms.metric.Name || !equalStrings(strs(rm, "events"), ms.metric.Events) ||
				str(rm, "role", rolePrimary) != ms.role || (str(rm, "better", "higher") == "lower") != ms.metric.LowerIsBetter {
				t.Errorf("experiment[%d].metric[%d] = %v, parsed %+v (role %s)", i, j, rm, ms.metric, ms.role)
			}
			if w, ok := rm["window"].(string); ok {
				if d, err := parseWindow(w); err != nil || d != ms.metric.Window {
					t.Errorf("experiment[%d].metric[%d].window = %q, parsed %v", i, j, w, ms.metric.Window)
				}
			} else if ms.metric.Window != 0 {
				t.Errorf("experiment[%d].metric[%d]: no window, parsed %v", i, j, ms.metric.Window)
			}
			if g, ok := rm["margin"].(string); ok {
				if mg, err := parseMargin(g); err != nil || ms.metric.Guardrail == nil || *ms.metric.Guardrail != mg {
					t.Errorf("experiment[%d].metric[%d].margin = %q, parsed %+v", i, j, g, ms.metric.Guardrail)
				}
			} else if ms.metric.Guardrail != nil {
				t.Errorf("experiment[%d].metric[%d]: no margin, parsed %+v", i, j, ms.metric.Guardrail)
			}
			switch v := rm["target"].(type) {
			case nil:
				if ms.metric.Target != nil {
					t.Errorf("experiment[%d].metric[%d]: no target, parsed %v", i, j, *ms.metric.Target)
				}
			case float64:
				if ms.metric.Target == nil || *ms.metric.Target != v {
					t.Errorf("experiment[%d].metric[%d].target = %v, parsed %v", i, j, v, ms.metric.Target)
				}
			case string:
				if p, err := parseRate(v); err != nil || ms.metric.Target == nil || *ms.metric.Target != p {
					t.Errorf("experiment[%d].metric[%d].target = %q, parsed %v", i, j, v, ms.metric.Target)
				}
			default:
				t.Errorf("experiment[%d].metric[%d].target = %v (%T) accepted", i, j, v, v)
			}
		}
	}
}
