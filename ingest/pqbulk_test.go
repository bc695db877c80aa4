package ingest

import (
	"errors"
	"fmt"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// bulkRow is a row of the files the bulk path is compared on: every text
// column optional (so nulls and empty strings reach the row rules), ts an
// optional INT64 TIMESTAMP.
type bulkRow struct {
	User  *string `parquet:"user_id,optional"`
	TS    *int64  `parquet:"ts,optional,timestamp(millisecond)"`
	Event *string `parquet:"event,optional,dict"`
	Exp   *string `parquet:"experiment,optional,dict"`
	Arm   *string `parquet:"arm,optional,dict"`
	Seg   *string `parquet:"country,optional"`
}

// bulkRowPlain is bulkRow with every text column plain-encoded and ts
// dictionary-encoded, the other way round.
type bulkRowPlain struct {
	User  *string `parquet:"user_id,optional,dict"`
	TS    *int64  `parquet:"ts,optional,dict,timestamp(millisecond)"`
	Event *string `parquet:"event,optional"`
	Exp   *string `parquet:"experiment,optional"`
	Arm   *string `parquet:"arm,optional"`
	Seg   *string `parquet:"country,optional"`
}

// bulkRowRequired is bulkRow with every column required (no definition
// levels): a null becomes an empty string (or ts 0), which the reader
// reads as null for experiment, arm and segment and as a bad row for user
// and event.
type bulkRowRequired struct {
	User  string `parquet:"user_id,dict"`
	TS    int64  `parquet:"ts,timestamp(millisecond)"`
	Event string `parquet:"event,dict"`
	Exp   string `parquet:"experiment,dict"`
	Arm   string `parquet:"arm,dict"`
	Seg   string `parquet:"country,dict"`
}

func requiredRows(rows []bulkRow) []bulkRowRequired {
	deref := func(p *string) string {
		if p == nil {
			return ""
		}
		return *p
	}
	out := make([]bulkRowRequired, len(rows))
	for i, r := range rows {
		out[i] = bulkRowRequired{User: deref(r.User), Event: deref(r.Event), Exp: deref(r.Exp), Arm: deref(r.Arm), Seg: deref(r.Seg)}
		if r.TS != nil {
			out[i].TS = *r.TS
		}
	}
	return out
}

// randomBulkRows makes n rows with a few percent of each kind of bad row
// (null or empty user, null ts, a ts out of range, null or empty event,
// an exposure without an arm or in an arm that is not planned).
func randomBulkRows(rng *rand.Rand, n int) []bulkRow {
	str := func(s string) *string { return &s }
	pick := func(xs ...string) *string { return str(xs[rng.IntN(len(xs))]) }
	rows := make([]bulkRow, n)
	for i := range rows {
		ts := int64(1_780_000_000_000 + rng.IntN(1_000_000_000))
		r := bulkRow{
			User:  str(fmt.Sprintf("u%d", rng.IntN(n/3+1))),
			TS:    &ts,
			Event: pick("exposure", "exposure", "purchase", "view", "view", "view", "signup"),
			Exp:   pick("exp-a", "exp-a", "exp-a", "exp-b"),
			Seg:   pick("north", "south", ""),
		}
		if *r.Event == "exposure" {
			r.Arm = pick("control", "treatment")
		}
		switch rng.IntN(60) {
		case 0:
			r.User = nil
		case 1:
			r.User = str("")
		case 2:
			r.TS = nil
		case 3:
			big := int64(1) << 62 // milliseconds beyond the nanosecond range
			r.TS = &big
		case 4:
			r.Event = nil
		case 5:
			r.Event = str("")
		case 6:
			r.Event, r.Arm = str("exposure"), nil
		case 7:
			r.Event, r.Arm = str("exposure"), str("holdout")
		case 8:
			r.Exp, r.Seg = nil, nil
		}
		rows[i] = r
	}
	return rows
}

// The bulk path must read exactly what the row-by-row path reads: the same
// rows in the same batches' order, the same stats (filtered rows and their
// largest ts included) and the same error, for any number of workers,
// with and without an error budget and an event filter, over files with
// dictionary and plain pages, nulls, small pages and several row groups.
// The row-by-row path is itself checked against other engines' files and
// DuckDB's reading of them (parquet_testing_test.go).
func TestBulkPathMatchesRowByRow(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	rows := randomBulkRows(rng, 5000)
	plain := make([]bulkRowPlain, len(rows))
	for i, r := range rows {
		plain[i] = bulkRowPlain(r)
	}
	files := map[string][]byte{
		"dict-rg700":     writeParquet(t, rows, parquet.MaxRowsPerRowGroup(700), parquet.PageBufferSize(512)),
		"dict-one-rg":    writeParquet(t, rows),
		"plain-rg1000":   writeParquet(t, plain, parquet.MaxRowsPerRowGroup(1000), parquet.PageBufferSize(300)),
		"plain-rg4097":   writeParquet(t, plain, parquet.MaxRowsPerRowGroup(4097)),
		"dict-rg1-tiny":  writeParquet(t, rows[:40], parquet.MaxRowsPerRowGroup(1)),
		"required-rg900": writeParquet(t, requiredRows(rows), parquet.MaxRowsPerRowGroup(900), parquet.PageBufferSize(400)),
	}
	names := make([]string, 0, len(files))
	for n := range files {
		names = append(names, n)
	}
	slices.Sort(names)
	m := DefaultMapping()
	m.Segments = []string{"country"}
	planned := map[string][]string{"exp-a": {"control", "treatment"}}
	type variant struct {
		name string
		opts Options
	}
	variants := []variant{
		{"strict", Options{Mapping: m, ExposureEvent: "exposure", PlannedArms: planned}},
		{"budget", Options{Mapping: m, ExposureEvent: "exposure", PlannedArms: planned, MaxBadRows: NoLimit}},
		{"budget-50", Options{Mapping: m, ExposureEvent: "exposure", PlannedArms: planned, MaxBadRows: 50}},
		{"share", Options{Mapping: m, ExposureEvent: "exposure", PlannedArms: planned, MaxBadShare: 0.01}},
		{"filter", Options{Mapping: m, ExposureEvent: "exposure", PlannedArms: planned, MaxBadRows: NoLimit,
			Events: []string{"exposure", "purchase"}, BatchSize: 333}},
		{"filter-none-kept", Options{Mapping: m, MaxBadRows: NoLimit, Events: []string{"refund"}}},
		// A bad row that stops the reader inside a window: the rows of
		// unwanted events before it count as filtered, those after not.
		{"filter-strict", Options{Mapping: m, ExposureEvent: "exposure", PlannedArms: planned,
			Events: []string{"exposure", "purchase"}}},
		{"filter-budget-50", Options{Mapping: m, ExposureEvent: "exposure", PlannedArms: planned, MaxBadRows: 50,
			Events: []string{"purchase"}, BatchSize: 100}},
	}
	for _, name := range names {
		src := []Source{BytesSource(name+".parquet", files[name]), BytesSource(name+"-again.parquet", files[name])}
		for _, v := range variants {
			t.Run(name+"/"+v.name, func(t *testing.T) {
				ref := v.opts
				ref.rowByRow = true
				wantRows, wantSt, wantErr := readAll(t, src, ref)
				if v.name == "budget" && (len(wantRows) == 0 || len(wantSt.BadRows) < 5) {
					t.Fatalf("the file does not exercise the rules: %d rows, bad %v", len(wantRows), wantSt.BadRows)
				}
				// With a budget, a row group's filtered rows are counted
				// whole or not at all when the budget runs out inside it.
				matchRowByRow(t, src, v.opts, []int{1, 2, 3, 8}, v.name == "filter-budget-50", wantRows, wantSt, wantErr)
				// The same rows with the event, experiment and arm
				// columns dictionary-encoded, on both paths.
				dict := v.opts
				dict.DictionaryColumns = true
				matchRowByRow(t, src, dict, []int{1, 3}, v.name == "filter-budget-50", wantRows, wantSt, wantErr)
				dict.rowByRow = true
				matchRowByRow(t, src, dict, []int{1}, false, wantRows, wantSt, wantErr)
			})
		}
	}
}

// Closing a reader in the middle of a file stops its workers and releases
// every batch they made (readAll's checked allocator would report a leak).
func TestBulkPathCloseEarly(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	rows := randomBulkRows(rng, 3000)
	data := writeParquet(t, rows, parquet.MaxRowsPerRowGroup(100))
	for _, workers := range []int{1, 4} {
		r, err := NewReader([]Source{BytesSource("e.parquet", data)}, Options{Mapping: DefaultMapping(),
			MaxBadRows: NoLimit, Workers: workers, BatchSize: 10})
		if err != nil {
			t.Fatal(err)
		}
		for batch := 1; batch <= 2; batch++ { // read into the file, then stop
			if !r.Next() {
				t.Fatalf("workers %d: no batch %d: %v", workers, batch, r.Err())
			}
		}
		if err := r.Close(); err != nil {
			t.Fatal(err)
		}
		if r.Next() {
			t.Fatal("Next after Close returned a batch")
		}
	}
}

// The next file is opened while the current one is read (Reader.readAhead);
// its errors must still come only when the reader reaches it, after the
// current file's rows and bad rows, as on the row-by-row path.
func TestReadAheadKeepsErrorOrder(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 17))
	good := writeParquet(t, randomBulkRows(rng, 2000), parquet.MaxRowsPerRowGroup(300))
	type other struct {
		User string `parquet:"user_id"`
	}
	noTS := writeParquet(t, []other{{"u1"}, {"u2"}})
	m := DefaultMapping()
	srcs := []Source{BytesSource("a.parquet", good), BytesSource("b.parquet", good), BytesSource("c.parquet", noTS), BytesSource("d.parquet", good)}
	for _, budget := range []int64{0, NoLimit} {
		ref := Options{Mapping: m, MaxBadRows: budget, rowByRow: true}
		wantRows, wantSt, wantErr := readAll(t, srcs, ref)
		if wantErr == nil {
			t.Fatalf("budget %d: no error from the file without a ts column", budget)
		}
		for _, workers := range []int{1, 3} {
			o := Options{Mapping: m, MaxBadRows: budget, Workers: workers}
			gotRows, gotSt, gotErr := readAll(t, srcs, o)
			if fmt.Sprint(gotErr) != fmt.Sprint(wantErr) {
				t.Fatalf("budget %d, workers %d: error %v, row by row %v", budget, workers, gotErr, wantErr)
			}
			if budget != 0 && !slices.Equal(gotRows, wantRows) {
				t.Fatalf("budget %d, workers %d: %d rows, row by row %d", budget, workers, len(gotRows), len(wantRows))
			}
			gotSt.Rows = wantSt.Rows
			if fmt.Sprintf("%+v", gotSt) != fmt.Sprintf("%+v", wantSt) {
				t.Fatalf("budget %d, workers %d: stats\n%+v\nrow by row\n%+v", budget, workers, gotSt, wantSt)
			}
		}
	}
}

