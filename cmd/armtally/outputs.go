package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"strings"
	"syscall"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/specfile"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/report/chart"
)

// outputFiles returns the files a run writes: --out and --json unless
// they are standard output, and the audit table of each experiment.
func outputFiles(run *analyzeRun) []report.OutputPath {
	var outs []report.OutputPath
	for i, path := range []string{run.out, run.jsonOut} {
		if path != "" && path != "-" {
			outs = append(outs, report.OutputPath{From: run.outFrom[i], Path: path})
		}
	}
	if run.brief != "" {
		outs = append(outs, report.OutputPath{From: "--brief", Path: run.brief})
	}
	if run.audit != "" {
		for _, e := range run.experiments {
			outs = append(outs, report.OutputPath{From: run.outFrom[2], Path: report.PerExperimentPath(run.audit, e.spec.Key, len(run.experiments))})
		}
	}
	if run.chart != "" {
		for _, e := range run.experiments {
			outs = append(outs, report.OutputPath{From: "--chart", Path: report.PerExperimentPath(run.chart, e.spec.Key, len(run.experiments))})
		}
	}
	if run.state != "" {
		// The state file is read and then replaced: an output too.
		outs = append(outs, report.OutputPath{From: "--state", Path: run.state})
	}
	return append(outs, monitorOutputs(run)...)
}

// checkOutputs refuses, before any input is read, the outputs that would
// lose data or fail after the analysis: an output that is one of the
// inputs (the files read and the spec file), the same file as another
// output, a folder, or in a folder that is missing or cannot be written
// to; and standard output asked for twice, or for the audit table.
// Symbolic links are followed, so a link to an input is an input.
func checkOutputs(run *analyzeRun, inputs []string) error {
	if run.audit == "-" {
		return usagef("analyze: %s -: the audit table is a Parquet file, which is not written to standard output; name a file", run.outFrom[2])
	}
	if run.brief == "-" {
		return usagef("analyze: --brief -: the brief readout is written next to the full one; name a file")
	}
	if run.state == "-" {
		return usagef("analyze: --state -: the state file is read back on the next run; name a file")
	}
	if run.chart == "-" {
		return usagef("analyze: --chart -: the chart is an image, which is not written to standard output; name a file")
	}
	if run.jsonOut == "-" && (run.out == "" || run.out == "-") {
		return usagef("analyze: %s -: the Markdown readout goes to standard output too; name a file for it with --out FILE (or --out %s)", run.outFrom[1], os.DevNull)
	}
	if err := report.CheckOutputPaths(outputFiles(run), inputs); err != nil {
		return usagef("analyze: %v", err)
	}
	return nil
}

// inputRoots returns the input paths of the run as given: the arguments,
// or the spec file's input.paths when there are none.
func inputRoots(fs *pflag.FlagSet, sf *specfile.File) []string {
	if fs.NArg() > 0 || sf == nil {
		return fs.Args()
	}
	return sf.Paths
}

// checkOutsideInputFolders refuses an output that the next run over the
// same input folders would read as input: a file below one of them whose
// name has an input extension and no '.' or '_' at the start of its name
// or of a folder on the way down (ingest.FileSources skips those). A
// nightly job that wrote its state or audit table as state.parquet inside
// the export it reads would otherwise fail, or worse, on the next night.
func checkOutsideInputFolders(outputs []report.OutputPath, roots []string) error {
	var folders, given []string
	for _, r := range roots {
		if fi, err := os.Stat(r); err == nil && fi.IsDir() {
			folders, given = append(folders, realPath(r)), append(given, r)
		}
	}
	for _, o := range outputs {
		if o.Path == "-" || !ingest.IsInputName(o.Path) {
			continue
		}
		dir := realPath(filepath.Dir(o.Path))
		for i, folder := range folders {
			rel, err := filepath.Rel(folder, dir)
			if err != nil || rel == ".." || strings.HasPrefix(rel, ".."+string(filepath.Separator)) || hiddenOnTheWay(rel) {
				continue
			}
			return usagef("analyze: %s %s is inside the input folder %s and the next run over it would read it as input; write it outside the folder, or start its name with '_' or '.'", o.From, o.Path, given[i])
		}
	}
	return nil
}

