package stats

import (
	"math"
	"testing"
)

func TestNormalUpperTail(t *testing.T) {
	tests := []struct {
		id           string
		z, q, twoSid float64
	}{
		{"NT-01", 5, 2.866515718791939e-07, 5.733031437583878e-07},     // experiment/REFERENCE-VALUES.md NT-01 (R 4.2.2 pnorm(z, lower.tail=FALSE); 2*pnorm(-|z|))
		{"NT-02", 8, 6.220960574271785e-16, 1.244192114854357e-15},     // experiment/REFERENCE-VALUES.md NT-02 (R 4.2.2 pnorm)
		{"NT-03", 10, 7.619853024160527e-24, 1.5239706048321054e-23},   // experiment/REFERENCE-VALUES.md NT-03 (R 4.2.2 pnorm)
		{"NT-04", 20, 2.7536241186062337e-89, 5.5072482372124675e-89},  // experiment/REFERENCE-VALUES.md NT-04 (R 4.2.2 pnorm)
		{"NT-05", 37, 5.725571222524577e-300, 1.1451142445049154e-299}, // experiment/REFERENCE-VALUES.md NT-05 (R 4.2.2 pnorm)
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			near(t, "Q(z)", NormalUpperTail(tc.z), tc.q, 1e-12, 0)
			near(t, "Q(-(-z))", NormalUpperTail(-(-tc.z)), tc.q, 1e-12, 0)
			near(t, "two-sided p", ZPValue(tc.z, TwoSided), tc.twoSid, 1e-12, 0)
			near(t, "two-sided p of -z", ZPValue(-tc.z, TwoSided), tc.twoSid, 1e-12, 0)
			near(t, "greater p", ZPValue(tc.z, Greater), tc.q, 1e-12, 0)
			near(t, "less p of -z", ZPValue(-tc.z, Less), tc.q, 1e-12, 0)
		})
	}
}

// TestNormalUpperTailAt30 guards against computing the tail as 1 - Phi(z),
// which is 0 from z = 8.3 on.
func TestNormalUpperTailAt30(t *testing.T) {
	z := 30.0
	got := NormalUpperTail(z)
	if got == 0 {
		t.Fatal("Q(30) = 0: the tail was computed as 1 - Phi(z)")
	}
	near(t, "Q(30)", got, 4.9067139271481872e-198, 1e-12, 0)                   // R 4.2.2: pnorm(30, lower.tail=FALSE)
	near(t, "2Q(30)", ZPValue(z, TwoSided), 9.8134278542963744e-198, 1e-12, 0) // R 4.2.2: 2*pnorm(-30)
	near(t, "less p at z=-30", ZPValue(-z, Less), 4.9067139271481872e-198, 1e-12, 0)
	// Second check, independent of R: the asymptotic series
	// Q(z) = phi(z)/z (1 - 1/z^2 + 3/z^4 - 15/z^6 + 105/z^8 - ...), whose
	// next term at z = 30 is 945/30^10 = 1.6e-12 relative.
	series := math.Exp(-z*z/2) / math.Sqrt(2*math.Pi) / z * (1 - 1/(z*z) + 3/math.Pow(z, 4) - 15/math.Pow(z, 6) + 105/math.Pow(z, 8))
	near(t, "Q(30) vs asymptotic series", got, series, 1e-11, 0)
	near(t, "greater p at z=-30", ZPValue(-30, Greater), 1, 1e-15, 0)
}

func TestNormalQuantile(t *testing.T) {
	tests := []struct {
		id      string
		p, want float64
	}{
		{"NQ-01", 0.975, 1.9599639845400536},  // experiment/REFERENCE-VALUES.md NQ-01 (R 4.2.2 qnorm)
		{"NQ-02", 0.995, 2.5758293035489},     // experiment/REFERENCE-VALUES.md NQ-02 (R 4.2.2 qnorm)
		{"NQ-03", 0.9995, 3.2905267314919255}, // experiment/REFERENCE-VALUES.md NQ-03 (R 4.2.2 qnorm)
		{"NQ-04", 1e-10, -6.361340902404056},  // experiment/REFERENCE-VALUES.md NQ-04 (R 4.2.2 qnorm)
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			near(t, "quantile", NormalQuantile(tc.p), tc.want, 1e-12, 0)
			// Round trip through the tail (a property, not a reference).
			if tc.p < 0.5 {
				near(t, "Phi(quantile)", NormalUpperTail(-NormalQuantile(tc.p)), tc.p, 1e-13, 0)
			} else {
				near(t, "Q(quantile)", NormalUpperTail(NormalQuantile(tc.p)), 1-tc.p, 1e-11, 0)
			}
		})
	}
	if !math.IsNaN(NormalQuantile(1.5)) || !math.IsNaN(NormalQuantile(-0.1)) {
		t.Error("NormalQuantile outside [0, 1] should be NaN")
	}
}

func TestCriticalValue(t *testing.T) {
	tests := []struct {
		id    string
		alpha float64
		alt   Alternative
		want  float64
	}{
		{"CV-01", 0.1, Greater, 1.2815515655446008},   // experiment/REFERENCE-VALUES.md CV-01 (R 4.2.2 qnorm(alpha, lower.tail=FALSE))
		{"CV-02", 0.05, Greater, 1.6448536269514726},  // experiment/REFERENCE-VALUES.md CV-02
		{"CV-03", 0.01, Less, 2.3263478740408408},     // experiment/REFERENCE-VALUES.md CV-03 (one-sided; less uses the same positive value)
		{"CV-04", 0.1, TwoSided, 1.6448536269514726},  // experiment/REFERENCE-VALUES.md CV-04
		{"CV-05", 0.05, TwoSided, 1.9599639845400538}, // experiment/REFERENCE-VALUES.md CV-05
		{"CV-06", 0.01, TwoSided, 2.5758293035489},    // experiment/REFERENCE-VALUES.md CV-06
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			near(t, "critical value", CriticalValue(tc.alpha, tc.alt), tc.want, 1e-12, 0)
		})
	}
	for _, a := range []float64{0, 1, -1, math.NaN()} {
		if !math.IsNaN(CriticalValue(a, TwoSided)) {
			t.Errorf("CriticalValue(%v) should be NaN", a)
		}
	}
}

func TestZPValueCap(t *testing.T) {
	// 2 Q(0) = 1 exactly; common practice caps the two-sided p at 1.
	if got := ZPValue(0, TwoSided); got != 1 {
		t.Errorf("ZPValue(0, two-sided) = %v, want 1", got)
	}
	if got := ZPValue(0, Greater); got != 0.5 {
		t.Errorf("ZPValue(0, greater) = %v, want 0.5", got) // Q(0) = 1/2 by symmetry
	}
}

func TestAlternativeNames(t *testing.T) {
	for _, a := range []Alternative{TwoSided, Greater, Less} {
		got, err := ParseAlternative(a.String())
		if err != nil || got != a {
			t.Errorf("ParseAlternative(%q) = %v, %v", a.String(), got, err)
		}
	}
	want := map[Alternative]string{TwoSided: "two-sided", Greater: "greater", Less: "less"} // names fixed by experiment/DESIGN.md
	for a, s := range want {
		if a.String() != s {
			t.Errorf("%d.String() = %q, want %q", int(a), a.String(), s)
		}
	}
	if _, err := ParseAlternative("bigger"); err == nil {
		t.Error("ParseAlternative(bigger) should fail")
	}
	if d := DefaultOptions(); d != (Options{Alpha: 0.05, Level: 0.95, Alternative: TwoSided, MinCount: 5}) {
		t.Errorf("DefaultOptions() = %+v", d)
	}
}
