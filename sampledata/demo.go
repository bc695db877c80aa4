package sampledata

import (
	_ "embed" // for the demo file
	"io"
	"math/rand/v2"
	"time"
)

// demoFileName is the name Demo gives the embedded file.
const demoFileName = "demo.parquet"

// The seed of the demo's random source: rand.NewPCG(demoSeed1, demoSeed2).
const (
	demoSeed1 = 20261102
	demoSeed2 = 3
)

// demoParquet is the embedded demo file, written by gendemo.go. A string,
// so nothing can change it.
//
//go:embed demo/demo.parquet
var demoParquet string

// Demo returns the name and contents of the embedded demo event log, a
// Parquet file written by WriteDemo. Each call returns a fresh copy of the
// bytes, which the caller owns.
func Demo() (name string, data []byte) {
	return demoFileName, []byte(demoParquet)
}

// WriteDemo writes the demo event log: WriteParquet with DemoConfig and the
// demo's fixed seed. Its output is byte for byte the embedded file (a test
// checks this); the Summary it returns is the demo's ground truth.
func WriteDemo(w io.Writer) (Summary, error) {
	return WriteParquet(w, DemoConfig(), rand.NewPCG(demoSeed1, demoSeed2))
}

// DemoFacts is what an analysis of the demo needs to know, as plain values.
type DemoFacts struct {
	// FileName is the name Demo returns.
	FileName string
	// Columns are the physical column names, in file order.
	Columns []string
	// Experiment is the experiment key on exposure rows.
	Experiment string
	// ExposureEvent is the event name of exposure rows.
	ExposureEvent string
	// Control is the control arm's name.
	Control string
	// Arms are the arms, control first, with their planned shares and
	// true conversion rates (one per metric).
	Arms []ArmConfig
	// Metrics are the conversion metrics, primary first, with their
	// attribution windows.
	Metrics []MetricConfig
	// Segment is the name of the segment column.
	Segment string
	// Start is the start of the exposure period.
	Start time.Time
	// End is Config.AnalysisEnd: an analysis window [Start, End) sees every
	// unit mature for every metric.
	End time.Time
	// Units is the number of exposed units; NeverExposedUnits the number of
	// units with events but no exposure.
	Units, NeverExposedUnits int
}

// DemoSpec returns the facts of the embedded demo. Each call returns fresh
// slices.
func DemoSpec() DemoFacts {
	cfg := DemoConfig()
	return DemoFacts{
		FileName:          demoFileName,
		Columns:           Columns(),
		Experiment:        cfg.Experiment,
		ExposureEvent:     cfg.ExposureEvent,
		Control:           cfg.Arms[0].Name,
		Arms:              cfg.Arms,
		Metrics:           cfg.Metrics,
		Segment:           ColPlatform,
		Start:             cfg.Start,
		End:               cfg.AnalysisEnd(),
		Units:             cfg.Users,
		NeverExposedUnits: cfg.NeverExposedUsers,
	}
}
