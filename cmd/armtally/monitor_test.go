package main

import (
	"context"
	"encoding/csv"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment/history"
	"github.com/armtally/armtally/experiment/sequential"
	"github.com/armtally/armtally/report"
)

// nightArgs are the analyze flags of night k (1-based) of a generated
// log whose exposures start on 2026-11-02: the look is as of midnight UTC
// k days later.
func nightArgs(log, hist string, k int, extra ...string) []string {
	asOf := time.Date(2026, 11, 2+k, 0, 0, 0, 0, time.UTC).Format(time.RFC3339)
	args := []string{"analyze", log, "--experiment", "checkout-flow-2026", "--control", "control",
		"--metric", "purchase=purchase:7d", "--start", "2026-11-02", "--maturity", "include",
		"--as-of", asOf, "--history", hist}
	return append(args, extra...)
}

// pooledZ is the pooled two-proportion z statistic, treatment minus
// control (Fleiss, Levin and Paik 2003, section 3.3), computed here from
// the counts, apart from armtally's statistics.
func pooledZ(x1, n1, x2, n2 int64) float64 {
	p1, p2 := float64(x1)/float64(n1), float64(x2)/float64(n2)
	p := float64(x1+x2) / float64(n1+n2)
	return (p1 - p2) / math.Sqrt(p*(1-p)*(1/float64(n1)+1/float64(n2)))
}

// mixtureP is the always-valid p-value of the normal-mixture SPRT at the
// looks given (Johari, Koomen, Pekelis and Walsh 2017, section 4: Lambda =
// sqrt(V/(V+tau2)) exp(tau2 d^2 / (2V(V+tau2))) with the unpooled variance
// V, p the running minimum of 1/Lambda), written here from the paper.
func mixtureP(tau2 float64, counts [][4]int64) float64 {
	p := 1.0
	for _, c := range counts {
		p1, p2 := float64(c[0])/float64(c[1]), float64(c[2])/float64(c[3])
		v := p1*(1-p1)/float64(c[1]) + p2*(1-p2)/float64(c[3])
		d := p1 - p2
		lambda := math.Sqrt(v/(v+tau2)) * math.Exp(tau2*d*d/(2*v*(v+tau2)))
		p = math.Min(p, 1/lambda)
	}
	return p
}

// directGS is the group-sequential decision at the last of the looks,
// computed from the caller's own counts: the boundary experiment/sequential
// gives for the information fractions of the looks so far (checked against
// rpact in TestRpactTable) and the first look whose pooled z statistic in
// zs crossed it (0: none). method is "obf" or "pocock".
func directGS(t *testing.T, method string, fractions, zs []float64) (sequential.Look, int) {
	t.Helper()
	kind := sequential.OBrienFleming
	if method == "pocock" {
		kind = sequential.Pocock
	}
	b, err := sequential.Boundaries(sequential.Spending{Kind: kind, Alpha: 0.05}, sequential.TwoSided, fractions)
	if err != nil {
		t.Fatal(err)
	}
	return b.Looks[len(b.Looks)-1], b.FirstCrossing(zs)
}

// checkGSLook compares the group-sequential comparison c of night k with
// the direct computation: fraction f, pooled z, tonight's boundary look lk
// and the first crossing wantCross (0: none).
func checkGSLook(t *testing.T, k int, c report.JSONSequential, f, z float64, lk sequential.Look, wantCross int) {
	t.Helper()
	if c.InformationFraction == nil || math.Abs(*c.InformationFraction-f) > 1e-15 ||
		c.Boundary == nil || math.Abs(*c.Boundary-lk.Critical) > 1e-12 ||
		c.AlphaSpent == nil || math.Abs(*c.AlphaSpent-lk.Spent) > 1e-15 ||
		c.Statistic == nil || math.Abs(*c.Statistic-z) > 1e-9 {
		t.Errorf("night %d: fraction %v boundary %v spent %v z %v; want %v %v %v %v", k,
			c.InformationFraction, c.Boundary, c.AlphaSpent, c.Statistic, f, lk.Critical, lk.Spent, z)
	}
	if c.Crossed != (math.Abs(z) >= lk.Critical) {
		t.Errorf("night %d: crossed %v with |z| %v against boundary %v", k, c.Crossed, math.Abs(z), lk.Critical)
	}
	if got := c.CrossedAtLook; (got == nil) != (wantCross == 0) || got != nil && *got != wantCross {
		t.Errorf("night %d: crossed at look %v, want %d", k, got, wantCross)
	}
}

