package experiment

import (
	"fmt"
	"hash/fnv"
	"math/rand/v2"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"
)

func sv(s string) SegmentValue {
	if s == nullSeg {
		return SegmentValue{}
	}
	return SegmentValue{Value: s, Valid: true}
}

func svs(ss ...string) []SegmentValue {
	out := make([]SegmentValue, len(ss))
	for i, s := range ss {
		out[i] = sv(s)
	}
	return out
}

func collect(t *testing.T, seq func(func(UnitRecord) bool)) []UnitRecord {
	t.Helper()
	var out []UnitRecord
	seq(func(r UnitRecord) bool { out = append(out, r); return true })
	return out
}

// segRows is a log with two segment dimensions (platform, country) whose
// records and per-segment counts are worked out by hand in
// TestUnitRecordsAndSegments.
func segRows() []row {
	s := func(user string, at time.Duration, arm string, segs ...string) row {
		r := seen(user, at, arm)
		r.segs = segs
		return r
	}
	return []row{
		// u1: two exposures at t0 = 1h that disagree on both dimensions.
		s("u1", 1*hour, "control", "ios", "de"),
		s("u1", 1*hour, "control", "android", nullSeg),
		ev("u1", 2*hour, "buy"),
		// u2: the later row is read first; the earlier one decides.
		s("u2", 3*hour, "treat", "web", "fr"),
		s("u2", 2*hour, "treat", "ios", nullSeg),
		// u3: two arms at t0 = 5h, read treat first.
		s("u3", 5*hour, "treat", "b", "y"),
		s("u3", 5*hour, "control", "a", "x"),
		ev("u3", 6*hour, "buy"),
		// u4: treat at 1h, then control at 4h; no segment values.
		s("u4", 1*hour, "treat"),
		s("u4", 4*hour, "control"),
		ev("u4", 3*hour, "buy"),
		// u5: exposed 6h before the end with a 24h window; buys 1h
		// before the end.
		s("u5", 10*day-6*hour, "control", "ios", "de"),
		ev("u5", 10*day-hour, "buy"),
		// u6: never exposed.
		ev("u6", hour, "buy"),
	}
}

