package warehousecheck

import (
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/parquet-go/parquet-go"
)

// logRow is one row of the generated event logs: every column nullable,
// so that the logs hold bad rows of every reason a typed table can have.
type logRow struct {
	User       *string `parquet:"user_id,optional"`
	TS         *int64  `parquet:"ts,optional,timestamp(microsecond:utc)"`
	Event      *string `parquet:"event,optional"`
	Experiment *string `parquet:"experiment,optional"`
	Arm        *string `parquet:"arm,optional"`
	Platform   *string `parquet:"platform,optional"`
	Country    *string `parquet:"country,optional"`
}

// logStart is the first instant of the generated logs.
var logStart = time.Date(2026, time.March, 2, 0, 0, 0, 0, time.UTC)

// genRows returns a random event log of about units units, made to hit
// every rule of the event semantics often: exposures on a coarse time
// grid (so that ties at t0 are common), units in two arms, exposures of
// other experiments and without an experiment, metric events before t0,
// after the window and of units never exposed, segment values that
// disagree or are null at t0, names with quotes, backslashes, semicolons
// and non-ASCII text, and bad rows of each reason.
func genRows(seed uint64, units int) []logRow {
	r := rand.New(rand.NewPCG(seed, 0x77617265686f7573))
	s := func(v string) *string { return &v }
	pick := func(vals ...string) *string {
		i := r.IntN(len(vals) + 1)
		if i == len(vals) {
			return nil
		}
		return s(vals[i])
	}
	// Times on a grid of 6 hours over 20 days, plus a jitter of whole
	// microseconds on some.
	at := func() *int64 {
		t := logStart.Add(time.Duration(r.IntN(80)) * 6 * time.Hour)
		if r.IntN(3) == 0 {
			t = t.Add(time.Duration(r.IntN(3600_000_000)) * time.Microsecond)
		}
		v := t.UnixMicro()
		return &v
	}
	arms := []string{"control", "treatment", `o'brien "b" \arm;`}
	keys := []string{"checkout-2026", "search;DROP TABLE x", "checkout-2026", "checkout-2026"}
	events := []string{"purchase", "signup", "refund", "page_view", "click"}
	var rows []logRow
	for u := 0; u < units; u++ {
		user := fmt.Sprintf("u%05d", u)
		switch u % 97 {
		case 3:
			user = "ünït-" + user
		case 5:
			user = `q'"\;` + user
		}
		exposed := r.IntN(10) < 8
		if exposed {
			n := 1 + r.IntN(3)
			arm := arms[r.IntN(len(arms))]
			base := *at()
			for i := 0; i < n; i++ {
				a := arm
				if r.IntN(3) == 0 {
					a = arms[r.IntN(len(arms))]
				}
				// Most exposures of a unit fall on one of two instants,
				// so that ties at t0 are common.
				ts := base + int64(r.IntN(2))*int64(6*time.Hour/time.Microsecond)
				if r.IntN(4) == 0 {
					ts = *at()
				}
				key := s(keys[r.IntN(len(keys))])
				if r.IntN(25) == 0 {
					key = nil
				}
				rows = append(rows, logRow{User: s(user), TS: &ts, Event: s("exposure"), Experiment: key, Arm: s(a),
					Platform: pick("ios", "android", "web"), Country: pick("de", "fr", "日本")})
			}
		}
		for i := r.IntN(6); i > 0; i-- {
			rows = append(rows, logRow{User: s(user), TS: at(), Event: s(events[r.IntN(len(events))]), Platform: pick("ios", "web")})
		}
	}
	// Bad rows of every reason a typed table can hold, and valid rows
	// whose arm no experiment planned.
	for i := 0; i < 3+int(seed%3); i++ {
		rows = append(rows,
			logRow{User: nil, TS: at(), Event: s("purchase")},
			logRow{User: s(""), TS: at(), Event: s("exposure"), Experiment: s("checkout-2026"), Arm: s("control")},
			logRow{User: s("u00001"), TS: nil, Event: s("purchase")},
			logRow{User: s("u00002"), TS: at(), Event: nil},
			logRow{User: s("u00003"), TS: at(), Event: s("")},
			logRow{User: s("u00004"), TS: at(), Event: s("exposure"), Experiment: s("checkout-2026"), Arm: nil},
			logRow{User: s("u00005"), TS: at(), Event: s("exposure"), Experiment: s("checkout-2026"), Arm: s("")},
			logRow{User: s("u00006"), TS: at(), Event: s("exposure"), Experiment: s("checkout-2026"), Arm: s("unplanned")},
		)
	}
	r.Shuffle(len(rows), func(i, j int) { rows[i], rows[j] = rows[j], rows[i] })
	return rows
}

// writeLog writes rows to a Parquet file in dir and returns its path.
func writeLog(t testing.TB, dir string, rows []logRow) string {
	t.Helper()
	path := filepath.Join(dir, "events.parquet")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w := parquet.NewGenericWriter[logRow](f, parquet.MaxRowsPerRowGroup(4096))
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}