// realPath is path made absolute with its symbolic links resolved, or as
// clean as it gets when it cannot be resolved.
func realPath(path string) string {
	if abs, err := filepath.Abs(path); err == nil {
		path = abs
	}
	if real, err := filepath.EvalSymlinks(path); err == nil {
		return real
	}
	return filepath.Clean(path)
}

// hiddenOnTheWay reports whether a relative folder path has a component
// that a folder walk skips.
func hiddenOnTheWay(rel string) bool {
	if rel == "." {
		return false
	}
	for _, part := range strings.Split(rel, string(filepath.Separator)) {
		if strings.HasPrefix(part, ".") || strings.HasPrefix(part, "_") {
			return true
		}
	}
	return false
}

// notifySignals returns a context that SIGINT or SIGTERM cancels, with a
// *signalError as its cause, and the function that stops listening.
// Every signal is caught until then, so a second one cannot end the
// process before its temporary files are removed.
func notifySignals(parent context.Context) (context.Context, func()) {
	ctx, cancel := context.WithCancelCause(parent)
	ch := make(chan os.Signal, 1)
	signal.Notify(ch, os.Interrupt, syscall.SIGTERM)
	done := make(chan struct{})
	go func() {
		select {
		case sig := <-ch:
			cancel(&signalError{sig})
		case <-done:
		}
	}()
	return ctx, func() {
		signal.Stop(ch)
		close(done)
		cancel(nil)
	}
}

// interrupted returns the signal that cancelled ctx, or nil.
func interrupted(ctx context.Context) *signalError {
	var se *signalError
	if errors.As(context.Cause(ctx), &se) {
		return se
	}
	return nil
}

// removeStaleSpills removes the spill folders in dir left by processes
// that no longer run, and says so on stderr, as it does for each one it
// cannot remove.
func removeStaleSpills(dir string, stderr io.Writer) {
	removed, err := ingest.RemoveStaleSpills(dir)
	for _, path := range removed {
		fmt.Fprintf(stderr, "armtally: removed %s, a spill folder left by a run that was killed\n", path)
	}
	if err == nil {
		return
	}
	errs := []error{err}
	if j, ok := err.(interface{ Unwrap() []error }); ok {
		errs = j.Unwrap()
	}
	for _, e := range errs {
		fmt.Fprintf(stderr, "armtally: warning: %v\n", e)
	}
}

// writeCharts adds each readout's chart to set, at run.chart or, with
// several experiments, at run.chart with "-KEY" before the extension;
// PNG when the name ends in .png, else SVG.
func writeCharts(set *report.OutputSet, run *analyzeRun, readouts []experiment.Readout) error {
	if run.chart == "" {
		return nil
	}
	opts := chart.Options{Format: chart.FormatOf(run.chart)}
	for i, e := range run.experiments {
		if i >= len(readouts) {
			return fmt.Errorf("writing the chart of experiment %q: the run has no readout of it", e.spec.Key)
		}
		r := readouts[i]
		path := report.PerExperimentPath(run.chart, e.spec.Key, len(run.experiments))
		if err := set.Add(path, func(w io.Writer) error { return chart.Write(w, r, opts) }); err != nil {
			return fmt.Errorf("writing the chart of experiment %q: %w", e.spec.Key, err)
		}
	}
	return nil
}

// chartLinkPath returns the chart's path as the Markdown readout links
// it: relative to the Markdown file's folder, or as given when the
// readout goes to standard output or the two share no relative path
// (another volume); "" without --chart.
func chartLinkPath(run *analyzeRun) string {
	return linkPath(run.out, run.chart)
}

// linkPath returns path as the Markdown readout at out links it.
func linkPath(out, path string) string {
	if path == "" || out == "" || out == "-" {
		return path
	}
	abs, err1 := filepath.Abs(path)
	dir, err2 := filepath.Abs(filepath.Dir(out))
	if err1 != nil || err2 != nil {
		return path
	}
	rel, err := filepath.Rel(dir, abs)
	if err != nil {
		return abs
	}
	return rel
}