// userRowDict and userRowPlain are files whose user column is dictionary-
// and plain-encoded; the rows of TestBulkPathBadUsers.
type userRowDict struct {
	User  *string `parquet:"user_id,optional,dict"`
	TS    *int64  `parquet:"ts,optional,timestamp(millisecond)"`
	Event *string `parquet:"event,optional,dict"`
	Exp   *string `parquet:"experiment,optional,dict"`
	Arm   *string `parquet:"arm,optional,dict"`
}

type userRowPlain struct {
	User  *string `parquet:"user_id,optional"`
	TS    *int64  `parquet:"ts,optional,timestamp(millisecond)"`
	Event *string `parquet:"event,optional,dict"`
	Exp   *string `parquet:"experiment,optional,dict"`
	Arm   *string `parquet:"arm,optional,dict"`
}

// userRowRequired is userRowDict with a required user column: its pages
// have no definition levels, so a user is never null, but may be empty.
type userRowRequired struct {
	User  string  `parquet:"user_id,dict"`
	TS    *int64  `parquet:"ts,optional,timestamp(millisecond)"`
	Event *string `parquet:"event,optional,dict"`
	Exp   *string `parquet:"experiment,optional,dict"`
	Arm   *string `parquet:"arm,optional,dict"`
}

type userRowRequiredPlain struct {
	User  string  `parquet:"user_id"`
	TS    *int64  `parquet:"ts,optional,timestamp(millisecond)"`
	Event *string `parquet:"event,optional,dict"`
	Exp   *string `parquet:"experiment,optional,dict"`
	Arm   *string `parquet:"arm,optional,dict"`
}

