// Command bench measures armtally analyze against DuckDB on generated event
// logs of up to a hundred million rows and more, compares Parquet decode
// paths, and profiles the analysis. It is its own module (cgo, for DuckDB),
// kept out of the main module's build and tests.
//
// Usage, from cmd/bench:
//
//	go run . run [flags]             the whole harness; rewrites BENCHMARKS.md
//	go run . gen [flags]             only write a generated log
//	go run . decode [flags]          read the needed columns one way, print a checksum
//	go run . profile [flags]         analyse a log in-process with a CPU profile
//	go run . duckdb-query [flags]    run the DuckDB query (used as a child by run)
//
// Each mode prints its flags with --help.
package main

import (
	"errors"
	"fmt"
	"io"
	"os"

	"github.com/spf13/pflag"
)

const usage = `Usage: bench MODE [flags]

Modes:
  run           generate the logs, check armtally against DuckDB, time both,
                compare decode paths, profile, and write BENCHMARKS.md
  gen           write one generated log (snappy Parquet or CSV)
  decode        read the five needed columns of a Parquet log one way
  profile       analyse a log in-process under a CPU profile
  duckdb-query  run the DuckDB query over a log and print its result as JSON

Run "bench MODE --help" for a mode's flags.
`

func main() {
	if err := run(os.Args[1:], os.Stdout, os.Stderr); err != nil {
		if errors.Is(err, pflag.ErrHelp) {
			os.Exit(0)
		}
		fmt.Fprintln(os.Stderr, "bench:", err)
		os.Exit(1)
	}
}

// run dispatches to the mode named by args[0].
func run(args []string, stdout, stderr io.Writer) error {
	if len(args) == 0 {
		fmt.Fprint(stderr, usage)
		return errors.New("name a mode")
	}
	switch args[0] {
	case "run":
		return runHarness(args[1:], stdout, stderr)
	case "gen":
		return runGen(args[1:], stdout, stderr)
	case "decode":
		return runDecode(args[1:], stdout, stderr)
	case "profile":
		return runProfile(args[1:], stdout, stderr)
	case "duckdb-query":
		return runDuckDBQuery(args[1:], stdout, stderr)
	case "help", "-h", "--help":
		fmt.Fprint(stdout, usage)
		return nil
	}
	fmt.Fprint(stderr, usage)
	return fmt.Errorf("unknown mode %q", args[0])
}

// runGen is the gen mode.
func runGen(args []string, stdout, stderr io.Writer) error {
	fs := pflag.NewFlagSet("gen", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	dir := fs.String("dir", defaultDataDir(), "folder for the log (its name encodes the settings)")
	users := fs.Int("users", 10_000_000, "exposed units")
	noise := fs.Float64("noise", 7.9, "mean noise events per unit (7.9 gives about 10 rows per unit)")
	seed := fs.Uint64("seed", 1, "random seed")
	format := fs.String("format", "parquet", "parquet (snappy) or csv")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if err := os.MkdirAll(*dir, 0o755); err != nil {
		return fmt.Errorf("gen: %w", err)
	}
	path, info, err := ensureLog(*dir, logSpec{Users: *users, Noise: *noise, Seed: *seed, Format: *format}, stderr)
	if err != nil {
		return fmt.Errorf("gen: %w", err)
	}
	fmt.Fprintf(stdout, "%s: %d rows, %d bytes\n", path, info.Rows, info.Bytes)
	return nil
}

// runDecode is the decode mode: one decode path over one file, with the
// checksum and the in-process time printed as JSON.
func runDecode(args []string, stdout, stderr io.Writer) error {
	fs := pflag.NewFlagSet("decode", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	file := fs.String("file", "", "Parquet log to read")
	method := fs.String("method", "parquet-go pages", "decode path (see BENCHMARKS.md)")
	workers := fs.Int("workers", 2, "goroutines, each taking the next row group")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *file == "" {
		return errors.New("decode: --file is required")
	}
	for _, m := range decodeMethods() {
		if m.Name != *method {
			continue
		}
		res, err := timeDecode(m, *file, *workers)
		if err != nil {
			return fmt.Errorf("decode %s: %w", m.Name, err)
		}
		return writeJSON(stdout, res)
	}
	var names []string
	for _, m := range decodeMethods() {
		names = append(names, fmt.Sprintf("%q", m.Name))
	}
	return fmt.Errorf("decode: unknown method %q (want one of %v)", *method, names)
}

// defaultDataDir is where generated logs go unless --dir says otherwise.
func defaultDataDir() string { return os.TempDir() + "/armtally-bench" }
