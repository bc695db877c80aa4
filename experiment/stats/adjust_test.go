package stats

import (
	"errors"
	"math"
	"testing"
)

// Adjusted p-values, experiment/REFERENCE-VALUES.md section 9: R 4.2.2
// stats::p.adjust(p, method=...) [= statsmodels multipletests]; rel 1e-12.
func TestAdjustPValues(t *testing.T) {
	tests := []struct {
		id                    string
		p                     []float64
		bonf, holm, bh, by    []float64
		hochberg              []float64 // R 4.2.2 stats::p.adjust(method="hochberg"), run here (not in experiment/REFERENCE-VALUES.md)
		rejectBH, rejectBonf  int       // section 13 published counts at alpha 0.05 (MC-04 only)
		checkPublishedRejects bool
	}{
		{id: "MC-01", p: []float64{0.01, 0.02, 0.03, 0.04, 0.05},
			bonf:     []float64{0.05, 0.1, 0.15, 0.2, 0.25},
			holm:     []float64{0.05, 0.08, 0.09, 0.09, 0.09},
			bh:       []float64{0.05, 0.05, 0.05, 0.05, 0.05},
			by:       []float64{0.11416666666666665, 0.11416666666666665, 0.11416666666666665, 0.11416666666666667, 0.11416666666666667},
			hochberg: []float64{0.05, 0.05, 0.05, 0.05, 0.05}},
		{id: "MC-02", p: []float64{0.01, 0.01, 0.03, 0.03, 0.2},
			bonf:     []float64{0.05, 0.05, 0.15, 0.15, 1},
			holm:     []float64{0.05, 0.05, 0.09, 0.09, 0.2},
			bh:       []float64{0.025, 0.025, 0.0375, 0.0375, 0.2},
			by:       []float64{0.05708333333333333, 0.05708333333333333, 0.08562499999999999, 0.08562499999999999, 0.45666666666666667},
			hochberg: []float64{0.04, 0.04, 0.06, 0.06, 0.2}},
		{id: "MC-03", p: []float64{0, 0.001, 0.5, 1, 1},
			bonf:     []float64{0, 0.005, 1, 1, 1},
			holm:     []float64{0, 0.004, 1, 1, 1},
			bh:       []float64{0, 0.0025, 0.8333333333333334, 1, 1},
			by:       []float64{0, 0.0057083333333333335, 1, 1, 1},
			hochberg: []float64{0, 0.004, 1, 1, 1}},
		{id: "MC-04", p: []float64{0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.324, 0.4262, 0.5719, 0.6528, 0.759, 1},
			bonf:                  []float64{0.0015, 0.006, 0.0285, 0.1425, 0.3015, 0.417, 0.447, 0.516, 0.6885, 1, 1, 1, 1, 1, 1},
			holm:                  []float64{0.0015, 0.0056, 0.0247, 0.11399999999999999, 0.2211, 0.27799999999999997, 0.27799999999999997, 0.27799999999999997, 0.32130000000000003, 1, 1, 1, 1, 1, 1},
			bh:                    []float64{0.0015, 0.003, 0.0095, 0.035625, 0.0603, 0.06385714285714286, 0.06385714285714286, 0.0645, 0.07650000000000001, 0.486, 0.5811818181818181, 0.7148749999999999, 0.7532307692307693, 0.8132142857142857, 1},
			by:                    []float64{0.00497734348984349, 0.00995468697968698, 0.031523175435675434, 0.11821190788378289, 0.2000892082917083, 0.21189262285333715, 0.21189262285333715, 0.21402577006327006, 0.253844517982018, 1, 1, 1, 1, 1, 1},
			hochberg:              []float64{0.0015, 0.0056, 0.0247, 0.11399999999999999, 0.2211, 0.2682, 0.2682, 0.2752, 0.32130000000000003, 1, 1, 1, 1, 1, 1},
			rejectBH:              4, // Benjamini & Hochberg 1995 (JRSS B 57:289-300), section 4 example; from memory (experiment/REFERENCE-VALUES.md section 13)
			rejectBonf:            3, // same example, Bonferroni
			checkPublishedRejects: true},
		{id: "MC-05 unsorted", p: []float64{0.04, 0.001, 0.03, 0.2, 0.01},
			bonf:     []float64{0.2, 0.005, 0.15, 1, 0.05},
			holm:     []float64{0.09, 0.005, 0.09, 0.2, 0.04},
			bh:       []float64{0.05, 0.005, 0.05, 0.2, 0.025},
			by:       []float64{0.11416666666666667, 0.011416666666666667, 0.11416666666666665, 0.45666666666666667, 0.05708333333333333},
			hochberg: []float64{0.08, 0.005, 0.08, 0.2, 0.04}},
		{id: "MC-06 single", p: []float64{0.03},
			bonf: []float64{0.03}, holm: []float64{0.03}, bh: []float64{0.03}, by: []float64{0.03}, hochberg: []float64{0.03}},
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			in := append([]float64(nil), tc.p...)
			for _, m := range []struct {
				method AdjustMethod
				want   []float64
			}{{Bonferroni, tc.bonf}, {Holm, tc.holm}, {BenjaminiHochberg, tc.bh}, {BenjaminiYekutieli, tc.by}, {Hochberg, tc.hochberg}, {None, tc.p}} {
				if m.want == nil {
					continue
				}
				got, err := AdjustPValues(tc.p, m.method)
				if err != nil {
					t.Fatal(err)
				}
				if len(got) != len(m.want) {
					t.Fatalf("%v: %d values, want %d", m.method, len(got), len(m.want))
				}
				for i := range got {
					near(t, m.method.String(), got[i], m.want[i], 1e-12, 0)
				}
			}
			for i := range in {
				if in[i] != tc.p[i] {
					t.Fatal("input modified")
				}
			}
			if tc.checkPublishedRejects {
				count := func(m AdjustMethod) int {
					adj, _ := AdjustPValues(tc.p, m)
					n := 0
					for _, v := range adj {
						if v <= 0.05 {
							n++
						}
					}
					return n
				}
				if got := count(BenjaminiHochberg); got != tc.rejectBH {
					t.Errorf("BH rejections = %d, want %d", got, tc.rejectBH)
				}
				if got := count(Bonferroni); got != tc.rejectBonf {
					t.Errorf("Bonferroni rejections = %d, want %d", got, tc.rejectBonf)
				}
			}
		})
	}
}