// TestNightlyLooks runs generated logs night by night with --as-of into a
// history and checks each look's sequential readout against a direct
// computation: the information fraction from the arm counts, the
// boundary that experiment/sequential gives for the fractions of looks
// 1..j (itself checked against rpact in TestRpactTable), the first
// crossing from a pooled z computed here, the mixture p-value from the
// formula of Johari et al.; an A/A log does not cross, a strong effect
// crosses at the look the direct computation gives. Every JSON validates
// against the schema.
func TestNightlyLooks(t *testing.T) {
	const nights, planned = 10, 12000
	cases := []struct {
		name   string
		arms   []string
		method string
		cross  bool // whether the direct computation must find a crossing
	}{
		{"strong effect, O'Brien-Fleming", []string{"control=1:0.10,0.04", "fast=1:0.125,0.04"}, "obf", true},
		{"strong effect, Pocock", []string{"control=1:0.10,0.04", "fast=1:0.125,0.04"}, "pocock", true},
		{"strong effect, mixture", []string{"control=1:0.10,0.04", "fast=1:0.125,0.04"}, "mixture", true},
		{"A/A, O'Brien-Fleming", []string{"control=1:0.10,0.04", "fast=1:0.10,0.04"}, "obf", false},
		{"A/A, Pocock", []string{"control=1:0.10,0.04", "fast=1:0.10,0.04"}, "pocock", false},
		{"A/A, mixture", []string{"control=1:0.10,0.04", "fast=1:0.10,0.04"}, "mixture", false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			log, hist := filepath.Join(dir, "ev.parquet"), filepath.Join(dir, "h.db")
			genArgs := []string{"--users", "24000", "--days", "10", "--seed", "3", "--parquet", log}
			for _, a := range tc.arms {
				genArgs = append(genArgs, "--arm", a)
			}
			gen(t, dir, genArgs...)
			var fractions, zs []float64
			var counts [][4]int64
			wantCross := 0
			for k := 1; k <= nights; k++ {
				out := filepath.Join(dir, fmt.Sprintf("n%d.json", k))
				code, _, stderr := runCmd(t, nightArgs(log, hist, k, "--sequential", "purchase="+tc.method,
					"--planned-units", fmt.Sprint(planned), "--json", out, "-o", filepath.Join(dir, "n.md"))...)
				if code != exitOK {
					t.Fatalf("night %d: exit %d: %s", k, code, stderr)
				}
				raw, doc := readDoc(t, out)
				validate(t, raw)
				r := doc.Readouts[0]
				mon := r.Monitoring
				if mon == nil || len(mon.Comparisons) != 1 || mon.Look != k {
					t.Fatalf("night %d: monitoring %+v, want look %d with one comparison", k, mon, k)
				}
				arms := r.Metrics[0].Arms
				x2, n2, x1, n1 := arms[0].Conversions, arms[0].Units, arms[1].Conversions, arms[1].Units
				c := mon.Comparisons[0]
				if c.Look != k {
					t.Errorf("night %d: comparison look %d", k, c.Look)
				}
				z := pooledZ(x1, n1, x2, n2)
				counts = append(counts, [4]int64{x1, n1, x2, n2})
				if tc.method == "mixture" {
					p := mixtureP(sequential.DefaultMixingVariance, counts)
					if c.AlwaysValidP == nil || math.Abs(*c.AlwaysValidP-p) > 1e-12 {
						t.Errorf("night %d: always-valid p %v, want %v", k, c.AlwaysValidP, p)
					}
					if wantCross == 0 && p <= 0.05 {
						wantCross = k
					}
					if got := c.CrossedAtLook; (got == nil) != (wantCross == 0) || got != nil && *got != wantCross {
						t.Errorf("night %d: crossed at look %v, want %d", k, got, wantCross)
					}
					continue
				}
				f := float64(min(n1, n2)) / planned
				fractions, zs = append(fractions, f), append(zs, z)
				var lk sequential.Look
				lk, wantCross = directGS(t, tc.method, fractions, zs)
				checkGSLook(t, k, c, f, z, lk, wantCross)
			}
			if tc.cross != (wantCross > 0) {
				t.Errorf("the direct computation finds a crossing at look %d; want a crossing: %v", wantCross, tc.cross)
			}
			t.Logf("first crossing at look %d (0: none)", wantCross)
		})
	}
}

