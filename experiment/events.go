package experiment

import "fmt"

// The logical event table. Readers (package ingest, or any other producer
// such as a warehouse query) hand the tallier Arrow record batches whose
// columns carry these names, whatever the physical names in the source were.
//
//	user        utf8, non-null, non-empty     the randomisation unit
//	ts          timestamp[ns, tz=UTC], non-null
//	event       utf8, non-null                 event name
//	experiment  utf8, nullable (optional)      experiment key on exposure rows
//	arm         utf8, nullable (optional)      arm name on exposure rows
//	<segment>   utf8, nullable                 one column per segment dimension,
//	                                           named after the dimension
//
// The event, experiment and arm columns may also come dictionary-encoded
// (dictionary<values=utf8, indices=int32>, as ingest.Options.DictionaryColumns
// makes them); the tallier then decides once per dictionary value.
//
// The producer has already rejected or counted rows that break these rules
// (null user, unparseable time, exposure without an arm); the tallier trusts
// them and does not check again.
const (
	ColUser       = "user"
	ColTS         = "ts"
	ColEvent      = "event"
	ColExperiment = "experiment"
	ColArm        = "arm"
)

// The logical unit table (the wide shape): one row per unit and exposure,
// read by UnitTableTallier.
//
//	user        utf8, non-null, non-empty     the randomisation unit
//	arm         utf8, non-null, non-empty     the unit's arm
//	ts          timestamp[ns, tz=UTC], non-null (optional)
//	                                          the exposure time
//	<metric>    bool, non-null                one column per metric, named
//	                                          after Metric.Name: converted
//	<segment>   utf8, nullable                one column per segment dimension
//
// The logical counts table (the aggregated shape): one row per arm,
// combination of segment values and metric, read by CountsTallier.
//
//	arm          utf8, non-null, non-empty
//	<segment>    utf8, nullable               one column per segment dimension
//	metric       utf8, non-null               a Metric.Name of the spec
//	units        int64, non-null, >= 0        units analysed for the metric
//	conversions  int64, non-null, >= 0        of them, units that converted
//	immature     int64, non-null, >= 0 (optional)
//	                                          units whose attribution window
//	                                          had not closed
const (
	ColMetric      = "metric"
	ColUnits       = "units"
	ColConversions = "conversions"
	ColImmature    = "immature"
)

// InputShape says which of the three input shapes a tally was made from.
// The zero value is the event log.
type InputShape int

const (
	// InputEventLog is the event log, one row per event (Tallier).
	InputEventLog InputShape = iota
	// InputUnitTable is the unit table, one row per unit (UnitTableTallier).
	InputUnitTable
	// InputCounts is a table of counts already aggregated (CountsTallier).
	InputCounts
)

// String returns the shape's name as the readout spells it: event_log,
// unit_table or counts.
func (s InputShape) String() string {
	switch s {
	case InputEventLog:
		return "event_log"
	case InputUnitTable:
		return "unit_table"
	case InputCounts:
		return "counts"
	}
	return fmt.Sprintf("InputShape(%d)", int(s))
}