func TestAdjustPValuesEdges(t *testing.T) {
	got, err := AdjustPValues(nil, Holm)
	if err != nil || len(got) != 0 {
		t.Errorf("empty: %v %v", got, err) // R: p.adjust(numeric(0)) is numeric(0)
	}
	for _, bad := range []float64{-0.1, 1.5, math.NaN()} {
		if _, err := AdjustPValues([]float64{0.1, bad}, Holm); !errors.Is(err, ErrBadParameter) {
			t.Errorf("p = %v: err = %v", bad, err)
		}
	}
	if _, err := AdjustPValues([]float64{0.1}, AdjustMethod(42)); !errors.Is(err, ErrBadParameter) {
		t.Errorf("bad method: err = %v", err)
	}
	for _, m := range []AdjustMethod{None, Bonferroni, Holm, Hochberg, BenjaminiHochberg, BenjaminiYekutieli} {
		back, err := ParseAdjustMethod(m.String())
		if err != nil || back != m {
			t.Errorf("ParseAdjustMethod(%q) = %v, %v", m.String(), back, err)
		}
	}
	names := []string{"none", "bonferroni", "holm", "hochberg", "bh", "by"} // the names the brief fixes
	for i, n := range names {
		if AdjustMethod(i).String() != n {
			t.Errorf("AdjustMethod(%d) = %q, want %q", i, AdjustMethod(i).String(), n)
		}
	}
	if _, err := ParseAdjustMethod("fdr"); err == nil {
		t.Error("ParseAdjustMethod(fdr) should fail")
	}
}
