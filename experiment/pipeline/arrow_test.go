package pipeline

import (
	"context"
	"errors"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"

	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/sampledata"
)

// arrowStream builds, with Arrow's own builders and no armtally reader, the
// stream a query engine might hand over for the log genData writes: user
// ids as large strings, the time as a nanosecond timestamp with a time
// zone, event names dictionary-encoded, experiment and arm as strings
// (null off exposure rows), in batches of batchRows.
func arrowStream(t *testing.T, mem memory.Allocator, cfg sampledata.Config, batchRows int) array.RecordReader {
	t.Helper()
	schema := arrow.NewSchema([]arrow.Field{
		{Name: "visitor", Type: arrow.BinaryTypes.LargeString},
		{Name: "at", Type: &arrow.TimestampType{Unit: arrow.Nanosecond, TimeZone: "Europe/Paris"}},
		{Name: "what", Type: &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int16, ValueType: arrow.BinaryTypes.String}},
		{Name: "test", Type: arrow.BinaryTypes.String, Nullable: true},
		{Name: "variant", Type: arrow.BinaryTypes.String, Nullable: true},
	}, nil)
	b := array.NewRecordBuilder(mem, schema)
	defer b.Release()
	var batches []arrow.RecordBatch
	flush := func() {
		if b.Field(0).Len() > 0 {
			batches = append(batches, b.NewRecordBatch())
		}
	}
	optional := func(fb array.Builder, s string) {
		if s == "" {
			fb.AppendNull()
		} else {
			fb.(*array.StringBuilder).Append(s)
		}
	}
	err := sampledata.Generate(cfg, rand.NewPCG(11, 12), func(e sampledata.Event) error {
		b.Field(0).(*array.LargeStringBuilder).Append(e.User)
		b.Field(1).(*array.TimestampBuilder).Append(arrow.Timestamp(e.TS.UnixNano()))
		if err := b.Field(2).(*array.BinaryDictionaryBuilder).AppendString(e.Name); err != nil {
			return err
		}
		optional(b.Field(3), e.Experiment)
		optional(b.Field(4), e.Arm)
		if b.Field(0).Len() == batchRows {
			flush()
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	flush()
	rr, err := array.NewRecordReader(schema, batches)
	if err != nil {
		t.Fatal(err)
	}
	for _, rec := range batches {
		rec.Release()
	}
	return rr
}

// An Arrow stream from the caller's own engine gives the generator's
// ground truth and the same readout as the same rows from a file, and the
// run releases every buffer it was handed.
func TestRunArrowStream(t *testing.T) {
	name, data, cfg, sum := genData(t, 3000, false)
	fromFile, err := Run(context.Background(), Input{Sources: []ingest.Source{ingest.BytesSource(name, data)}}, oneExperiment(cfg), Options{})
	if err != nil {
		t.Fatal(err)
	}
	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	rr := arrowStream(t, mem, cfg, 5000)
	in := Input{Records: rr, RecordsName: "engine result",
		Mapping: ingest.Mapping{User: "visitor", TS: "at", Event: "what", Experiment: "test", Arm: "variant"}}
	res, err := Run(context.Background(), in, oneExperiment(cfg), Options{})
	if err != nil {
		t.Fatal(err)
	}
	rr.Release()
	mem.AssertSize(t, 0)
	checkTruth(t, res.Readouts[0], cfg, sum)
	if !reflect.DeepEqual(res.Readouts[0], fromFile.Readouts[0]) {
		t.Errorf("readout from the Arrow stream differs from the file's")
	}
}

// A stream without a mapped column is refused before any row is read,
// naming the stream and the column.
func TestRunArrowStreamMissingColumn(t *testing.T) {
	_, _, cfg, _ := genData(t, 100, false)
	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	rr := arrowStream(t, mem, cfg, 5000)
	defer rr.Release()
	in := Input{Records: rr, RecordsName: "engine result"} // default names: user_id, ts, ...
	_, err := Run(context.Background(), in, oneExperiment(cfg), Options{})
	var ce *ConfigError
	if !errors.As(err, &ce) {
		t.Fatalf("error %v, want a ConfigError", err)
	}
	for _, want := range []string{"engine result", "user_id"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q does not name %q", err, want)
		}
	}
}