// TestUnitRecordsAndSegments checks the first stage (one record per unit)
// and the per-segment counts of the second, on segRows, under the policy
// first and maturity exclude. Worked out by hand:
//
//	u1: t0 1h, control; platform min(ios, android) = android; country: de
//	    beats the null; buys at 2h: converted.
//	u2: t0 2h (the row read second is earlier), treat; ios, null.
//	u3: tied at 5h (treat and control): status tied, arm control (the
//	    smaller name, whatever the row order); segments min: a, x.
//	u4: first exposure treat at 1h, later control: multi-arm but kept in
//	    treat under first; buy at 3h converts; segments null, null.
//	u5: t0 = end - 6h, window 24h: immature; its buy at end - 1h falls in
//	    the window, so converted is true too.
//
// Tally (exclude immature): control = u1, u5: 2 units, buy 1 of 1 (u5
// immature); treat = u2, u4: 2 units, buy 1 of 2. Exposed: control u1,
// u3, u5 = 3; treat 2. Platform values android < ios < null; country
// de < null.
func TestUnitRecordsAndSegments(t *testing.T) {
	spec := spec2()
	spec.MultiArm = MultiArmFirst
	spec.Segments = []string{"platform", "country"}
	want := []UnitRecord{
		{Unit: "u1", Arm: "control", T0: base.Add(1 * hour).UnixNano(), HasT0: true, Segments: svs("android", "de"),
			Converted: []bool{true}, Immature: []bool{false}},
		{Unit: "u2", Arm: "treat", T0: base.Add(2 * hour).UnixNano(), HasT0: true, Segments: svs("ios", nullSeg),
			Converted: []bool{false}, Immature: []bool{false}},
		{Unit: "u3", Arm: "control", T0: base.Add(5 * hour).UnixNano(), HasT0: true, Segments: svs("a", "x"),
			Status: StatusTied, MultiArm: true, Converted: []bool{false}, Immature: []bool{false}},
		{Unit: "u4", Arm: "treat", T0: base.Add(1 * hour).UnixNano(), HasT0: true, Segments: svs(nullSeg, nullSeg),
			MultiArm: true, Converted: []bool{true}, Immature: []bool{false}},
		{Unit: "u5", Arm: "control", T0: base.Add(10*day - 6*hour).UnixNano(), HasT0: true, Segments: svs("ios", "de"),
			Converted: []bool{true}, Immature: []bool{true}},
	}
	cell := func(v string, units int64, c Count) SegmentCell {
		return SegmentCell{Value: sv(v), Units: units, Metrics: []Count{c}}
	}
	wantArms := []ArmTally{
		{Name: "control", Exposed: 3, Units: 2, FirstExposure: base.Add(hour).UnixNano(), HasFirstExposure: true,
			Metrics: []Count{{Units: 1, Conversions: 1, Immature: 1}},
			Segments: []SegmentCounts{
				{"platform", []SegmentCell{cell("android", 1, Count{1, 1, 0}), cell("ios", 1, Count{0, 0, 1}), cell(nullSeg, 0, Count{})}},
				{"country", []SegmentCell{cell("de", 2, Count{1, 1, 1}), cell(nullSeg, 0, Count{})}},
			}},
		{Name: "treat", Exposed: 2, Units: 2, FirstExposure: base.Add(hour).UnixNano(), HasFirstExposure: true,
			Metrics: []Count{{Units: 2, Conversions: 1}},
			Segments: []SegmentCounts{
				{"platform", []SegmentCell{cell("android", 0, Count{}), cell("ios", 1, Count{1, 0, 0}), cell(nullSeg, 1, Count{1, 1, 0})}},
				{"country", []SegmentCell{cell("de", 0, Count{}), cell(nullSeg, 2, Count{2, 1, 0})}},
			}},
	}
	rows := segRows()
	reversed := slices.Clone(rows)
	slices.Reverse(reversed)
	for _, tc := range []struct {
		name string
		rows []row
		size int
	}{{"in order", rows, 0}, {"one row per batch", rows, 1}, {"reversed", reversed, 0}} {
		tl := tallier(t, spec, tc.rows, tc.size)
		seq, err := tl.Units()
		if err != nil {
			t.Fatal(err)
		}
		if got := collect(t, seq); !reflect.DeepEqual(got, want) {
			t.Errorf("%s: records\n got %+v\nwant %+v", tc.name, got, want)
		}
		got, err := tl.Tally()
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(got.Arms, wantArms) {
			t.Errorf("%s: arms\n got %+v\nwant %+v", tc.name, got.Arms, wantArms)
		}
		if d := got.Diag; d.UnitsExposed != 5 || d.MultiArmUnits != 2 || d.TiedUnits != 1 || d.UnitNeverExposed != 1 || d.UnitExcluded != 1 {
			t.Errorf("%s: diagnostics %+v", tc.name, d)
		}
		checkAccounting(t, tc.name, got.Diag)
	}

	// Without the segment columns the batch is refused, naming the
	// dimension.
	tl, err := NewTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	rec := batch(t, rows, "platform")
	defer rec.Release()
	if err := tl.Add(rec); err == nil || !strings.Contains(err.Error(), `"country"`) {
		t.Errorf("missing segment column: error %v", err)
	}
}

// unitRow is one row of a hand-made unit table; at < 0 means no time.
type unitRow struct {
	user, arm string
	at        time.Duration
	flags     []bool
	segs      []string
}

func ur(user, arm string, at time.Duration, flags ...bool) unitRow {
	return unitRow{user: user, arm: arm, at: at, flags: flags}
}

func (r unitRow) seg(s ...string) unitRow { r.segs = s; return r }

