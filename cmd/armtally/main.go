// Command armtally reads an experiment's event log (Parquet or CSV) and
// writes a conversion readout: per-arm rates, differences and lifts with
// intervals, tests decided by both routes, the sample ratio check and the
// diagnostics, as Markdown for a ticket and JSON for dashboards.
//
// Usage:
//
//	armtally analyze [flags] FILE|FOLDER...   analyse an event log
//	armtally analyze --demo                   analyse the embedded demo log
//	armtally gen [flags]                      write a synthetic event log
//	armtally plan [flags]                     size an experiment before it starts
//	armtally inspect [flags] FILE|FOLDER...   show what an event log holds
//	armtally sql --table NAME [flags]         write the SQL query of the counts
//	armtally help [COMMAND]                   show help
//	armtally version                          print the version (also --version)
//
// Exit codes:
//
//	0    the readout was written
//	1    an unexpected failure (for example, a full disk while writing an
//	     output: no output is then replaced)
//	2    usage error: unknown flag, bad flag value, missing argument, a spec
//	     file that cannot be read or has an error (named by file, line and
//	     key), an output path that is an input, another output, a folder or
//	     in a folder that is missing or not writable (checked before any
//	     input is read)
//	3    data error: an input cannot be read (or an input path names no
//	     input file; from a spec file, named by file, line and key), a row
//	     is malformed, the data contradicts the settings (an arm that is
//	     not planned, several experiments without --experiment), or the
//	     data does not hold a name the settings give (an experiment key,
//	     the exposure event, the control or a planned arm, an event of a
//	     metric): the message lists what the log holds, with counts, and a
//	     close name ("did you mean")
//	4    the sample ratio check failed and --fail-on-sample-ratio was given
//	     (the readout is still written)
//	5    a guardrail is not held for a treatment (not shown within its
//	     margin, worse, or not readable) and --fail-on-guardrail was given
//	     (the readout is still written)
//	6    the decision is ship and --exit-on-decision was given (the
//	     readout is still written)
//	7    the decision is stop and --exit-on-decision was given (the readout
//	     is still written); wait and fix_data exit 0 unless code 4 applies
//
//	8    a comparison has crossed its sequential efficacy boundary (at
//	     this look or an earlier one) and --exit-on-boundary was given;
//	     only when none of 4 to 7 applies
//	9    the newest row is older than --max-staleness at --as-of or now
//	     (checked before 4 to 7; the readout is still written)
//
// When several of 4 to 9 apply, the first in the order 9, 4, 5, 7, 6, 8
// is the exit code. With several experiments the decision is the most urgent of
// their readouts' (fix_data, then stop, then ship, then wait).
//
//	130  stopped by SIGINT (143: by SIGTERM)
//
// Outputs and signals: analyze writes every output file (--out, --json,
// --audit) to a temporary file beside it and renames them all into place
// only when all are complete, so a failure or a signal replaces none of
// them; a symbolic link stays a link and its target is written. SIGINT
// or SIGTERM cancels the run, removes the temporary outputs and the spill
// folder of --memory-limit, and exits with 130 or 143. A spill folder
// holds a marker naming its process; a later --memory-limit run removes
// the folders (in the same parent) of processes that no longer run, and
// says so on stderr.
package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"syscall"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment/pipeline"
	"github.com/armtally/armtally/experiment/specfile"
)

// Exit codes; see the package documentation.
const (
	exitOK          = 0
	exitFailure     = 1
	exitUsage       = 2
	exitData        = 3
	exitSampleRatio = 4
	exitGuardrail   = 5
	exitShip        = 6
	exitStop        = 7
	exitInterrupted = 130 // 128 + SIGINT
	exitTerminated  = 143 // 128 + SIGTERM
)

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

// usageError is a problem with the command line.
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

func usagef(format string, args ...any) error {
	return &usageError{fmt.Sprintf(format, args...)}
}

// dataError is a problem with the input data or its fit with the settings.
type dataError struct{ err error }

func (e *dataError) Error() string { return e.err.Error() }
func (e *dataError) Unwrap() error { return e.err }

// signalError is a run stopped by SIGINT or SIGTERM.
type signalError struct{ sig os.Signal }

func (e *signalError) Error() string {
	if e.sig == syscall.SIGTERM {
		return "SIGTERM"
	}
	if e.sig == os.Interrupt {
		return "SIGINT"
	}
	return e.sig.String()
}

// code returns the exit code of the signal: 128 plus its number.
func (e *signalError) code() int {
	if e.sig == syscall.SIGTERM {
		return exitTerminated
	}
	return exitInterrupted
}

// helpRequested is returned when --help was given: help went to stdout.
var errHelp = errors.New("help requested")

