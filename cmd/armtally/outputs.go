package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"os/signal"
	"path/filepath"
	"syscall"

	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/report"
)

// outputFile is one output file of a run and where it was named.
type outputFile struct {
	// from is the flag or spec file key that named the file.
	from string
	path string
}

// outputFiles returns the files a run writes: --out and --json unless
// they are standard output, and the audit table of each experiment.
func outputFiles(run *analyzeRun) []outputFile {
	var outs []outputFile
	for i, path := range []string{run.out, run.jsonOut} {
		if path != "" && path != "-" {
			outs = append(outs, outputFile{run.outFrom[i], path})
		}
	}
	if run.audit != "" {
		for _, e := range run.experiments {
			outs = append(outs, outputFile{run.outFrom[2], auditPath(run.audit, e.spec.Key, len(run.experiments))})
		}
	}
	return outs
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
	if run.jsonOut == "-" && (run.out == "" || run.out == "-") {
		return usagef("analyze: %s -: the Markdown readout goes to standard output too; name a file for it with --out FILE (or --out %s)", run.outFrom[1], os.DevNull)
	}
	var inputInfos []os.FileInfo
	inputsStated := false
	seen := map[string]outputFile{}
	var written []outputFile
	var writtenInfos []os.FileInfo
	for _, o := range outputFiles(run) {
		target, err := report.ResolveOutput(o.path)
		if errors.Is(err, fs.ErrNotExist) {
			return usagef("analyze: %s %s: the folder to write it in does not exist (%v)", o.from, o.path, err)
		}
		if err != nil {
			return usagef("analyze: %s %s: %v", o.from, o.path, err)
		}
		fi, statErr := os.Stat(target)
		switch {
		case statErr == nil && fi.IsDir():
			return usagef("analyze: %s %s: is a folder; name a file", o.from, o.path)
		case statErr == nil && !fi.Mode().IsRegular():
			// A device or a pipe: written directly, and may be named
			// twice (/dev/null).
			continue
		}
		if prev, ok := seen[target]; ok {
			return usagef("analyze: %s %s and %s %s are the same file: each output needs its own", prev.from, prev.path, o.from, o.path)
		}
		seen[target] = o
		if err := checkWritable(filepath.Dir(target)); err != nil {
			return usagef("analyze: %s %s: cannot write in its folder: %v", o.from, o.path, err)
		}
		if statErr != nil {
			continue
		}
		// An existing file: it may be an input or another output under
		// another name (a hard link).
		for i, prev := range writtenInfos {
			if os.SameFile(fi, prev) {
				return usagef("analyze: %s %s and %s %s are the same file: each output needs its own", written[i].from, written[i].path, o.from, o.path)
			}
		}
		written, writtenInfos = append(written, o), append(writtenInfos, fi)
		if !inputsStated {
			inputsStated = true
			inputInfos = make([]os.FileInfo, len(inputs))
			for i, in := range inputs {
				inputInfos[i], _ = os.Stat(in)
			}
		}
		for i, in := range inputInfos {
			if in != nil && os.SameFile(fi, in) {
				return usagef("analyze: %s %s is an input of the run (%s); writing it would destroy it", o.from, o.path, inputs[i])
			}
		}
	}
	return nil
}

// checkWritable says whether a file can be made in dir, by making one
// and removing it.
func checkWritable(dir string) error {
	f, err := os.CreateTemp(dir, ".armtally-check-*")
	if err != nil {
		var pe *fs.PathError
		if errors.As(err, &pe) {
			return pe.Err
		}
		return err
	}
	name := f.Name()
	f.Close()
	return os.Remove(name)
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