// storedLooks reads the looks of checkout-flow-2026 from the history file.
func storedLooks(t *testing.T, hist string) []history.Look {
	t.Helper()
	store, err := history.Open(context.Background(), hist)
	if err != nil {
		t.Fatal(err)
	}
	defer store.Close()
	looks, err := store.Looks(context.Background(), "checkout-flow-2026")
	if err != nil {
		t.Fatal(err)
	}
	return looks
}

// TestNightRerunReplaces reruns a past night into a history of three: the
// history keeps three looks, the rerun is look 2 again, and the exit codes
// 8 and 9 come when asked for.
func TestNightRerunReplaces(t *testing.T) {
	dir := t.TempDir()
	log, hist := filepath.Join(dir, "ev.parquet"), filepath.Join(dir, "h.db")
	gen(t, dir, "--users", "6000", "--days", "10", "--arm", "control=1:0.10,0.04", "--arm", "fast=1:0.60,0.04", "--parquet", log)
	seq := []string{"--sequential", "obf", "--planned-units", "3000", "-o", filepath.Join(dir, "n.md")}
	for k := 1; k <= 3; k++ {
		if code, _, stderr := runCmd(t, nightArgs(log, hist, k, seq...)...); code != exitOK {
			t.Fatalf("night %d: exit %d: %s", k, code, stderr)
		}
	}
	out := filepath.Join(dir, "n2.json")
	if code, _, stderr := runCmd(t, nightArgs(log, hist, 2, append(seq, "--json", out)...)...); code != exitOK {
		t.Fatalf("rerun: exit %d: %s", code, stderr)
	}
	_, doc := readDoc(t, out)
	if m := doc.Readouts[0].Monitoring; m == nil || m.Look != 2 || m.PreviousAt == nil {
		t.Errorf("rerun of night 2: %+v, want look 2 with a previous look", m)
	}
	if looks := storedLooks(t, hist); len(looks) != 3 {
		t.Errorf("history holds %d looks after a rerun, want 3", len(looks))
	}
	// The chart over the looks: the same history gives the same bytes,
	// and the Markdown links it relative to its folder.
	var charts [2]string
	for i := range charts {
		svg := filepath.Join(dir, "looks.svg")
		md := filepath.Join(dir, "n.md")
		if code, _, stderr := runCmd(t, nightArgs(log, hist, 3, append(seq, "--looks-chart", svg)...)...); code != exitOK {
			t.Fatalf("--looks-chart: exit %d: %s", code, stderr)
		}
		charts[i] = fileContent(t, svg)
		if !strings.Contains(fileContent(t, md), "](looks.svg)") {
			t.Error("the Markdown does not link looks.svg")
		}
	}
	if charts[0] != charts[1] || !strings.HasPrefix(charts[0], "<?xml") {
		t.Error("two runs of the same night give different charts over the looks")
	}
	// A 50-point effect (10% against 60%) at about 900 units per arm is
	// far beyond any boundary by night 3 (z above 10 even with the
	// immature units in: a hand calculation with the rates halved);
	// --exit-on-boundary gives 8.
	code, _, stderr := runCmd(t, nightArgs(log, hist, 3, append(seq, "--exit-on-boundary")...)...)
	if code != exitBoundary || !strings.Contains(stderr, "efficacy boundary crossed") {
		t.Errorf("--exit-on-boundary: exit %d, %s; want %d", code, stderr, exitBoundary)
	}
	// Night 3 is as of 2026-11-05; the newest row before it is less than
	// a minute older, so 1h is not stale and 1s is (when the log has a row
	// more than a second before midnight, as this one does).
	for _, c := range []struct {
		max  string
		want int
	}{{"1h", exitOK}, {"1s", exitStale}} {
		code, _, stderr := runCmd(t, nightArgs(log, hist, 3, append(seq, "--max-staleness", c.max)...)...)
		if code != c.want {
			t.Errorf("--max-staleness %s: exit %d (%s), want %d", c.max, code, stderr, c.want)
		}
	}
}