// runUnitTable tallies rows of a unit table in batches of size rows (0:
// one batch).
func runUnitTable(t *testing.T, spec Spec, rows []unitRow, timed bool, size int) *UnitTableTallier {
	t.Helper()
	tl, err := NewUnitTableTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	if size <= 0 {
		size = len(rows) + 1
	}
	for lo := 0; lo < len(rows); lo += size {
		rec := unitBatch(t, spec, rows[lo:min(lo+size, len(rows))], timed)
		err := tl.Add(rec)
		rec.Release()
		if err != nil {
			t.Fatal(err)
		}
	}
	return tl
}

func twoMetricSpec() Spec {
	spec := spec2()
	spec.Metrics = []Metric{
		{Name: "buy", Events: []string{"buy"}, Window: 24 * hour},
		{Name: "signup", Events: []string{"signup"}},
	}
	return spec
}

// TestUnitTable checks the multi-arm, window, maturity and conversion rules
// of the unit table on hand-made tables. The window is [0, 10d); buy has a
// 24h window, signup none. Worked out by hand:
//
//	a1: control at 1h (buy) and at 5h (signup), same arm: one unit, t0 1h,
//	    segment ios (the earliest row), converted on both (any row).
//	a2: treat at 2h, control at 3h (buy on the control row): multi-arm.
//	a3: treat at 10d-2h, buy: immature on buy (t0 + 24h > 10d), mature on
//	    signup (no window).
//	a4: control at 11d: outside the window, ignored and counted.
//
// Exclude: control = a1: buy 1/1, signup 1/1; treat = a3: buy 0/0 with 1
// immature, signup 0/1. First: a2 joins treat (earliest row) with its buy
// from the control row: treat buy 1/1 (+1 immature), signup 0/2.
func TestUnitTable(t *testing.T) {
	spec := twoMetricSpec()
	spec.Segments = []string{"platform"}
	rows := []unitRow{
		ur("a1", "control", 1*hour, true, false).seg("ios"),
		ur("a2", "treat", 2*hour, false, false).seg("web"),
		ur("a1", "control", 5*hour, false, true).seg("android"),
		ur("a2", "control", 3*hour, true, false).seg("web"),
		ur("a3", "treat", 10*day-2*hour, true, false).seg(nullSeg),
		ur("a4", "control", 11*day, true, true).seg("ios"),
	}
	cases := []struct {
		policy MultiArmPolicy
		arms   []armWant
		multi  int64
	}{
		{MultiArmExclude, []armWant{
			{"control", 1, []Count{{Units: 1, Conversions: 1}, {Units: 1, Conversions: 1}}},
			{"treat", 1, []Count{{Immature: 1}, {Units: 1}}},
		}, 1},
		{MultiArmFirst, []armWant{
			{"control", 1, []Count{{Units: 1, Conversions: 1}, {Units: 1, Conversions: 1}}},
			{"treat", 2, []Count{{Units: 1, Conversions: 1, Immature: 1}, {Units: 2}}},
		}, 1},
	}
	for _, tc := range cases {
		for _, size := range []int{0, 1} {
			spec.MultiArm = tc.policy
			tl := runUnitTable(t, spec, rows, true, size)
			got, err := tl.Tally()
			if err != nil {
				t.Fatal(err)
			}
			var arms []armWant
			for _, a := range got.Arms {
				arms = append(arms, armWant{a.Name, a.Units, a.Metrics})
			}
			name := fmt.Sprintf("%v/size %d", tc.policy, size)
			if !reflect.DeepEqual(arms, tc.arms) {
				t.Errorf("%s: arms %+v, want %+v", name, arms, tc.arms)
			}
			d := got.Diag
			if got.Input != InputUnitTable || d.RowsRead != 6 || d.ExposureRows != 6 || d.ExposuresOutsideWindow != 1 ||
				d.UnitsExposed != 3 || d.MultiArmUnits != tc.multi || d.TiedUnits != 0 || got.HasFreshness {
				t.Errorf("%s: input %v, diagnostics %+v", name, got.Input, d)
			}
			recs := collect(t, tl.Units())
			if len(recs) != 3 || recs[0].Unit != "a1" || !reflect.DeepEqual(recs[0].Segments, svs("ios")) ||
				!reflect.DeepEqual(recs[0].Converted, []bool{true, true}) || recs[0].T0 != base.Add(hour).UnixNano() ||
				!reflect.DeepEqual(recs[2].Immature, []bool{true, false}) {
				t.Errorf("%s: records %+v", name, recs)
			}
		}
	}
}

