package experiment

import (
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
)

// base is the origin of the hand-made logs' clocks.
var base = time.Date(2026, 5, 4, 0, 0, 0, 0, time.UTC)

// row is one event of a hand-made log; at is an offset from base.
type row struct {
	user  string
	at    time.Duration
	event string
	exp   string // "" is null
	arm   string // "" is null
}

// batch builds a record batch of the logical event table from rows.
func batch(t testing.TB, rows []row) arrow.RecordBatch {
	t.Helper()
	schema := arrow.NewSchema([]arrow.Field{
		{Name: ColUser, Type: arrow.BinaryTypes.String},
		{Name: ColTS, Type: &arrow.TimestampType{Unit: arrow.Nanosecond, TimeZone: "UTC"}},
		{Name: ColEvent, Type: arrow.BinaryTypes.String},
		{Name: ColExperiment, Type: arrow.BinaryTypes.String, Nullable: true},
		{Name: ColArm, Type: arrow.BinaryTypes.String, Nullable: true},
	}, nil)
	b := array.NewRecordBuilder(memory.DefaultAllocator, schema)
	defer b.Release()
	for _, r := range rows {
		b.Field(0).(*array.StringBuilder).Append(r.user)
		b.Field(1).(*array.TimestampBuilder).Append(arrow.Timestamp(base.Add(r.at).UnixNano()))
		b.Field(2).(*array.StringBuilder).Append(r.event)
		for i, v := range []string{r.exp, r.arm} {
			if v == "" {
				b.Field(3 + i).(*array.StringBuilder).AppendNull()
			} else {
				b.Field(3 + i).(*array.StringBuilder).Append(v)
			}
		}
	}
	return b.NewRecordBatch()
}

// tally runs a Tallier over rows, split into batches of at most size rows
// (size <= 0: one batch).
func tally(t testing.TB, spec Spec, rows []row, size int) Tally {
	t.Helper()
	tl, err := NewTallier(spec)
	if err != nil {
		t.Fatalf("NewTallier: %v", err)
	}
	if size <= 0 {
		size = len(rows) + 1
	}
	for lo := 0; lo < len(rows); lo += size {
		hi := min(lo+size, len(rows))
		rec := batch(t, rows[lo:hi])
		err := tl.Add(rec)
		rec.Release()
		if err != nil {
			t.Fatalf("Add: %v", err)
		}
	}
	out, err := tl.Tally()
	if err != nil {
		t.Fatalf("Tally: %v", err)
	}
	return out
}

func ptrTime(t time.Time) *time.Time { return &t }

const (
	hour = time.Hour
	day  = 24 * time.Hour
)
