package experiment

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