// TestUnitTableWithoutTimes: without exposure times a unit in two arms has
// no first arm, so under the policy first it is tied; nothing is immature
// even with a window end. Worked out by hand:
//
//	b1: control (no buy), treat (buy): tied, arm control (smaller name).
//	b2: treat twice, segments x and w: one unit, segment w (smallest),
//	    converted (one row says so).
//	b3: control, null segment, no buy.
//
// control: b3, 1 unit, buy 0/1; treat: b2, buy 1/1. Exposed: control b1,
// b3; treat b2.
func TestUnitTableWithoutTimes(t *testing.T) {
	spec := spec2()
	spec.MultiArm = MultiArmFirst
	spec.Segments = []string{"platform"}
	rows := []unitRow{
		ur("b1", "treat", -1, true).seg("x"),
		ur("b2", "treat", -1, true).seg("x"),
		ur("b1", "control", -1, false).seg("x"),
		ur("b2", "treat", -1, false).seg("w"),
		ur("b3", "control", -1, false).seg(nullSeg),
	}
	tl := runUnitTable(t, spec, rows, false, 0)
	got, err := tl.Tally()
	if err != nil {
		t.Fatal(err)
	}
	cell := func(v string, units int64, c Count) SegmentCell {
		return SegmentCell{Value: sv(v), Units: units, Metrics: []Count{c}}
	}
	want := []ArmTally{
		{Name: "control", Exposed: 2, Units: 1, Metrics: []Count{{Units: 1}},
			Segments: []SegmentCounts{{"platform", []SegmentCell{cell("w", 0, Count{}), cell(nullSeg, 1, Count{Units: 1})}}}},
		{Name: "treat", Exposed: 1, Units: 1, Metrics: []Count{{Units: 1, Conversions: 1}},
			Segments: []SegmentCounts{{"platform", []SegmentCell{cell("w", 1, Count{1, 1, 0}), cell(nullSeg, 0, Count{})}}}},
	}
	if !reflect.DeepEqual(got.Arms, want) {
		t.Errorf("arms\n got %+v\nwant %+v", got.Arms, want)
	}
	if d := got.Diag; d.TiedUnits != 1 || d.MultiArmUnits != 1 || d.UnitsExposed != 3 {
		t.Errorf("diagnostics %+v", d)
	}
	recs := collect(t, tl.Units())
	if recs[0].Unit != "b1" || recs[0].Status != StatusTied || recs[0].Arm != "control" || recs[0].HasT0 {
		t.Errorf("b1 record %+v", recs[0])
	}
}

func TestUnitTableErrors(t *testing.T) {
	spec := spec2()
	cases := []struct {
		name string
		rows []unitRow
		want string
	}{
		{"empty user", []unitRow{ur("u1", "control", hour, true), ur("", "control", hour, true)}, `unit table row 2: column "user": null or empty unit`},
		{"empty arm", []unitRow{ur("u1", "", hour, true)}, `unit table row 1: column "arm": null or empty arm`},
	}
	for _, tc := range cases {
		tl, err := NewUnitTableTallier(spec)
		if err != nil {
			t.Fatal(err)
		}
		rec := unitBatch(t, spec, tc.rows, true)
		err = tl.Add(rec)
		rec.Release()
		if err == nil || err.Error() != tc.want {
			t.Errorf("%s: error %v, want %q", tc.name, err, tc.want)
		}
	}
	bad := spec2()
	bad.Metrics[0].Name = "arm"
	if _, err := NewUnitTableTallier(bad); err == nil {
		t.Error("a metric named arm was accepted")
	}
	bad = spec2()
	bad.Segments = []string{"buy"}
	if _, err := NewUnitTableTallier(bad); err == nil || !strings.Contains(err.Error(), "segment dimension \"buy\"") {
		t.Errorf("a segment named like a metric: error %v", err)
	}
}

