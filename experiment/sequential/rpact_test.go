package sequential

import (
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"io"
	"math"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"testing"
	"time"
)

// rpactRow is one look of one design of testdata/boundaries.csv.
type rpactRow struct {
	line        int
	id          string
	sides       Sides
	spending    Spending
	fractions   []float64
	look        int
	critical    float64
	spent       float64
	nominal     float64
	h0Cross     float64
	h0Err       float64
	drift       float64
	driftUpper  float64
	driftLower  float64
	driftErr    float64
	description string
}

// readRpactTable parses the table gen_boundaries.R writes.
func readRpactTable(t *testing.T, name string, r io.Reader) []rpactRow {
	t.Helper()
	cr := csv.NewReader(r)
	cr.Comment = '#'
	header, err := cr.Read()
	if err != nil || len(header) != 15 || header[0] != "case" {
		t.Fatalf("%s: header %v: %v", name, header, err)
	}
	var rows []rpactRow
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		line, _ := cr.FieldPos(0)
		num := func(i int) float64 {
			v, err := strconv.ParseFloat(rec[i], 64)
			if err != nil {
				t.Fatalf("%s:%d: column %q: %v", name, line, header[i], err)
			}
			return v
		}
		row := rpactRow{line: line, id: rec[0], look: int(num(5))}
		row.sides = Sides(num(1))
		switch rec[2] {
		case "OF":
			row.spending.Kind = OBrienFleming
		case "P":
			row.spending.Kind = Pocock
		default:
			t.Fatalf("%s:%d: kind %q", name, line, rec[2])
		}
		row.spending.Alpha = num(3)
		for _, f := range strings.Split(rec[4], ";") {
			v, err := strconv.ParseFloat(f, 64)
			if err != nil {
				t.Fatalf("%s:%d: fractions: %v", name, line, err)
			}
			row.fractions = append(row.fractions, v)
		}
		row.critical, row.spent, row.nominal = num(6), num(7), num(8)
		row.h0Cross, row.h0Err = num(9), num(10)
		row.drift, row.driftUpper, row.driftLower, row.driftErr = num(11), num(12), num(13), num(14)
		row.description = name + ":" + strconv.Itoa(line) + " " + row.id + " " + row.sides.String() + " " +
			row.spending.Kind.String() + " alpha " + rec[3] + " t " + rec[4] + " look " + rec[5]
		rows = append(rows, row)
	}
	return rows
}

// checkRpactRows compares Boundaries and CrossingProbabilities with every
// design of the table. Tolerances: rpact finds critical values to its
// default tolerance 1e-8 (getDesignGroupSequential's tolerance argument)
// and keeps 1e-8 of alpha back at its last look, so critical values must
// agree within 1e-6 or, where a small increment makes rpact's tolerance
// (1e-8, which we read as applying to the crossing probability) the looser
// one, nominal levels within 1e-8; alpha spent must agree within 2e-8 and
// nominal levels within 1e-5 relative or 1e-8. rpact gives +Inf to a look whose spending increment is
// below its tolerance; there armtally must give +Inf too or an increment
// below 1e-12. The crossing chances are computed by CrossingProbabilities
// on rpact's own critical values, the same question pmvnorm answered, and
// must agree within 10 times pmvnorm's error estimate plus 1e-7 (the
// grid's own error at r = 32 is of the order of 1e-8, see
// TestGridConvergence).
func checkRpactRows(t *testing.T, rows []rpactRow) {
	t.Helper()
	if len(rows) < 100 {
		t.Fatalf("only %d rows", len(rows))
	}
	var designs [][]rpactRow
	for i, row := range rows {
		if i == 0 || row.id != rows[i-1].id {
			designs = append(designs, nil)
		}
		designs[len(designs)-1] = append(designs[len(designs)-1], row)
	}
	for _, d := range designs {
		checkRpactDesign(t, d)
	}
	t.Logf("%d looks of %d designs", len(rows), len(designs))
}

