package stats

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// AdjustMethod is a multiple-comparison adjustment of p-values.
type AdjustMethod int

const (
	// None leaves the p-values as they are.
	None AdjustMethod = iota
	// Bonferroni multiplies each p-value by the number of comparisons.
	Bonferroni
	// Holm is Holm's step-down Bonferroni method (family-wise error).
	Holm
	// Hochberg is Hochberg's step-up method (family-wise error, for
	// independent or positively dependent tests).
	Hochberg
	// BenjaminiHochberg controls the false discovery rate for independent
	// or positively dependent tests.
	BenjaminiHochberg
	// BenjaminiYekutieli controls the false discovery rate under any
	// dependence.
	BenjaminiYekutieli
)

// String returns "none", "bonferroni", "holm", "hochberg", "bh" or "by".
func (m AdjustMethod) String() string {
	switch m {
	case None:
		return "none"
	case Bonferroni:
		return "bonferroni"
	case Holm:
		return "holm"
	case Hochberg:
		return "hochberg"
	case BenjaminiHochberg:
		return "bh"
	case BenjaminiYekutieli:
		return "by"
	}
	return fmt.Sprintf("AdjustMethod(%d)", int(m))
}

// Valid reports whether m is one of the methods above.
func (m AdjustMethod) Valid() bool { return m >= None && m <= BenjaminiYekutieli }

// ParseAdjustMethod parses the names String returns (case and surrounding
// space ignored).
func ParseAdjustMethod(s string) (AdjustMethod, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "none":
		return None, nil
	case "bonferroni":
		return Bonferroni, nil
	case "holm":
		return Holm, nil
	case "hochberg":
		return Hochberg, nil
	case "bh":
		return BenjaminiHochberg, nil
	case "by":
		return BenjaminiYekutieli, nil
	}
	return None, fmt.Errorf("%w: adjustment %q (want none, bonferroni, holm, hochberg, bh or by)", ErrBadParameter, s)
}

// AdjustPValues returns the adjusted p-values of m comparisons, in input
// order, as R's p.adjust computes them. With p(1) <= ... <= p(m) the sorted
// p-values and every result capped at 1:
//
//	Bonferroni:          m p(i)
//	Holm:                max over j <= i of (m - j + 1) p(j)
//	Hochberg:            min over j >= i of (m - j + 1) p(j)
//	Benjamini-Hochberg:  min over j >= i of (m / j) p(j)
//	Benjamini-Yekutieli: min over j >= i of (c(m) m / j) p(j), c(m) = sum 1/k
//
// A comparison is rejected when its adjusted p-value is <= alpha. Holm and
// Bonferroni control the family-wise error rate under any dependence;
// Hochberg and Benjamini-Hochberg need independent or positively dependent
// tests (Benjamini-Hochberg controls the false discovery rate, not the
// family-wise rate); Benjamini-Yekutieli controls the false discovery rate
// under any dependence.
//
// Special cases: an empty slice gives an empty result; a single p-value is
// returned unchanged by every method; ties are handled as R does. A p-value
// outside [0, 1] or NaN, or an unknown method, is an error wrapping
// [ErrBadParameter]. The input slice is not modified.
//
// References:
//
//  1. Holm S (1979). A simple sequentially rejective multiple test
//     procedure. Scandinavian Journal of Statistics 6(2):65-70.
//  2. Hochberg Y (1988). A sharper Bonferroni procedure for multiple tests
//     of significance. Biometrika 75(4):800-802.
//  3. Benjamini Y, Hochberg Y (1995). Controlling the false discovery rate:
//     a practical and powerful approach to multiple testing. Journal of the
//     Royal Statistical Society, Series B 57(1):289-300.
//  4. Benjamini Y, Yekutieli D (2001). The control of the false discovery
//     rate in multiple testing under dependency. Annals of Statistics
//     29(4):1165-1188.
func AdjustPValues(p []float64, m AdjustMethod) ([]float64, error) {
	for i, v := range p {
		if !(v >= 0 && v <= 1) {
			return nil, fmt.Errorf("adjust p-values: %w: p-value %d is %v, want a number in [0, 1]", ErrBadParameter, i+1, v)
		}
	}
	if m < None || m > BenjaminiYekutieli {
		return nil, fmt.Errorf("adjust p-values: %w: method %d", ErrBadParameter, int(m))
	}
	n := len(p)
	out := make([]float64, n)
	if n == 0 {
		return out, nil
	}
	nf := float64(n)
	switch m {
	case None:
		copy(out, p)
		return out, nil
	case Bonferroni:
		for i, v := range p {
			out[i] = math.Min(1, nf*v)
		}
		return out, nil
	}
	// order[r] is the input index of the r-th smallest p-value (stable).
	order := make([]int, n)
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return p[order[a]] < p[order[b]] })
	switch m {
	case Holm:
		running := 0.0
		for r, idx := range order {
			running = math.Max(running, (nf-float64(r))*p[idx])
			out[idx] = math.Min(1, running)
		}
	default:
		c := 1.0
		if m == BenjaminiYekutieli {
			c = 0
			for k := 1; k <= n; k++ {
				c += 1 / float64(k)
			}
		}
		running := math.Inf(1)
		for r := n - 1; r >= 0; r-- {
			idx := order[r]
			rank := float64(r + 1)
			var v float64
			switch m {
			case Hochberg:
				v = (nf - rank + 1) * p[idx]
			case BenjaminiHochberg:
				v = nf / rank * p[idx]
			default:
				v = c * nf / rank * p[idx]
			}
			running = math.Min(running, v)
			out[idx] = math.Min(1, running)
		}
	}
	return out, nil
}