// countRow is one row of a hand-made counts table; imm < 0 leaves the
// immature column out of the batch (for every row).
type countRow struct {
	arm, seg, metric             string
	units, conversions, immature int64
}

// TestCounts checks the counts shape on a table worked out by hand:
//
//	control ios   buy 40/4 +10 immature, signup 50/5   (population 50)
//	control null  buy 30/3,              signup 30/6   (population 30)
//	treat   ios   buy 45/9 +5 immature,  signup 50/10  (population 50)
//	treat android buy 20/2,              signup 20/1   (population 20)
//
// control: 80 units, buy 70/7 +10, signup 80/11; treat: 70 units, buy
// 65/11 +5, signup 70/11. Platform values android < ios < null.
func TestCounts(t *testing.T) {
	spec := twoMetricSpec()
	spec.Segments = []string{"platform"}
	rows := []countRow{
		{"treat", "android", "signup", 20, 1, 0},
		{"control", "ios", "buy", 40, 4, 10},
		{"control", "ios", "signup", 50, 5, 0},
		{"control", nullSeg, "buy", 30, 3, 0},
		{"control", nullSeg, "signup", 30, 6, 0},
		{"treat", "ios", "buy", 45, 9, 5},
		{"treat", "ios", "signup", 50, 10, 0},
		{"treat", "android", "buy", 20, 2, 0},
	}
	for _, size := range []int{0, 3} {
		got := runCounts(t, spec, rows, true, size)
		cell := func(v string, units int64, buy, signup Count) SegmentCell {
			return SegmentCell{Value: sv(v), Units: units, Metrics: []Count{buy, signup}}
		}
		want := []ArmTally{
			{Name: "control", Exposed: 80, Units: 80, Metrics: []Count{{70, 7, 10}, {80, 11, 0}},
				Segments: []SegmentCounts{{"platform", []SegmentCell{
					cell("android", 0, Count{}, Count{}), cell("ios", 50, Count{40, 4, 10}, Count{50, 5, 0}), cell(nullSeg, 30, Count{30, 3, 0}, Count{30, 6, 0}),
				}}}},
			{Name: "treat", Exposed: 70, Units: 70, Metrics: []Count{{65, 11, 5}, {70, 11, 0}},
				Segments: []SegmentCounts{{"platform", []SegmentCell{
					cell("android", 20, Count{20, 2, 0}, Count{20, 1, 0}), cell("ios", 50, Count{45, 9, 5}, Count{50, 10, 0}), cell(nullSeg, 0, Count{}, Count{}),
				}}}},
		}
		if !reflect.DeepEqual(got.Arms, want) {
			t.Errorf("size %d: arms\n got %+v\nwant %+v", size, got.Arms, want)
		}
		if got.Input != InputCounts || got.Diag.RowsRead != 8 || got.Diag.UnitsExposed != 150 {
			t.Errorf("size %d: input %v diagnostics %+v", size, got.Input, got.Diag)
		}
	}
}

func runCounts(t *testing.T, spec Spec, rows []countRow, immature bool, size int) Tally {
	t.Helper()
	got, err := tryCounts(t, spec, rows, immature, size)
	if err != nil {
		t.Fatal(err)
	}
	return got
}

func tryCounts(t *testing.T, spec Spec, rows []countRow, immature bool, size int) (Tally, error) {
	t.Helper()
	ct, err := NewCountsTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	if size <= 0 {
		size = len(rows) + 1
	}
	for lo := 0; lo < len(rows); lo += size {
		rec := countsBatch(t, spec, rows[lo:min(lo+size, len(rows))], immature)
		err := ct.Add(rec)
		rec.Release()
		if err != nil {
			return Tally{}, err
		}
	}
	return ct.Tally()
}

