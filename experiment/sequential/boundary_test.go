package sequential

import (
	"errors"
	"math"
	"testing"
)

// TestGridConvergence checks that the grid of size r = 64 has converged:
// boundaries on a grid four times finer (r = 256) move by less than 1e-7
// (a numerical property of Jennison and Turnbull's 2000 chapter 19 method;
// common practice to check it).
func TestGridConvergence(t *testing.T) {
	for _, c := range []struct {
		sp    Spending
		sides Sides
		t     []float64
	}{
		{Spending{Pocock, 0.025}, OneSided, []float64{0.5, 0.6, 0.75, 0.9, 1}},
		{Spending{OBrienFleming, 0.05}, TwoSided, []float64{0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1}},
		{Spending{OBrienFleming, 0.01}, OneSided, []float64{0.05, 0.5, 0.51, 1.2}},
	} {
		a, err := boundaries(c.sp, c.sides, c.t, gridR)
		if err != nil {
			t.Fatal(err)
		}
		b, err := boundaries(c.sp, c.sides, c.t, 4*gridR)
		if err != nil {
			t.Fatal(err)
		}
		for j := range a.Looks {
			if d := math.Abs(a.Looks[j].Critical - b.Looks[j].Critical); d > 1e-7 {
				t.Errorf("%v %v %v look %d: r=%d gives %.12g, r=%d %.12g", c.sp, c.sides, c.t, j+1, gridR, a.Looks[j].Critical, 4*gridR, b.Looks[j].Critical)
			}
		}
	}
}

// TestOverrunAndLooks checks the rules around the schedule (common
// practice for alpha spending, Jennison and Turnbull 2000, section 7.2):
// a look past t = 1 after alpha was all spent has an infinite boundary and
// never crosses; adding a look does not move the earlier boundaries; a
// one-sided test crosses only upward, a two-sided one both ways.
func TestOverrunAndLooks(t *testing.T) {
	sp := Spending{OBrienFleming, 0.05}
	b, err := Boundaries(sp, TwoSided, []float64{0.4, 0.8, 1.05, 1.2})
	if err != nil {
		t.Fatal(err)
	}
	last := b.Looks[3]
	if !math.IsInf(last.Critical, 1) || last.Increment != 0 || last.Spent != 0.05 || last.NominalP != 0 {
		t.Errorf("look after the spending ran out: %+v", last)
	}
	if b.Crossed(4, 50) || b.Crossed(4, -50) {
		t.Error("a look with no alpha left crossed")
	}
	short, err := Boundaries(sp, TwoSided, []float64{0.4, 0.8})
	if err != nil {
		t.Fatal(err)
	}
	for j := range short.Looks {
		if short.Looks[j] != b.Looks[j] {
			t.Errorf("look %d moved when later looks were added: %+v vs %+v", j+1, short.Looks[j], b.Looks[j])
		}
	}
	c := b.Looks[1].Critical
	if !b.Crossed(2, -c-1e-9) || !b.Crossed(2, c) || b.Crossed(2, c-1e-6) {
		t.Errorf("two-sided crossing at c = %v wrong", c)
	}
	one, err := Boundaries(Spending{Pocock, 0.025}, OneSided, []float64{0.5, 1})
	if err != nil {
		t.Fatal(err)
	}
	if one.Crossed(1, -10) || !one.Crossed(1, 10) {
		t.Error("one-sided crossing wrong")
	}
	if got := one.FirstCrossing([]float64{1, 10}); got != 2 {
		t.Errorf("first crossing %d, want 2", got)
	}
	if got := one.FirstCrossing([]float64{1}); got != 0 {
		t.Errorf("first crossing %d, want 0", got)
	}
}

func TestBoundariesBadInput(t *testing.T) {
	good := Spending{Pocock, 0.05}
	for _, c := range []struct {
		sp    Spending
		sides Sides
		t     []float64
	}{
		{Spending{0, 0.05}, TwoSided, []float64{1}},
		{Spending{Pocock, 0}, TwoSided, []float64{1}},
		{Spending{Pocock, 1}, TwoSided, []float64{1}},
		{good, 0, []float64{1}},
		{good, TwoSided, nil},
		{good, TwoSided, []float64{0, 1}},
		{good, TwoSided, []float64{0.5, 0.5}},
		{good, TwoSided, []float64{0.5, math.NaN()}},
		{good, TwoSided, []float64{0.5, math.Inf(1)}},
	} {
		if _, err := Boundaries(c.sp, c.sides, c.t); !errors.Is(err, ErrBadSetting) {
			t.Errorf("%+v %v %v: error %v", c.sp, c.sides, c.t, err)
		}
	}
	if _, _, err := CrossingProbabilities(TwoSided, []float64{0.5, 1}, []float64{2}, 0); !errors.Is(err, ErrBadSetting) {
		t.Errorf("short critical values: %v", err)
	}
	if a, err := SplitAlpha(0.05, 4); err != nil || a != 0.0125 {
		t.Errorf("SplitAlpha(0.05, 4) = %v, %v; want 0.0125 (Bonferroni: 0.05/4)", a, err)
	}
	if _, err := SplitAlpha(0.05, 0); !errors.Is(err, ErrBadSetting) {
		t.Errorf("SplitAlpha with no comparisons: %v", err)
	}
}