// TestAsOfIgnoresLaterRows checks that --as-of counts the rows at or after
// the instant as after_as_of and gives the same counts as an export cut at
// that instant would: the same run with --end at the instant counts the
// same units and conversions.
func TestAsOfIgnoresLaterRows(t *testing.T) {
	dir := t.TempDir()
	log := filepath.Join(dir, "ev.parquet")
	gen(t, dir, "--users", "4000", "--days", "10", "--parquet", log)
	base := []string{"analyze", log, "--experiment", "checkout-flow-2026", "--control", "control", "--metric", "purchase=purchase:7d", "--start", "2026-11-02"}
	asOf, end := filepath.Join(dir, "asof.json"), filepath.Join(dir, "end.json")
	if code, _, stderr := runCmd(t, append(base, "--as-of", "2026-11-06", "--json", asOf, "-o", filepath.Join(dir, "a.md"))...); code != exitOK {
		t.Fatal(stderr)
	}
	if code, _, stderr := runCmd(t, append(base, "--end", "2026-11-06", "--json", end, "-o", filepath.Join(dir, "e.md"))...); code != exitOK {
		t.Fatal(stderr)
	}
	rawA, a := readDoc(t, asOf)
	_, e := readDoc(t, end)
	validate(t, rawA)
	ra, re := a.Readouts[0], e.Readouts[0]
	if fmt.Sprint(ra.Metrics[0].Arms) != fmt.Sprint(re.Metrics[0].Arms) {
		t.Errorf("--as-of arms %v, --end arms %v", ra.Metrics[0].Arms, re.Metrics[0].Arms)
	}
	var after int64
	for _, rc := range ra.Diagnostics.IgnoredEvents {
		if rc.Reason == "after_as_of" {
			after = rc.Count
		}
	}
	if after == 0 || ra.Diagnostics.RowsRead != re.Diagnostics.RowsRead {
		t.Errorf("after_as_of %d, rows read %d and %d", after, ra.Diagnostics.RowsRead, re.Diagnostics.RowsRead)
	}
	cut := time.Date(2026, 11, 6, 0, 0, 0, 0, time.UTC)
	if ra.Freshness == nil || !ra.Freshness.Before(cut) || ra.WindowEnd == nil || !ra.WindowEnd.Equal(cut) {
		t.Errorf("--as-of: freshness %v, window end %v; want before and at %v", ra.Freshness, ra.WindowEnd, cut)
	}
}

// unitLog is one unit of a clean generated CSV log (one arm, no repeat
// exposure): its first exposure, arm and purchase times.
type unitLog struct {
	arm       string
	exposed   time.Time
	purchases []time.Time
}

// readUnits reads a generated CSV log (user_id,ts,event,experiment,arm,...)
// into its units, apart from armtally's readers.
func readUnits(t *testing.T, path string) map[string]*unitLog {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	units := map[string]*unitLog{}
	for i, r := range rows[1:] {
		ts, err := time.Parse(time.RFC3339Nano, r[1])
		if err != nil {
			t.Fatalf("row %d: %v", i+2, err)
		}
		u := units[r[0]]
		if u == nil {
			u = &unitLog{}
			units[r[0]] = u
		}
		switch r[2] {
		case "exposure":
			if u.arm != "" {
				t.Fatalf("row %d: unit %s exposed twice; the log is meant to be clean", i+2, r[0])
			}
			u.arm, u.exposed = r[4], ts
		case "purchase":
			u.purchases = append(u.purchases, ts)
		}
	}
	return units
}

// countAsOf counts, per arm, the units exposed before asOf and those with
// a purchase in [exposure, exposure + 7 days) before asOf: the event
// semantics of experiment/DESIGN.md ("Conversion"), immature units
// included.
func countAsOf(units map[string]*unitLog, asOf time.Time) (n, x map[string]int64) {
	n, x = map[string]int64{}, map[string]int64{}
	for _, u := range units {
		if u.arm == "" || !u.exposed.Before(asOf) {
			continue
		}
		n[u.arm]++
		end := u.exposed.Add(7 * 24 * time.Hour)
		for _, p := range u.purchases {
			if p.Before(u.exposed) || !p.Before(end) || !p.Before(asOf) {
				continue
			}
			x[u.arm]++
			break
		}
	}
	return n, x
}

