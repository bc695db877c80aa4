package experiment

import (
	"strings"
	"testing"
)

// TestAnalyzeSegments checks the segment results of Analyze against R
// 4.2.2 (report/testdata/fixtures.R, "== two_arm segments", the purchase
// counts): per device, treat against control.
//
//	desktop: 700/5500 vs 618/5590, z = 2.7201459642753676,
//	         p = 0.0065253105321404796, Newcombe [0.0046705025812794759,
//	         0.028781204135497587]
//	tablet:  control 2/10, treat none: no test
//	null:    2/8 vs 3/12: Fisher's exact test p = 1 (too few conversions)
func TestAnalyzeSegments(t *testing.T) {
	spec := spec2()
	spec.Segments = []string{"device"}
	cell := func(v string, x, n int64) SegmentCell {
		return SegmentCell{Value: sv(v), Units: n, Metrics: []Count{{Units: n, Conversions: x}}}
	}
	tl := Tally{Arms: []ArmTally{
		{Name: "control", Units: 5612, Metrics: []Count{{Units: 5612, Conversions: 623}},
			Segments: []SegmentCounts{{"device", []SegmentCell{cell("desktop", 618, 5590), cell("tablet", 2, 10), cell(nullSeg, 3, 12)}}}},
		// treat lists no tablet value: it reads as no units.
		{Name: "treat", Units: 5508, Metrics: []Count{{Units: 5508, Conversions: 702}},
			Segments: []SegmentCounts{{"device", []SegmentCell{cell("desktop", 700, 5500), cell(nullSeg, 2, 8)}}}},
	}}
	r, err := Analyze(spec, tl, DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	segs := r.Metrics[0].Segments
	if len(segs) != 3 || *segs[0].Value != "desktop" || *segs[1].Value != "tablet" || segs[2].Value != nil {
		t.Fatalf("segments %+v", segs)
	}
	d := segs[0].Comparisons[0]
	near(t, "desktop z", d.Z.Statistic, 2.7201459642753676, 1e-12)
	near(t, "desktop p", d.Z.PValue, 0.0065253105321404796, 1e-10)
	near(t, "desktop Newcombe lower", d.DifferenceInterval.Lower, 0.0046705025812794759, 1e-12)
	near(t, "desktop Newcombe upper", d.DifferenceInterval.Upper, 0.028781204135497587, 1e-12)
	if !d.Significant || !d.SignificantUnadjusted || d.Adjusted != nil || d.DecidedBy != DecidedByZ || !segs[0].Exploratory {
		t.Errorf("desktop decision %+v", d)
	}
	if c := segs[1].Comparisons[0]; c.Z != nil || c.DecidedBy != "" || segs[1].Arms[1].Rate != nil {
		t.Errorf("tablet: %+v", segs[1])
	}
	n := segs[2].Comparisons[0]
	if n.Exact == nil || n.DecidedBy != DecidedByExact || n.Significant {
		t.Fatalf("null segment %+v", n)
	}
	near(t, "null Fisher p", n.Exact.PValue, 1, 1e-12)
	// The family is the main comparison only.
	if r.Multiplicity.Size != 1 || r.Metrics[0].Comparisons[0].Adjusted == nil {
		t.Errorf("multiplicity %+v", r.Multiplicity)
	}
	// Two tests (desktop, null); the tablet has no units in one arm.
	if sg := r.Segmentation; sg.Tests != 2 || len(sg.Dimensions) != 1 {
		t.Errorf("segmentation %+v", sg)
	}

	// A tally without segment counts for a spec with dimensions is refused.
	for i := range tl.Arms {
		tl.Arms[i].Segments = nil
	}
	if _, err := Analyze(spec, tl, DefaultAnalysisOptions()); err == nil || !strings.Contains(err.Error(), "no segment counts") {
		t.Errorf("missing segments: error %v", err)
	}
}