func TestCountsErrors(t *testing.T) {
	spec := twoMetricSpec()
	ok := []countRow{{"control", "", "buy", 10, 1, 0}, {"control", "", "signup", 10, 2, 0}}
	cases := []struct {
		name     string
		rows     []countRow
		immature bool
		maturity MaturityPolicy
		want     string
	}{
		{"negative", []countRow{{"control", "", "buy", -1, 0, 0}}, true, 0, `counts table row 1: column "units": negative count -1`},
		{"more conversions than units", []countRow{ok[0], {"control", "", "signup", 10, 11, 0}}, true, 0, `counts table row 2: column "conversions": 11 conversions out of 10 units`},
		{"unknown metric", []countRow{{"control", "", "refund", 10, 1, 0}}, true, 0, `counts table row 1: column "metric": unknown metric "refund" (the metrics are buy, signup)`},
		{"empty arm", []countRow{{"", "", "buy", 10, 1, 0}}, true, 0, `counts table row 1: column "arm": null or empty arm`},
		{"duplicate", append(slices.Clone(ok), ok[1]), true, 0, `counts table rows 2 and 3: the same cell (arm "control", metric "signup") twice; duplicates are not summed`},
		{"missing metric", ok[:1], true, 0, `counts table: arm "control" has no row for metric "signup"`},
		// buy: 8 units + 2 immature = 10 = signup's 10 under exclude...
		{"consistent with immature", []countRow{{"control", "", "buy", 8, 1, 2}, ok[1]}, true, 0, ""},
		// ...but not under include, where units already count them.
		{"inconsistent under include", []countRow{{"control", "", "buy", 8, 1, 2}, ok[1]}, true, MaturityInclude,
			`counts table rows 1 and 2: arm "control": units is 8 for metric "buy" but 10 for metric "signup"; every metric must count the same units`},
		{"inconsistent without immature column", []countRow{{"control", "", "buy", 8, 1, 2}, ok[1]}, false, 0,
			`counts table rows 1 and 2: arm "control": units + immature is 8 for metric "buy" but 10 for metric "signup"; every metric must count the same units`},
		{"immature above units under include", []countRow{{"control", "", "buy", 8, 1, 9}, ok[1]}, true, MaturityInclude,
			`counts table row 1: column "immature": 9 immature units out of 8 units (under the maturity policy include, units count the immature ones)`},
	}
	for _, tc := range cases {
		s := spec
		s.Maturity = tc.maturity
		_, err := tryCounts(t, s, tc.rows, tc.immature, 0)
		got := ""
		if err != nil {
			got = err.Error()
		}
		if got != tc.want {
			t.Errorf("%s: error %q, want %q", tc.name, got, tc.want)
		}
	}
}

// TestMergeTallies checks that tallies of hash partitions of a log merge
// into the tally of the whole log, with a window end (where the merge is
// exact) and across partitions, batches and policies. The log is random
// but fixed by its seed.
func TestMergeTallies(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	arms := []string{"control", "treat", "zeta"}
	var rows []row
	for u := range 600 {
		user := fmt.Sprintf("u%03d", u)
		for range 1 + rng.IntN(3) {
			r := seen(user, time.Duration(rng.IntN(240))*hour, arms[rng.IntN(3)])
			r.segs = []string{[]string{"ios", "web", nullSeg}[rng.IntN(3)]}
			rows = append(rows, r)
		}
		for range rng.IntN(3) {
			rows = append(rows, ev(user, time.Duration(rng.IntN(260))*hour, []string{"buy", "view"}[rng.IntN(2)]))
		}
	}
	for _, policy := range []MultiArmPolicy{MultiArmExclude, MultiArmFirst} {
		spec := spec2()
		spec.Arms = nil
		spec.MultiArm = policy
		spec.Segments = []string{"platform"}
		whole := tally(t, spec, rows, 0)
		parts := make([][]row, 4)
		for _, r := range rows {
			h := fnv.New32a()
			h.Write([]byte(r.user))
			parts[h.Sum32()%4] = append(parts[h.Sum32()%4], r)
		}
		var tallies []Tally
		for _, p := range parts {
			tallies = append(tallies, tally(t, spec, p, 7))
		}
		merged, err := MergeTallies(spec, tallies...)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(merged, whole) {
			t.Errorf("%v: merged tally differs from the whole:\nmerged %+v\nwhole  %+v", policy, merged, whole)
		}
		if whole.Diag.UnitsExposed != 600 || whole.Diag.MultiArmUnits == 0 {
			t.Errorf("%v: the log does not exercise the merge: %+v", policy, whole.Diag)
		}
	}
	if _, err := MergeTallies(spec2(), Tally{}, Tally{Input: InputCounts}); err == nil {
		t.Error("tallies of two input shapes merged")
	}
	// Two parts, each with exposures of one experiment: without a key the
	// whole is ambiguous, as Tally would say of the unsplit log.
	spec := spec2()
	spec.Key = ""
	a := tally(t, spec, []row{seen("a", 0, "control")}, 0)
	other := seen("b", hour, "treat")
	other.exp = "exp-other"
	b := tally(t, spec, []row{other}, 0)
	want := ambiguousKeys([]string{"exp", "exp-other"}).Error()
	if _, err := tallier(t, spec, []row{seen("a", 0, "control"), other}, 0).Tally(); err == nil || err.Error() != want {
		t.Fatalf("the unsplit log: %v, want %q", err, want)
	}
	if _, err := MergeTallies(spec, a, b); err == nil || err.Error() != want {
		t.Errorf("merged parts of two experiments without a key: %v, want %q", err, want)
	}
}

