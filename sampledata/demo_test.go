package sampledata

import (
	"bytes"
	"math"
	"slices"
	"testing"
	"time"

	"github.com/parquet-go/parquet-go"
)

func TestDemoMatchesGenerator(t *testing.T) {
	name, data := Demo()
	if name != "demo.parquet" {
		t.Errorf("Demo name %q, want demo.parquet", name)
	}
	var buf bytes.Buffer
	if _, err := WriteDemo(&buf); err != nil {
		t.Fatalf("WriteDemo: %v", err)
	}
	if !bytes.Equal(buf.Bytes(), data) {
		t.Fatalf("embedded demo/demo.parquet (%d bytes) differs from what the generator writes now (%d bytes); run go generate in sampledata/ and commit the file",
			len(data), buf.Len())
	}
}

func TestDemoCopies(t *testing.T) {
	_, a := Demo()
	a[0] ^= 0xff
	_, b := Demo()
	if a[0] == b[0] {
		t.Error("changing the bytes Demo returned changed the next call's bytes")
	}
}

func TestDemoFile(t *testing.T) {
	_, data := Demo()
	// The demo must stay small enough to embed in the binary.
	if len(data) > 1<<20 {
		t.Errorf("demo is %d bytes, want at most 1 MiB", len(data))
	}
	sum, err := WriteDemo(new(bytes.Buffer))
	if err != nil {
		t.Fatalf("WriteDemo: %v", err)
	}
	f, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatalf("open demo: %v", err)
	}
	if f.NumRows() != sum.Rows {
		t.Errorf("demo has %d rows, summary %d", f.NumRows(), sum.Rows)
	}
	// 50,000-row groups: ceil(rows / 50000) of them, so more than one and
	// a reader can split the work.
	if want := int((sum.Rows + 49999) / 50000); len(f.RowGroups()) != want || want < 2 {
		t.Errorf("%d row groups for %d rows, want %d (at least 2)", len(f.RowGroups()), sum.Rows, want)
	}
	var names []string
	for _, fl := range f.Schema().Fields() {
		names = append(names, fl.Name())
	}
	if spec := DemoSpec(); !slices.Equal(names, spec.Columns) {
		t.Errorf("demo columns %v, DemoSpec says %v", names, spec.Columns)
	}
}

func TestDemoSpec(t *testing.T) {
	s := DemoSpec()
	// Every value below is DemoConfig's, written out by hand.
	checks := []struct {
		name      string
		got, want any
	}{
		{"file name", s.FileName, "demo.parquet"},
		{"experiment", s.Experiment, "checkout-flow-2026"},
		{"exposure event", s.ExposureEvent, "exposure"},
		{"control", s.Control, "control"},
		{"segment", s.Segment, "platform"},
		{"arms", len(s.Arms), 3},
		{"second arm", s.Arms[1].Name, "one-page"},
		{"metrics", len(s.Metrics), 2},
		{"primary metric", s.Metrics[0].Event, "purchase"},
		{"primary window", s.Metrics[0].Window, 7 * 24 * time.Hour},
		{"secondary window", s.Metrics[1].Window, 3 * 24 * time.Hour},
		{"start", s.Start, time.Date(2026, 11, 2, 0, 0, 0, 0, time.UTC)},
		// 2026-11-02 + 14 exposure days + 7-day purchase window.
		{"end", s.End, time.Date(2026, 11, 23, 0, 0, 0, 0, time.UTC)},
		{"units", s.Units, 20000},
		{"never exposed", s.NeverExposedUnits, 500},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("%s: got %v, want %v", c.name, c.got, c.want)
		}
	}
	// Fresh slices each call.
	s.Arms[0].Name = "changed"
	if DemoSpec().Arms[0].Name != "control" {
		t.Error("changing DemoSpec's result changed the next call's")
	}
}

// TestDemoStory checks that the demo shows what it is meant to show: with
// the pooled two-proportion z test at the usual two-sided 5% level (|z| >
// 1.96, common practice), "one-page" beats control on purchase and
// "saved-basket" does not differ from control on purchase. It reads the
// generator's ground-truth counts, which an analysis must reproduce.
func TestDemoStory(t *testing.T) {
	sum, err := WriteDemo(new(bytes.Buffer))
	if err != nil {
		t.Fatalf("WriteDemo: %v", err)
	}
	z := func(arm, metric int) float64 {
		x1, n1 := float64(sum.Converted[0][metric]), float64(sum.SingleArmUnits[0])
		x2, n2 := float64(sum.Converted[arm][metric]), float64(sum.SingleArmUnits[arm])
		p := (x1 + x2) / (n1 + n2)
		return (x2/n2 - x1/n1) / math.Sqrt(p*(1-p)*(1/n1+1/n2))
	}
	tests := []struct {
		name        string
		arm, metric int
		significant bool
	}{
		{"one-page lifts purchase", 1, 0, true},
		{"saved-basket leaves purchase alone", 2, 0, false},
		{"saved-basket leaves signup alone", 2, 1, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := z(tt.arm, tt.metric)
			if (got > 1.96) != tt.significant || got < -1.96 {
				t.Errorf("z = %.2f, want significant lift = %t", got, tt.significant)
			}
			t.Logf("z = %.2f", got)
		})
	}
}
