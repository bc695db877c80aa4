// Package sampledata generates deterministic synthetic experiment event logs
// and writes them as Parquet or CSV, and it carries the small demo data set
// that armtally embeds.
//
// The stages, per unit, in order:
//
//  1. Generate draws everything from one caller-supplied rand.Source; the
//     same Config and the same seeded source give the same rows, and
//     WriteParquet and WriteCSV then give byte-identical files.
//  2. Each exposed unit gets a platform, a first exposure time t0 uniform in
//     [Start, Start+ExposureDays) and an arm drawn by the arms' shares, then
//     perhaps a repeat exposure in the same arm and perhaps an exposure in a
//     second arm, both strictly after t0.
//  3. Per metric, the unit converts with its arm's true rate: a converting
//     unit has a metric event at t0+d with d uniform in [0, Window) (and
//     sometimes a second one later); a unit that does not convert has no
//     metric event in [t0, t0+Window), though it may have one at or after
//     t0+Window, and any unit may have one before t0.
//  4. Noise events (page views and the like) fall before and after t0, and
//     NeverExposedUsers extra units have events but no exposure.
//  5. Units are produced in blocks of a few thousand; a block's rows are
//     sorted by time, then, when ShuffleBlock is set, consecutive runs of
//     ShuffleBlock rows are shuffled. Memory is bounded by the block and the
//     shuffle buffer, never by Users.
//
// Timestamps carry whole microseconds, so the CSV text and the Parquet
// TIMESTAMP(MICROS) values are the same instants.
//
// Summary reports the ground truth: units per arm, multi-arm units, and per
// arm and metric the number of single-arm units that convert inside the
// window. An analysis that excludes multi-arm units and ends its window at
// Config.AnalysisEnd must reproduce those counts exactly.
//
// Not checked: that the names in Config look like anything in particular
// (any non-empty string is accepted), and that the chosen rates give an
// experiment worth reading.
//
// The embedded demo file demo/demo.parquet is written by gendemo.go; run
// go generate in this folder after changing DemoConfig or the generator.
package sampledata

//go:generate go run gendemo.go
