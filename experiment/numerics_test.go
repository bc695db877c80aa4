package experiment

import (
	"fmt"
	"math"
	"reflect"
	"testing"

	"github.com/armtally/armtally/experiment/stats"
)

// finite reports the path of the first NaN or infinite float in v.
func finite(v reflect.Value, path string) string {
	switch v.Kind() {
	case reflect.Float64:
		if f := v.Float(); math.IsNaN(f) || math.IsInf(f, 0) {
			return fmt.Sprintf("%s = %v", path, f)
		}
	case reflect.Pointer, reflect.Interface:
		if !v.IsNil() {
			return finite(v.Elem(), path)
		}
	case reflect.Struct:
		for i := 0; i < v.NumField(); i++ {
			if s := finite(v.Field(i), path+"."+v.Type().Field(i).Name); s != "" {
				return s
			}
		}
	case reflect.Slice:
		for i := 0; i < v.Len(); i++ {
			if s := finite(v.Index(i), fmt.Sprintf("%s[%d]", path, i)); s != "" {
				return s
			}
		}
	}
	return ""
}

// TestAnalyzeFiniteEverywhere analyses every pair of edge counts (no
// conversions, all conversions, n = 1, a billion units) under every
// alternative and interval method, with a target rate and a guardrail,
// and checks that no NaN or infinity reaches the readout and the two
// decision routes of every z test agree.
func TestAnalyzeFiniteEverywhere(t *testing.T) {
	counts := [][2]int64{{0, 1}, {1, 1}, {0, 10}, {10, 10}, {5, 10}, {3, 7}, {0, 1e9}, {1e9, 1e9}, {1, 1e9}, {4e8, 1e9}}
	half := 0.5
	spec := spec2()
	spec.Metrics = []Metric{
		{Name: "m", Events: []string{"m"}, Target: &half},
		{Name: "g", Events: []string{"g"}, Guardrail: &Margin{Value: 0.1, Relative: true}, LowerIsBetter: true},
	}
	type pair struct {
		rate IntervalMethod
		diff DifferenceMethod
	}
	methods := []pair{{IntervalWilson, DifferenceNewcombe}, {IntervalClopperPearson, DifferenceWald}, {IntervalAgrestiCoull, DifferenceNewcombe}, {IntervalWald, DifferenceWald}}
	n := 0
	for _, c := range counts {
		for _, tr := range counts {
			for ai, alt := range []stats.Alternative{stats.TwoSided, stats.Greater, stats.Less} {
				opts := DefaultAnalysisOptions()
				opts.Stats.Alternative = alt
				opts.Interval, opts.Difference = methods[(n+ai)%len(methods)].rate, methods[(n+ai)%len(methods)].diff
				opts.Adjust = stats.AdjustMethod(n % 6)
				opts.NonInferiority = stats.NonInferiorityMethod(n % 3)
				tl := twoArmTally([][2]int64{c, c}, [][2]int64{tr, tr})
				r, err := Analyze(spec, tl, opts)
				if err != nil {
					t.Fatalf("%v vs %v, %v: %v", tr, c, alt, err)
				}
				if s := finite(reflect.ValueOf(r), "readout"); s != "" {
					t.Errorf("%v vs %v, %v, %+v: %s", tr, c, alt, opts, s)
				}
				for _, m := range r.Metrics {
					for _, cmp := range m.Comparisons {
						if z := cmp.Z; z != nil && z.RejectByPValue != z.RejectByStatistic {
							t.Errorf("%v vs %v, %v: routes disagree: %+v", tr, c, alt, z)
						}
					}
				}
				n++
			}
		}
	}
}