// TestThirtyNights analyses a 30-day generated log (one arm per unit, no
// noise) night by night with --as-of into a history, with
// O'Brien-Fleming-type monitoring. The last night's arm counts must equal the
// counts this test takes from the CSV itself; the last readout's
// sequential decision (fraction, z, boundary, alpha spent, crossed, first
// crossing) must equal directGS on those counts; the chart over the looks
// must draw 30 points per arm for the rate, 30 for the statistic and 29
// per arm for the new units per day (which needs a previous look), plus
// one per legend entry; and rerunning night 30 must leave 30 looks.
func TestThirtyNights(t *testing.T) {
	const nights, planned = 30, 3000
	dir := t.TempDir()
	log, hist := filepath.Join(dir, "ev.csv"), filepath.Join(dir, "h.db")
	gen(t, dir, "--users", "6000", "--days", "30", "--seed", "7", "--cross-arm", "0", "--repeat-exposure", "0",
		"--pre-exposure-conversion", "0", "--never-exposed", "0", "--noise", "0",
		"--arm", "control=1:0.10,0.04", "--arm", "fast=1:0.15,0.04", "--csv", log)
	units := readUnits(t, log)
	var fractions, zs []float64
	seq := []string{"--sequential", "purchase=obf", "--planned-units", fmt.Sprint(planned), "--allow-absent-event", "purchase", "-o", filepath.Join(dir, "n.md")}
	out, svg := filepath.Join(dir, "n30.json"), filepath.Join(dir, "looks.svg")
	for k := 1; k <= nights; k++ {
		n, x := countAsOf(units, time.Date(2026, 11, 2+k, 0, 0, 0, 0, time.UTC))
		fractions = append(fractions, float64(min(n["fast"], n["control"]))/planned)
		zs = append(zs, pooledZ(x["fast"], n["fast"], x["control"], n["control"]))
		args := seq
		if k == nights {
			args = append(slices.Clone(seq), "--json", out, "--looks-chart", svg)
		}
		if code, _, stderr := runCmd(t, nightArgs(log, hist, k, args...)...); code != exitOK {
			t.Fatalf("night %d: exit %d: %s", k, code, stderr)
		}
		if k < nights {
			continue
		}
		raw, doc := readDoc(t, out)
		validate(t, raw)
		r := doc.Readouts[0]
		for _, a := range r.Metrics[0].Arms {
			if a.Units != n[a.Arm] || a.Conversions != x[a.Arm] {
				t.Errorf("night %d, %s: %d of %d converted; counted here %d of %d", k, a.Arm, a.Conversions, a.Units, x[a.Arm], n[a.Arm])
			}
		}
		if r.Monitoring == nil || r.Monitoring.Look != nights || len(r.Monitoring.Comparisons) != 1 {
			t.Fatalf("night %d: monitoring %+v, want look %d with one comparison", k, r.Monitoring, nights)
		}
		lk, first := directGS(t, "obf", fractions, zs)
		checkGSLook(t, k, r.Monitoring.Comparisons[0], fractions[k-1], zs[k-1], lk, first)
		t.Logf("night %d: fraction %.4f, z %.3f, boundary %.3f, first crossing at look %d (0: none)", k, fractions[k-1], zs[k-1], lk.Critical, first)
	}
	checkLooksChart(t, fileContent(t, svg), nights)
	if code, _, stderr := runCmd(t, nightArgs(log, hist, nights, seq...)...); code != exitOK {
		t.Fatalf("rerun of night %d: exit %d: %s", nights, code, stderr)
	}
	if looks := storedLooks(t, hist); len(looks) != nights {
		t.Errorf("history holds %d looks after rerunning night %d, want %d", len(looks), nights, nights)
	}
}

// checkLooksChart counts the points of the chart over the looks of a run
// with one treatment: gonum/plot draws each series' points as consecutive
// circle paths right after its line, and one circle per legend entry. The
// runs of two or more circles must be, in order, the rate of each arm
// (nights points each), the statistic (nights) and the new units per day
// of each arm (nights - 1, from the second look on); the lone circles are
// the five legend glyphs.
func checkLooksChart(t *testing.T, svg string, nights int) {
	t.Helper()
	var runs []int
	legend, cur := 0, 0
	flush := func() {
		switch {
		case cur == 1:
			legend++
		case cur > 1:
			runs = append(runs, cur)
		}
		cur = 0
	}
	for _, line := range strings.Split(svg, "\n") {
		if !strings.HasPrefix(line, "<path ") {
			continue
		}
		if circle.MatchString(line) {
			cur++
			continue
		}
		flush()
	}
	flush()
	want := []int{nights, nights, nights, nights - 1, nights - 1}
	if !slices.Equal(runs, want) || legend != 5 {
		t.Errorf("chart over the looks: series of %v points and %d legend glyphs; want %v and 5", runs, legend, want)
	}
}

// circle matches the start of a circle glyph in gonum/plot's SVG.
var circle = regexp.MustCompile(`^<path d="M[-0-9.]+,[-0-9.]+A`)
