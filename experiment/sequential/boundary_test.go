package sequential

import (
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