// TestAccumulatorMerge checks that records summed in two accumulators and
// merged give the sums of one accumulator given them all, whichever way
// they are split: the parallel sum of a tally's partitions relies on it.
// The records mix arms, segments (null included), a tied and a multi-arm
// unit and an immature one; the expected sums are the single
// accumulator's (invented records, checked by construction).
func TestAccumulatorMerge(t *testing.T) {
	recs := []UnitRecord{
		{Unit: "u1", Arm: "control", T0: 10, HasT0: true, Segments: svs("android", "de"), Converted: []bool{true}, Immature: []bool{false}},
		{Unit: "u2", Arm: "treat", T0: 20, HasT0: true, Segments: svs("ios", nullSeg), Converted: []bool{false}, Immature: []bool{false}},
		{Unit: "u3", Arm: "control", T0: 5, HasT0: true, Segments: svs("a", "x"), Status: StatusTied, MultiArm: true, Converted: []bool{false}, Immature: []bool{false}},
		{Unit: "u4", Arm: "extra", T0: 1, HasT0: true, Segments: svs(nullSeg, nullSeg), MultiArm: true, Converted: []bool{true}, Immature: []bool{false}},
		{Unit: "u5", Arm: "control", T0: 30, HasT0: true, Segments: svs("ios", "de"), Converted: []bool{true}, Immature: []bool{true}},
		{Unit: "u6", Arm: "treat", T0: 40, HasT0: true, Segments: svs("ios", "fr"), Status: StatusMultiArm, MultiArm: true, Converted: []bool{false}, Immature: []bool{false}},
	}
	for _, policy := range []MaturityPolicy{MaturityExclude, MaturityInclude} {
		spec := spec2()
		spec.Arms = []string{"control", "treat"}
		spec.Segments = []string{"platform", "country"}
		spec.Maturity = policy
		whole, err := NewAccumulator(spec)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range recs {
			if err := whole.Add(r); err != nil {
				t.Fatal(err)
			}
		}
		want := whole.Tally()
		if want.Diag.TiedUnits != 1 || want.Diag.MultiArmUnits != 3 || len(want.Arms) != 3 {
			t.Fatalf("the records do not exercise the merge: %+v", want)
		}
		for split := range 1 << len(recs) {
			a, _ := NewAccumulator(spec)
			b, _ := NewAccumulator(spec)
			for i, r := range recs {
				dst := a
				if split>>i&1 == 1 {
					dst = b
				}
				if err := dst.Add(r); err != nil {
					t.Fatal(err)
				}
			}
			a.merge(b)
			if got := a.Tally(); !reflect.DeepEqual(got, want) {
				t.Fatalf("maturity %v, split %06b: merged\n%+v\nwant\n%+v", policy, split, got, want)
			}
		}
	}
}
