package stats

import (
	"encoding/csv"
	"errors"
	"io"
	"os"
	"strconv"
	"testing"
)

// TestRCases checks the table testdata/r_cases.csv, written by
// testdata/gen_cases.R with R 4.2.2 (stats::fisher.test, binom.test,
// prop.test, pnorm, qnorm) on tables chosen there: small, large (two
// million units, half a million conversions) and seeded random ones. These
// values were produced here and are not cross-checked against a second
// library.
func TestRCases(t *testing.T) {
	f, err := os.Open("testdata/r_cases.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.Comment = '#'
	header, err := r.Read()
	if err != nil || len(header) != 10 {
		t.Fatalf("header %v: %v", header, err)
	}
	seen := map[string]int{}
	for {
		rec, err := r.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		line, _ := r.FieldPos(0)
		id, method, alt, quantity := rec[0], rec[1], rec[7], rec[8]
		num := func(i int) float64 {
			v, err := strconv.ParseFloat(rec[i], 64)
			if err != nil {
				t.Fatalf("r_cases.csv:%d: column %q: %v", line, header[i], err)
			}
			return v
		}
		x1, n1, x2, n2 := int64(num(2)), int64(num(3)), int64(num(4)), int64(num(5))
		param, want := num(6), num(9)
		a, err := ParseAlternative(alt)
		if err != nil {
			t.Fatalf("r_cases.csv:%d: %v", line, err)
		}
		name := "r_cases.csv:" + strconv.Itoa(line) + " " + id + " " + method + " " + alt + " " + quantity
		check := func(got float64, err error, rel, abs float64) {
			t.Helper()
			if err != nil {
				t.Errorf("%s: %v", name, err)
				return
			}
			near(t, name, got, want, rel, abs)
		}
		seen[method]++
		switch method {
		case "fisher":
			et, err := FisherExact(x1, n1, x2, n2, 0.05, a)
			check(et.PValue, err, 1e-9, 0)
		case "binom":
			et, err := BinomialExact(x1, n1, param, 0.05, a)
			check(et.PValue, err, 1e-9, 0)
		case "prop2":
			zt, err := TwoProportionZTest(x1, n1, x2, n2, 0.05, a)
			if quantity == "z" {
				check(zt.Statistic, err, 1e-12, 1e-15)
			} else {
				check(zt.PValue, err, 1e-10, 0)
			}
		case "prop1":
			zt, err := OneProportionZTest(x1, n1, param, 0.05, a)
			check(zt.PValue, err, 1e-10, 0)
		case "wilson", "clopper":
			fn, rel := Wilson, 1e-12
			if method == "clopper" {
				fn, rel = ClopperPearson, 1e-9
			}
			ci, err := fn(x1, n1, param)
			got := ci.Lower
			if quantity == "upper" {
				got = ci.Upper
			}
			check(got, err, rel, 1e-15)
		case "uppertail":
			// Below 2.2e-308 the result is subnormal and has fewer digits.
			check(NormalUpperTail(param), nil, 1e-12, 1e-320)
		case "quantile":
			check(NormalQuantile(param), nil, 1e-12, 0)
		default:
			t.Fatalf("%s: unknown method", name)
		}
	}
	for _, m := range []string{"fisher", "binom", "prop2", "prop1", "wilson", "clopper", "uppertail", "quantile"} {
		if seen[m] == 0 {
			t.Errorf("no %s rows in r_cases.csv", m)
		}
	}
}
