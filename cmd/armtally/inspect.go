package main

import (
	"errors"
	"fmt"
	"io"
	"strings"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment/specfile"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/ingest/profile"
	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/sampledata"
)

const inspectUsage = `Usage: armtally inspect [flags] FILE|FOLDER|PATTERN...
       armtally inspect --demo [flags]

Shows what an event log holds before a full run: for each file its format,
its columns and their types, its row count (Parquet: from the file's
metadata; CSV: counted) and which of its columns armtally would read as
each logical column (user, ts, event, experiment, arm) under the column
mapping flags, and which are missing; then, over all files, the
experiments and arms seen on exposure rows with their row counts, the
event names with their row counts (the most frequent first) and the time
range of the valid rows.

Bad rows are counted by reason, with the first of each, and skipped; a
file that lacks a mapped column is described but its rows are not read.
The output is text, the same for the same input; --json also writes it as
JSON. The exit code is 3 when a file lacks a mapped column (the report is
still written), 0 otherwise, bad rows or not.

Examples:
  armtally inspect --demo
  armtally inspect exports/ --user-col visitor_id --ts-col event_time
  armtally inspect events.csv --delimiter tab --epoch-unit ms --json inspect.json

Flags:
`

// inspectFlags holds the values of the inspect flags.
type inspectFlags struct {
	demo                     bool
	exposureEvent, delimiter string
	top                      int
	jsonOut                  string
}

func runInspect(args []string, stdout, stderr io.Writer) error {
	var f inspectFlags
	fs := pflag.NewFlagSet("inspect", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.SortFlags = false
	fs.BoolVar(&f.demo, "demo", false, "inspect the embedded demo event log")
	mf := defineMappingFlags(fs)
	fs.StringVar(&f.exposureEvent, "exposure-event", "exposure", "event name of exposure rows")
	fs.StringVar(&f.delimiter, "delimiter", ",", "field separator of CSV files: one character; tab or \\t for a tab")
	fs.IntVar(&f.top, "top", 20, "event names to show, the most frequent first")
	fs.StringVar(&f.jsonOut, "json", "", "also write the report as JSON to this file")
	if err := parseFlags(fs, args, inspectUsage, stdout); err != nil {
		return err
	}
	var mapping ingest.Mapping
	if err := mf.apply(&mapping, true, "inspect"); err != nil {
		return err
	}
	delim, err := specfile.ParseDelimiter(f.delimiter)
	if err != nil {
		return usagef("inspect: --delimiter: %v", err)
	}
	if f.top < 0 {
		return usagef("inspect: --top %d: want 0 or more", f.top)
	}
	if f.exposureEvent == "" {
		return usagef("inspect: --exposure-event must not be empty")
	}
	var sources []ingest.Source
	switch {
	case f.demo && fs.NArg() > 0:
		return usagef("inspect: --demo takes no input files (got %s)", strings.Join(fs.Args(), " "))
	case f.demo:
		sources = []ingest.Source{ingest.BytesSource(sampledata.Demo())}
	case fs.NArg() == 0:
		return usagef("inspect: name at least one input file or folder, or use --demo")
	default:
		if sources, err = ingest.FileSources(fs.Args()); err != nil {
			return &dataError{err}
		}
		if len(sources) == 0 {
			return &dataError{fmt.Errorf("no .csv, .csv.gz, .parquet or .parq files in %s", strings.Join(fs.Args(), ", "))}
		}
	}
	rep, err := profile.Build(sources, ingest.Options{Mapping: mapping, ExposureEvent: f.exposureEvent,
		Delimiter: delim, MaxBadRows: ingest.NoLimit}, f.top)
	var oe *profile.OptionsError
	switch {
	case errors.As(err, &oe):
		return usagef("inspect: %v", oe.Err)
	case err != nil:
		return &dataError{err}
	}
	if f.jsonOut != "" {
		err := report.WriteFileAtomic(f.jsonOut, func(w io.Writer) error { return report.WriteProfileJSON(w, rep) })
		if err != nil {
			return fmt.Errorf("writing the JSON report: %w", err)
		}
	}
	if err := report.WriteProfile(stdout, rep); err != nil {
		return err
	}
	var unread []string
	for _, f := range rep.Files {
		if f.Error != "" {
			unread = append(unread, f.Name)
		}
	}
	if len(unread) > 0 {
		return &dataError{fmt.Errorf("inspect: the rows of %s were not read: a mapped column is missing (see the mapping above)", strings.Join(unread, ", "))}
	}
	return nil
}
