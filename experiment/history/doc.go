// Package history keeps the looks of monitored experiments in one SQLite
// file (modernc.org/sqlite, pure Go): per experiment and look, the counts
// of every arm and metric, each comparison's sequential state (statistic,
// information fraction, boundary, alpha spent, always-valid p-value and
// sequence) and each arm's daily exposures for the charts.
//
// A look is keyed by experiment and instant (the data's freshness or a
// user's --as-of). [Store.Put] writes a look in one transaction that first
// deletes the same key, so rerunning a night replaces it and a run killed
// mid-write leaves the file as it was. Write transactions take SQLite's
// lock when they begin and wait up to [BusyTimeout] for another run, so
// two runs at once both succeed. The schema is versioned (table
// schema_version) and [Open] migrates older files in place.
package history