// With an event filter the bulk path decodes users only for the rows that
// need them and only checks the others; a null or empty user must still
// make its row a bad row, whether the row's event is wanted, unwanted or
// the exposure, and wherever it lies among windows, pages and row groups:
// the same rows, bad-row counts and first bad row as row by row.
func TestBulkPathBadUsers(t *testing.T) {
	const n = 9000 // beyond two windows (bulkWindow) in one row group
	eventOf := func(i int) string {
		switch {
		case i%7 == 3:
			return "purchase"
		case i%11 == 5:
			return "exposure"
		}
		return "view"
	}
	// Rows of each kind near the start, the windows' edges and the end.
	rowsOf := func(event string) []int {
		var at []int
		for _, from := range []int{0, bulkWindow - 12, 2*bulkWindow - 12, n - 40} {
			i := from
			for eventOf(i) != event {
				i++
			}
			at = append(at, i)
			for i++; eventOf(i) != event; i++ {
			}
			at = append(at, i)
		}
		return at
	}
	view, purchase, exposure := rowsOf("view"), rowsOf("purchase"), rowsOf("exposure")
	// A window's last row and the next window's first, both unwanted.
	edge := []int{bulkWindow - 1, bulkWindow}
	for _, i := range edge {
		if eventOf(i) != "view" {
			t.Fatalf("row %d is %s", i, eventOf(i))
		}
	}
	tests := []struct {
		name         string
		null, empty  []int // rows with a null, an empty user
		strictColumn string
	}{
		{name: "none"},
		{name: "unwanted null", null: view},
		{name: "unwanted empty", empty: view},
		{name: "window edge", null: edge[:1], empty: edge[1:]},
		{name: "wanted null", null: purchase},
		{name: "wanted empty", empty: purchase},
		{name: "exposure null", null: exposure},
		{name: "exposure empty", empty: exposure},
		{name: "mixed", null: append(slices.Clone(view[:4]), purchase[4:]...), empty: append(slices.Clone(exposure), view[4:]...)},
	}
	str := func(s string) *string { return &s }
	for _, tc := range tests {
		rows := make([]userRowDict, n)
		for i := range rows {
			ts := int64(1_780_000_000_000 + i*1000)
			rows[i] = userRowDict{User: str(fmt.Sprintf("u%d", i%500)), TS: &ts, Event: str(eventOf(i)), Exp: str("exp-a")}
			if *rows[i].Event == "exposure" {
				rows[i].Arm = str([]string{"control", "treatment"}[i%2])
			}
		}
		bad := map[int]bool{}
		for _, i := range tc.null {
			rows[i].User, bad[i] = nil, true
		}
		for _, i := range tc.empty {
			rows[i].User, bad[i] = str(""), true
		}
		first := -1
		for i := range bad {
			if first < 0 || i < first {
				first = i
			}
		}
		plain := make([]userRowPlain, n)
		required := make([]userRowRequired, n) // a null user written as ""
		requiredPlain := make([]userRowRequiredPlain, n)
		for i, r := range rows {
			plain[i] = userRowPlain(r)
			required[i] = userRowRequired{User: "", TS: r.TS, Event: r.Event, Exp: r.Exp, Arm: r.Arm}
			if r.User != nil {
				required[i].User = *r.User
			}
			requiredPlain[i] = userRowRequiredPlain(required[i])
		}
		files := []struct {
			name string
			data []byte
		}{
			{"dict", writeParquet(t, rows)},
			{"plain", writeParquet(t, plain)},
			{"dict-small", writeParquet(t, rows, parquet.MaxRowsPerRowGroup(1500), parquet.PageBufferSize(256))},
			{"plain-small", writeParquet(t, plain, parquet.MaxRowsPerRowGroup(1500), parquet.PageBufferSize(256))},
			{"dict-required", writeParquet(t, required, parquet.MaxRowsPerRowGroup(5000), parquet.PageBufferSize(1024))},
			{"plain-required", writeParquet(t, requiredPlain, parquet.MaxRowsPerRowGroup(5000), parquet.PageBufferSize(1024))},
		}
		for _, f := range files {
			src := []Source{BytesSource(f.name+".parquet", f.data)}
			for _, budget := range []int64{0, 3, NoLimit} {
				t.Run(fmt.Sprintf("%s/%s/budget %d", tc.name, f.name, budget), func(t *testing.T) {
					opts := Options{Mapping: DefaultMapping(), ExposureEvent: "exposure", MaxBadRows: budget,
						Events: []string{"purchase"}, BatchSize: 700}
					ref := opts
					ref.rowByRow = true
					wantRows, wantSt, wantErr := readAll(t, src, ref)
					// The reference itself must see the planted users.
					var nullUsers int64
					for _, c := range wantSt.BadRows {
						if c.Reason == ReasonNullUser {
							nullUsers += c.Count
						}
					}
					switch {
					case budget == NoLimit && (wantErr != nil || nullUsers != int64(len(bad))):
						t.Fatalf("row by row: %d null users, %d planted; error %v", nullUsers, len(bad), wantErr)
					case budget == 0 && len(bad) > 0:
						at := fmt.Sprintf("%s.parquet:%d: ", f.name, first+1)
						if wantErr == nil || !strings.Contains(wantErr.Error(), at) || !strings.Contains(wantErr.Error(), `"user_id"`) {
							t.Fatalf("row by row: error %v, want the user of row %d", wantErr, first+1)
						}
					case budget == 3 && len(bad) > 3 && !errors.Is(wantErr, ErrBudgetExceeded):
						t.Fatalf("row by row: error %v, want the budget exceeded", wantErr)
					case len(bad) == 0 && (wantErr != nil || len(wantSt.BadRows) != 0 || wantSt.Filtered == 0):
						t.Fatalf("row by row: error %v, bad rows %v, %d filtered", wantErr, wantSt.BadRows, wantSt.Filtered)
					}
					// When a budget runs out, the bulk path counts the
					// filtered rows of that row group whole or not at all;
					// without a budget it counts those before the bad row.
					matchRowByRow(t, src, opts, []int{1, 2}, budget == 3, wantRows, wantSt, wantErr)
				})
			}
		}
	}
}

