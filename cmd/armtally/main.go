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
//	3    data error: an input cannot be read, a row is malformed, the data
//	     contradicts the settings (an arm that is not planned, several
//	     experiments without --experiment)
//	4    the sample ratio check failed and --fail-on-sample-ratio was given
//	     (the readout is still written)
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

	"github.com/armtally/armtally/experiment/specfile"
)

// Exit codes; see the package documentation.
const (
	exitOK          = 0
	exitFailure     = 1
	exitUsage       = 2
	exitData        = 3
	exitSampleRatio = 4
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

// errSampleRatio reports a failed sample ratio check under
// --fail-on-sample-ratio.
var errSampleRatio = errors.New("sample ratio mismatch")

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

Exit codes:
  0    the readout was written
  1    unexpected failure (such as a full disk; no output is then replaced)
  2    usage error (including an error in a spec file, named by file, line and
       key, and an output path that is an input, another output or not writable)
  3    data error (unreadable input, malformed row, data that contradicts the settings)
  4    sample ratio mismatch with --fail-on-sample-ratio (the readout is still written)
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
		return exitData
	case errors.Is(err, errSampleRatio):
		fmt.Fprintf(stderr, "armtally: %v\n", err)
		return exitSampleRatio
	}
	fmt.Fprintf(stderr, "armtally: %v\n", err)
	return exitFailure
}
