package stats

import (
	"errors"
	"math"
	"testing"
)

// Sample-size planning, experiment/REFERENCE-VALUES.md section 11. Normal n:
// R 4.2.2 stats::power.prop.test(p1, p2, power, sig.level, tol=1e-12)
// (strict=TRUE for both tails); continuity correction: the closed form of
// Fleiss, Tytun & Ury (1980) evaluated in R; Cohen's h and arcsine n: pwr
// 1.3.0 ES.h and the pwr.2p.test power function solved with
// uniroot(tol=1e-12).
func TestSampleSize(t *testing.T) {
	tests := []struct {
		id                      string
		p1, p2, alpha, power    float64
		alt                     Alternative
		n, both, cc, h, arcsine float64
		nCeil, arcsineCeil      int64
	}{
		{"SS-01", 0.1, 0.12, 0.05, 0.8, TwoSided, 3840.8474824362756, 3840.8381709803757, 3940.2129989703694, -0.06398210298605855, 3834.595739877138, 3841, 3835},
		{"SS-02", 0.05, 0.055, 0.05, 0.8, TwoSided, 31233.43794013004, 31233.36153372452, 31632.173404826448, -0.022424345475803797, 31217.423430359773, 31234, 31218},
		{"SS-03", 0.2, 0.25, 0.05, 0.9, TwoSided, 1463.707305029553, 1463.7068157986064, 1503.441248740134, -0.11990233319498567, 1461.742233513618, 1464, 1462},
		{"SS-04", 0.5, 0.6, 0.01, 0.8, TwoSided, 576.6680740033802, 576.6680729528699, 596.5004295306366, -0.20135792079033066, 576.0988834945308, 577, 577},
		// One-sided: no strict row in the reference; both tails equal n.
		{"SS-05", 0.1, 0.11, 0.05, 0.8, Greater, 11619.069936521051, 11619.069936521051, 11818.223785679664, -0.03262940076737697, 11613.949805880386, 11620, 11614},
		{"SS-06", 0.5, 0.75, 0.05, 0.9, TwoSided, 76.70692845177744, 76.70691611581738, 84.51761881166969, -0.5235987755982985, 76.65294035637665, 77, 77},
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			n, err := SampleSizeNormal(tc.p1, tc.p2, tc.alpha, tc.power, tc.alt)
			if err != nil {
				t.Fatal(err)
			}
			near(t, "n normal", n, tc.n, 1e-10, 0)
			nc, err := SampleSizePerArm(tc.p1, tc.p2, tc.alpha, tc.power, tc.alt)
			if err != nil || nc != tc.nCeil {
				t.Errorf("SampleSizePerArm = %d, %v; want %d", nc, err, tc.nCeil)
			}
			both, err := SampleSizeNormalBothTails(tc.p1, tc.p2, tc.alpha, tc.power, tc.alt)
			if err != nil {
				t.Fatal(err)
			}
			near(t, "n both tails", both, tc.both, 1e-10, 0)
			cc, err := SampleSizeContinuityCorrected(tc.p1, tc.p2, tc.alpha, tc.power, tc.alt)
			if err != nil {
				t.Fatal(err)
			}
			near(t, "n continuity corrected", cc, tc.cc, 1e-10, 0)
			h, err := CohenH(tc.p1, tc.p2)
			if err != nil {
				t.Fatal(err)
			}
			near(t, "Cohen's h", h, tc.h, 1e-10, 0)
			na, err := SampleSizeArcsine(tc.p1, tc.p2, tc.alpha, tc.power, tc.alt)
			if err != nil {
				t.Fatal(err)
			}
			near(t, "n arcsine", na, tc.arcsine, 1e-8, 0)
			if int64(math.Ceil(na)) != tc.arcsineCeil {
				t.Errorf("arcsine n rounded up = %v, want %d", math.Ceil(na), tc.arcsineCeil)
			}
			// Round trip: the power at the solved n is the target.
			pw, _ := PowerNormal(n, tc.p1, tc.p2, tc.alpha, tc.alt)
			near(t, "power at n", pw, tc.power, 1e-12, 0)
		})
	}
}

