// Package warehousecheck holds the tests that run the queries of
// experiment/warehouse on real engines: embedded DuckDB (cgo, which is
// why this is a module of its own) and PostgreSQL 15 servers the tests
// start themselves (one server, and a coordinator with two shards), and
// compare each result with armtally's own tallies of the same rows.
// See DEVELOPERS.md.
package warehousecheck
