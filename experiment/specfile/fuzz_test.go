package specfile

import (
	"bytes"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	toml "github.com/pelletier/go-toml/v2"
)

// FuzzSpecFile feeds arbitrary bytes to the spec parser. No input may
// panic; every error must name the file; and a file that parses must keep
// every value it sets: the values decoded here by go-toml into plain maps,
// without armtally's types, must be the values armtally's settings hold.
// Every error is short, under 1 KB, however large or deeply nested the
// input. The seed corpus is testdata/fuzz/FuzzSpecFile (the example, the
// two-experiment spec of cmd/armtally and every file of testdata/bad) and
// the large and deep inputs of hostileSpecs.
func FuzzSpecFile(f *testing.F) {
	// Seeds as large as TestHostileSpecs's would slow the fuzzer to a
	// few runs a second; these are past every limit all the same.
	for _, h := range hostileSpecs(100, 4<<10) {
		f.Add(h.data)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		sf, err := Parse("fuzz.toml", data)
		if err != nil {
			if !strings.HasPrefix(err.Error(), "fuzz.toml") {
				t.Errorf("error does not start with the file name: %v", err)
			}
			if n := len(err.Error()); n >= 1<<10 {
				t.Errorf("error of %d bytes, want under 1 KB: %.200s", n, err)
			}
			return
		}
		_ = sf.Unsupported()
		var raw map[string]any
		if err := toml.Unmarshal(bytes.TrimPrefix(data, utf8BOM), &raw); err != nil {
			t.Fatalf("armtally accepted a file go-toml rejects: %v", err)
		}
		checkRoundTrip(t, sf, raw)
	})
}

// checkRoundTrip compares the parsed spec file with the raw decoded
// document.
func checkRoundTrip(t *testing.T, sf *File, raw map[string]any) {
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
	if len(paths) != len(sf.Paths) {
		t.Fatalf("input.paths: %d in the file, %d parsed", len(paths), len(sf.Paths))
	}
	for i, p := range paths {
		want := p
		if !filepath.IsAbs(p) {
			want = filepath.Join(".", p)
		}
		if sf.Paths[i] != want {
			t.Errorf("input.paths[%d] = %q, parsed %q", i, p, sf.Paths[i])
		}
	}
	if got := str(in, "shape", "events"); got != shapeName(sf.Shape) {
		t.Errorf("input.shape = %q, parsed %q", got, shapeName(sf.Shape))
	}

	cols := table(raw, "columns")
	m := sf.Mapping
	for _, c := range []struct{ key, def, got string }{
		{"user", "user_id", m.User}, {"ts", "ts", m.TS}, {"event", "event", m.Event},
		{"experiment", "experiment", m.Experiment}, {"arm", "arm", m.Arm}, {"epoch_unit", "", m.EpochUnit},
	} {
		if want := str(cols, c.key, c.def); want != c.got {
			t.Errorf("columns.%s = %q, parsed %q", c.key, want, c.got)
		}
	}
	if want := strs(cols, "segments"); !slices.Equal(want, m.Segments) {
		t.Errorf("columns.segments = %q, parsed %q", want, m.Segments)
	}

	exps, _ := raw["experiment"].([]any)
	if len(exps) != len(sf.Experiments) {
		t.Fatalf("%d experiments in the file, %d parsed", len(exps), len(sf.Experiments))
	}
	for i, x := range exps {
		re, _ := x.(map[string]any)
		e := sf.Experiments[i]
		for _, c := range []struct{ key, def, got string }{
			{"key", "", e.key}, {"exposure_event", "exposure", e.exposureEvent}, {"control", "control", e.control},
		} {
			if want := str(re, c.key, c.def); want != c.got {
				t.Errorf("experiment[%d].%s = %q, parsed %q", i, c.key, want, c.got)
			}
		}
		if want := strs(re, "arms"); !slices.Equal(want, e.arms) {
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
			if str(rm, "name", "") != ms.Metric.Name || !slices.Equal(strs(rm, "events"), ms.Metric.Events) ||
				str(rm, "role", "primary") != ms.Role.String() || (str(rm, "better", "higher") == "lower") != ms.Metric.LowerIsBetter {
				t.Errorf("experiment[%d].metric[%d] = %v, parsed %+v (role %s)", i, j, rm, ms.Metric, ms.Role)
			}
			if w, ok := rm["window"].(string); ok {
				if d, err := ParseWindow(w); err != nil || d != ms.Metric.Window {
					t.Errorf("experiment[%d].metric[%d].window = %q, parsed %v", i, j, w, ms.Metric.Window)
				}
			} else if ms.Metric.Window != 0 {
				t.Errorf("experiment[%d].metric[%d]: no window, parsed %v", i, j, ms.Metric.Window)
			}
			if g, ok := rm["margin"].(string); ok {
				if mg, err := ParseMargin(g); err != nil || ms.Metric.Guardrail == nil || *ms.Metric.Guardrail != mg {
					t.Errorf("experiment[%d].metric[%d].margin = %q, parsed %+v", i, j, g, ms.Metric.Guardrail)
				}
			} else if ms.Metric.Guardrail != nil {
				t.Errorf("experiment[%d].metric[%d]: no margin, parsed %+v", i, j, ms.Metric.Guardrail)
			}
			switch v := rm["target"].(type) {
			case nil:
				if ms.Metric.Target != nil {
					t.Errorf("experiment[%d].metric[%d]: no target, parsed %v", i, j, *ms.Metric.Target)
				}
			case float64:
				if ms.Metric.Target == nil || *ms.Metric.Target != v {
					t.Errorf("experiment[%d].metric[%d].target = %v, parsed %v", i, j, v, ms.Metric.Target)
				}
			case string:
				if p, err := ParseRate(v); err != nil || ms.Metric.Target == nil || *ms.Metric.Target != p {
					t.Errorf("experiment[%d].metric[%d].target = %q, parsed %v", i, j, v, ms.Metric.Target)
				}
			default:
				t.Errorf("experiment[%d].metric[%d].target = %v (%T) accepted", i, j, v, v)
			}
		}
	}
}