// Power and detectable effects, experiment/REFERENCE-VALUES.md SS-07..SS-09:
// R 4.2.2 power.prop.test (strict=TRUE for both tails; tol=1e-12 when
// solving) and pwr 1.3.0 pwr.2p.test (uniroot tol=1e-14 for h).
func TestPower(t *testing.T) {
	tests := []struct {
		id                    string
		n, p1, p2             float64
		normal, both, arcsine float64
	}{
		{"SS-07", 50, 0.5, 0.75, 0.7401659013313879, 0.7401671934536111, 0.7447428863912471},
		{"SS-08", 5000, 0.1, 0.11, 0.3710889343229116, 0.3712533377715187, 0.3714335421335951},
	}
	for _, tc := range tests {
		t.Run(tc.id, func(t *testing.T) {
			got, err := PowerNormal(tc.n, tc.p1, tc.p2, 0.05, TwoSided)
			if err != nil {
				t.Fatal(err)
			}
			near(t, "power normal", got, tc.normal, 1e-10, 0)
			got, _ = PowerNormalBothTails(tc.n, tc.p1, tc.p2, 0.05, TwoSided)
			near(t, "power both tails", got, tc.both, 1e-10, 0)
			got, _ = PowerArcsine(tc.n, tc.p1, tc.p2, 0.05, TwoSided)
			near(t, "power arcsine", got, tc.arcsine, 1e-8, 0)
		})
	}
	t.Run("SS-09", func(t *testing.T) {
		p2, err := DetectableRate(10000, 0.1, 0.05, 0.8, TwoSided)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "detectable p2 normal", p2, 0.11220102507438608, 1e-8, 0)
		h, err := DetectableCohenH(10000, 0.05, 0.8, TwoSided)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "detectable h", h, 0.03962034959292054, 1e-8, 0)
		p2a, err := DetectableRateArcsine(10000, 0.1, 0.05, 0.8, TwoSided)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "detectable p2 arcsine", p2a, 0.1121969087287549, 1e-8, 0)
		// Less looks below the baseline: the mirror image (symmetry of
		// the formulas under p -> 1 - p, hand reasoning).
		lo, err := DetectableRate(10000, 0.9, 0.05, 0.8, Less)
		if err != nil {
			t.Fatal(err)
		}
		up, _ := DetectableRate(10000, 0.1, 0.05, 0.8, Greater)
		near(t, "mirror", lo, 1-up, 1e-9, 0)
	})
}

func TestPlanningBadInput(t *testing.T) {
	bad := []struct {
		p1, p2, alpha, power float64
	}{{0.1, 0.1, 0.05, 0.8}, {0, 0.1, 0.05, 0.8}, {0.1, 1, 0.05, 0.8}, {0.1, 0.2, 0, 0.8}, {0.1, 0.2, 0.05, 1}, {0.1, 0.2, 0.05, 0.01}}
	for _, b := range bad {
		if _, err := SampleSizePerArm(b.p1, b.p2, b.alpha, b.power, TwoSided); !errors.Is(err, ErrBadParameter) {
			t.Errorf("%+v: err = %v", b, err)
		}
		if _, err := SampleSizeArcsine(b.p1, b.p2, b.alpha, b.power, TwoSided); !errors.Is(err, ErrBadParameter) {
			t.Errorf("arcsine %+v: err = %v", b, err)
		}
	}
	if _, err := SampleSizePerArm(0.1, 0.1+1e-12, 0.05, 0.8, TwoSided); !errors.Is(err, ErrBadParameter) {
		t.Errorf("astronomical n: err = %v", err)
	}
	if _, err := PowerNormal(0, 0.1, 0.2, 0.05, TwoSided); !errors.Is(err, ErrBadParameter) {
		t.Errorf("n = 0: err = %v", err)
	}
	if _, err := DetectableRate(10, 0.99, 0.05, 0.99, Greater); !errors.Is(err, ErrUndefined) {
		t.Errorf("unreachable power: err = %v", err)
	}
}