func checkRpactDesign(t *testing.T, rows []rpactRow) {
	t.Helper()
	first := rows[0]
	if len(rows) != len(first.fractions) {
		t.Fatalf("%s: %d rows for %d looks", first.description, len(rows), len(first.fractions))
	}
	b, err := Boundaries(first.spending, first.sides, first.fractions)
	if err != nil {
		t.Fatalf("%s: %v", first.description, err)
	}
	crit := make([]float64, len(rows))
	for j, row := range rows {
		if row.look != j+1 || row.sides != first.sides || row.spending != first.spending {
			t.Fatalf("%s: the rows of a design disagree", row.description)
		}
		crit[j] = row.critical
		got := b.Looks[j]
		switch {
		case math.IsInf(row.critical, 1):
			if !math.IsInf(got.Critical, 1) && !(got.Increment < 1e-12) {
				t.Errorf("%s: critical value %.10g with increment %.3g, rpact +Inf", row.description, got.Critical, got.Increment)
			}
		case math.Abs(got.Critical-row.critical) > 1e-6 && math.Abs(got.NominalP-row.nominal) > 1e-8:
			t.Errorf("%s: critical value %.10g, rpact %.10g", row.description, got.Critical, row.critical)
		}
		if math.Abs(got.Spent-row.spent) > 2e-8 {
			t.Errorf("%s: alpha spent %.12g, rpact %.12g", row.description, got.Spent, row.spent)
		}
		if d := math.Abs(got.NominalP - row.nominal); d > 1e-5*row.nominal+1e-15 && d > 1e-8 {
			t.Errorf("%s: nominal p %.10g, rpact %.10g", row.description, got.NominalP, row.nominal)
		}
	}
	for _, drift := range []float64{0, first.drift} {
		up, lo, err := CrossingProbabilities(first.sides, first.fractions, crit, drift)
		if err != nil {
			t.Fatalf("%s: %v", first.description, err)
		}
		for j, row := range rows {
			wantUp, wantLo, e := row.driftUpper, row.driftLower, row.driftErr
			if drift == 0 {
				wantUp, wantLo, e = row.h0Cross, 0, row.h0Err
				up[j] += lo[j]
				lo[j] = 0
			}
			if tol := 10*e + 1e-7; math.Abs(up[j]-wantUp) > tol || math.Abs(lo[j]-wantLo) > tol {
				t.Errorf("%s: first-crossing chances at drift %v: upper %.12g lower %.12g, pmvnorm %.12g %.12g (tolerance %.3g)",
					row.description, drift, up[j], lo[j], wantUp, wantLo, tol)
			}
		}
	}
}

// TestRpactTable checks the boundaries against the committed table
// testdata/boundaries.csv, written by testdata/gen_boundaries.R with R
// 4.2.2, rpact 3.3.4 (getDesignGroupSequential: critical values, alpha
// spent, stage levels) and mvtnorm (pmvnorm: the joint crossing chances);
// the script says which designs and why.
func TestRpactTable(t *testing.T) {
	f, err := os.Open("testdata/boundaries.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	checkRpactRows(t, readRpactTable(t, "boundaries.csv", f))
}

// TestRpactLive runs testdata/gen_boundaries.R with the installed R and
// checks its fresh output the same way, so the committed table cannot
// drift from the script. It skips only when Rscript is absent; .ci/run
// installs R, rpact and mvtnorm, so it runs in CI.
func TestRpactLive(t *testing.T) {
	rscript, err := exec.LookPath("Rscript")
	if err != nil {
		t.Skip("Rscript not found (Debian packages r-base-core r-cran-rpact r-cran-mvtnorm)")
	}
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, rscript, "gen_boundaries.R")
	cmd.Dir = "testdata"
	var stdout, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("Rscript gen_boundaries.R: %v\n%s", err, stderr.String())
	}
	live := readRpactTable(t, "Rscript gen_boundaries.R", &stdout)
	f, err := os.Open("testdata/boundaries.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	committed := readRpactTable(t, "boundaries.csv", f)
	if len(live) != len(committed) {
		t.Errorf("the script writes %d rows, the committed table has %d: regenerate it", len(live), len(committed))
	}
	checkRpactRows(t, live)
}