// matchRowByRow reads src with opts on the bulk path with each number of
// workers and fails unless the rows, stats and error equal the row-by-row
// path's (wantRows, wantSt, wantErr). Before an error, rows come in whole
// batches and the paths cut batches differently, so only the rows both
// delivered are compared, and the stats' row count is not; with
// ignoreFilteredOnError the filtered-row counts are not compared either
// (the bulk path leaves out those of the row group of the error).
func matchRowByRow(t *testing.T, src []Source, opts Options, workers []int, ignoreFilteredOnError bool, wantRows []string, wantSt Stats, wantErr error) {
	t.Helper()
	for _, w := range workers {
		o := opts
		o.Workers = w
		gotRows, gotSt, gotErr := readAll(t, src, o)
		if fmt.Sprint(gotErr) != fmt.Sprint(wantErr) {
			t.Fatalf("workers %d: error %v, row by row %v", w, gotErr, wantErr)
		}
		if wantErr != nil {
			k := min(len(gotRows), len(wantRows))
			if !slices.Equal(gotRows[:k], wantRows[:k]) {
				t.Fatalf("workers %d: the rows before the error differ", w)
			}
			gotSt.Rows = wantSt.Rows
			if ignoreFilteredOnError {
				gotSt.Filtered, gotSt.FilteredMaxTS = wantSt.Filtered, wantSt.FilteredMaxTS
			}
		} else if !slices.Equal(gotRows, wantRows) {
			t.Fatalf("workers %d: %d rows, row by row %d", w, len(gotRows), len(wantRows))
		}
		if fmt.Sprintf("%+v", gotSt) != fmt.Sprintf("%+v", wantSt) {
			t.Fatalf("workers %d: stats\n%+v\nrow by row\n%+v", w, gotSt, wantSt)
		}
	}
}

