package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"runtime/pprof"
	"runtime/trace"
	"time"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/pipeline"
)

// spec returns the experiment.Spec that `armtally analyze` builds from
// armtallyArgs.
func (a analysis) spec() experiment.Spec {
	start, end := a.Start, a.End
	return experiment.Spec{
		Key:           a.Experiment,
		ExposureEvent: a.ExposureEvent,
		Control:       a.Control,
		Arms:          a.Arms,
		Start:         &start,
		End:           &end,
		MultiArm:      experiment.MultiArmExclude,
		Maturity:      experiment.MaturityExclude,
		Metrics:       []experiment.Metric{{Name: a.Metric, Events: a.Events, Window: a.Window}},
	}
}

// analyzeInProcess runs armtally's analysis of a over files in this
// process through pipeline.Run, the call `armtally analyze` makes, and
// returns the readout.
func analyzeInProcess(a analysis, files []string) (experiment.Readout, error) {
	exps := []pipeline.Experiment{{Spec: a.spec(), Options: experiment.DefaultAnalysisOptions()}}
	res, err := pipeline.Run(context.Background(), pipeline.Input{Paths: files}, exps, pipeline.Options{})
	if err != nil {
		return experiment.Readout{}, fmt.Errorf("analyze: %w", err)
	}
	return res.Readouts[0], nil
}

// runProfile is the profile mode: it runs analyzeInProcess over --file
// with a CPU profile (and, with --memprofile, a heap profile at the end).
func runProfile(args []string, stdout, stderr io.Writer) error {
	fs := pflag.NewFlagSet("profile", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	file := fs.String("file", "", "event log to analyse")
	cpu := fs.String("cpuprofile", "cpu.prof", "write the CPU profile here")
	mem := fs.String("memprofile", "", "write a heap profile (after the analysis) here")
	tr := fs.String("trace", "", "also write an execution trace (go tool trace) here")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *file == "" {
		return fmt.Errorf("profile: --file is required")
	}
	f, err := createStarted(*cpu, pprof.StartCPUProfile)
	if err != nil {
		return fmt.Errorf("profile: %w", err)
	}
	defer f.Close()
	if *tr != "" {
		tf, err := createStarted(*tr, trace.Start)
		if err != nil {
			pprof.StopCPUProfile()
			return fmt.Errorf("profile: %w", err)
		}
		defer tf.Close()
		defer trace.Stop()
	}
	start := time.Now()
	ro, err := analyzeInProcess(defaultAnalysis(), []string{*file})
	elapsed := time.Since(start)
	pprof.StopCPUProfile()
	if err != nil {
		return fmt.Errorf("profile: %w", err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("profile: %w", err)
	}
	if *mem != "" {
		mf, err := os.Create(*mem)
		if err != nil {
			return fmt.Errorf("profile: %w", err)
		}
		if err := pprof.Lookup("allocs").WriteTo(mf, 0); err != nil {
			mf.Close()
			return fmt.Errorf("profile: %w", err)
		}
		if err := mf.Close(); err != nil {
			return fmt.Errorf("profile: %w", err)
		}
	}
	fmt.Fprintf(stdout, "analysed %s in %.2f s: %d rows read\n", *file, elapsed.Seconds(), ro.Diagnostics.RowsRead)
	return nil
}

// createStarted creates the file at path and starts start (a profile or
// trace) writing to it.
func createStarted(path string, start func(io.Writer) error) (*os.File, error) {
	f, err := os.Create(path)
	if err != nil {
		return nil, err
	}
	if err := start(f); err != nil {
		f.Close()
		return nil, err
	}
	return f, nil
}