const topUsage = `armtally turns an experiment's event log into a conversion readout.

Usage:
  armtally analyze [flags] FILE|FOLDER...   analyse an event log (Parquet or CSV)
  armtally analyze --demo                   analyse the embedded demo event log
  armtally gen [flags]                      write a synthetic event log
  armtally plan [flags]                     size an experiment before it starts
  armtally inspect [flags] FILE|FOLDER...   show what an event log holds before a run
  armtally sql --table NAME [flags]         write the SQL query of analyze's counts for a warehouse
  armtally help [COMMAND]                   show help for a command
  armtally help spec                        describe the experiment spec file (--spec)
  armtally version                          print the version, revision and Go version (also --version)

Exit codes:
  0    the readout was written
  1    unexpected failure (such as a full disk; no output is then replaced)
  2    usage error (including an error in a spec file, named by file, line and
       key, and an output path that is an input, another output or not writable)
  3    data error (unreadable input, malformed row, data that contradicts the settings,
       a name the data does not hold: experiment key, exposure event, control or
       planned arm, event of a metric; the message lists what the log holds)
  4    sample ratio mismatch with --fail-on-sample-ratio (the readout is still written)
  5    a guardrail not held with --fail-on-guardrail (not shown, worse or not
       readable; the readout is still written)
  6    the decision is ship, with --exit-on-decision (the readout is still written)
  7    the decision is stop, with --exit-on-decision (the readout is still
       written; wait and fix_data exit 0)
  8    a sequential efficacy boundary crossed, with --exit-on-boundary (the
       readout is still written)
  9    stale data: the newest row older than --max-staleness (the readout is
       still written)
       When several apply: 9, then 4, 5, 7, 6, then 8.
  130  stopped by SIGINT; 143: by SIGTERM (no output replaced, temporary files removed)

Run 'armtally help COMMAND' for the flags of analyze, gen, plan or inspect,
and 'armtally help spec' for the experiment spec file (analyze --spec).
`

// run runs the command line args and returns the exit code.
func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		fmt.Fprint(stderr, topUsage)
		return exitUsage
	}
	var err error
	switch cmd := args[0]; cmd {
	case "analyze":
		err = runAnalyze(args[1:], stdout, stderr)
	case "gen":
		err = runGen(args[1:], stdout, stderr)
	case "plan":
		err = runPlan(args[1:], stdout, stderr)
	case "inspect":
		err = runInspect(args[1:], stdout, stderr)
	case "version", "--version":
		err = runVersion(args[1:], stdout)
	case "sql":
		err = runSQL(args[1:], stdout, stderr)
	case "help", "-h", "--help":
		if len(args) > 1 && cmd == "help" {
			if args[1] == "spec" {
				fmt.Fprint(stdout, specfile.Help())
				return exitOK
			}
			return run([]string{args[1], "--help"}, stdout, stderr)
		}
		fmt.Fprint(stdout, topUsage)
		return exitOK
	default:
		fmt.Fprintf(stderr, "armtally: unknown command %q\n\n%s", cmd, topUsage)
		return exitUsage
	}
	return exitCode(err, stderr)
}

// parseFlags parses a subcommand's flags. pflag's own usage printing is
// turned off: --help prints usage and every flag to stdout once and
// returns errHelp; a bad flag is a usage error, printed once.
func parseFlags(fs *pflag.FlagSet, args []string, usage string, stdout io.Writer) error {
	fs.Usage = func() {}
	err := fs.Parse(args)
	switch {
	case err == nil:
		return nil
	case errors.Is(err, pflag.ErrHelp):
		fs.SetOutput(stdout)
		fmt.Fprint(stdout, usage)
		fs.PrintDefaults()
		return errHelp
	}
	return usagef("%s: %v", fs.Name(), err)
}

// exitCode prints err (if any) and maps it to an exit code.
func exitCode(err error, stderr io.Writer) int {
	var ue *usageError
	var de *dataError
	var se *specfile.Error
	var ses specfile.Errors
	var sig *signalError
	switch {
	case err == nil:
		return exitOK
	case errors.Is(err, errHelp):
		return exitOK
	case errors.As(err, &sig):
		fmt.Fprintf(stderr, "armtally: %v\n", err)
		return sig.code()
	case errors.As(err, &se), errors.As(err, &ses):
		fmt.Fprintf(stderr, "armtally: %v\n", err)
		return exitUsage
	case errors.As(err, &ue):
		fmt.Fprintf(stderr, "armtally: %v\nRun 'armtally help' for usage.\n", err)
		return exitUsage
	case errors.As(err, &de):
		fmt.Fprintf(stderr, "armtally: %v\n", err)
		var nd *pipeline.NotInDataError
		if errors.As(err, &nd) {
			fmt.Fprintln(stderr, notInDataHint(nd.Kind))
		}
		return exitData
	}
	for _, o := range []struct {
		err  error
		code int
	}{{errSampleRatio, exitSampleRatio}, {errGuardrail, exitGuardrail}, {errDecisionStop, exitStop}, {errDecisionShip, exitShip},
		{errBoundary, exitBoundary}, {errStale, exitStale}} {
		if errors.Is(err, o.err) {
			fmt.Fprintf(stderr, "armtally: %v\n", err)
			return o.code
		}
	}
	fmt.Fprintf(stderr, "armtally: %v\n", err)
	return exitFailure
}

// notInDataHint says which setting names what the data does not hold.
func notInDataHint(k pipeline.MismatchKind) string {
	switch k {
	case pipeline.MismatchExperimentKey:
		return "Name the experiment with --experiment KEY (key in a spec file)."
	case pipeline.MismatchSeveralKeys:
		return "Choose one with --experiment KEY."
	case pipeline.MismatchExposureEvent:
		return "Name the exposure event with --exposure-event EVENT (exposure_event in a spec file)."
	case pipeline.MismatchArm:
		return "Name the control with --control and the planned arms with --arms (control and arms in a spec file)."
	case pipeline.MismatchEvent:
		return "Correct the metric, or allow a genuinely rare event with --allow-absent-event EVENT (allow_absent_events in a spec file)."
	}
	return "Check the settings against what the input holds ('armtally inspect')."
}