// MetadataRows sums the rows that the footers list when every source is a
// readable Parquet file, and gives up otherwise (the reader reports those
// files); the rows are checked against the rows the reader reads.
func TestMetadataRows(t *testing.T) {
	rows := randomBulkRows(rand.New(rand.NewPCG(3, 5)), 1000)
	a := writeParquet(t, rows, parquet.MaxRowsPerRowGroup(300))
	b := writeParquet(t, rows[:123])
	both := []Source{BytesSource("a.parquet", a), BytesSource("b.parquet", b)}
	n, ok := MetadataRows(both)
	_, st, err := readAll(t, both, Options{Mapping: DefaultMapping(), MaxBadRows: NoLimit})
	if err != nil {
		t.Fatal(err)
	}
	if !ok || n != 1123 || st.RowsRead != n {
		t.Fatalf("MetadataRows = %d, %v; want 1123 and the %d rows the reader reads", n, ok, st.RowsRead)
	}
	for name, srcs := range map[string][]Source{
		"none":      nil,
		"with-csv":  {both[0], BytesSource("c.csv", []byte("user_id,ts,event\nu1,2026-01-01T00:00:00Z,x\n"))},
		"truncated": {both[0], BytesSource("t.parquet", b[:len(b)-9])},
	} {
		if n, ok := MetadataRows(srcs); ok {
			t.Errorf("%s: MetadataRows = %d, true; want false", name, n)
		}
	}
}
