package main

import (
	"encoding/json"
	"fmt"
	"io"
	"math/rand/v2"
	"strings"
	"time"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/sampledata"
)

const genUsage = `Usage: armtally gen [flags] --parquet FILE [--csv FILE]

Writes a synthetic event log of one conversion experiment with known true
effects: the demo scenario (a garden-plant shop testing two new checkout
flows against its current one) scaled to --users units. The log has noise
events, repeat exposures, a few units exposed to two arms, conversions
before exposure, units never exposed and, with --shuffle, rows out of time
order. The same flags and --seed give the same rows; Parquet and CSV
written in one run hold the same rows.

Each --arm is NAME=SHARE:RATE[,RATE]: its planned share and its true
conversion probability for each metric (purchase within 7 days, then
newsletter_signup within 3 days). The first --arm is the control.

The run prints the generator's ground truth (units per arm, converted
units per arm and metric among single-arm units, the analysis window that
sees every unit mature) and writes it as JSON with --truth.

Examples:
  armtally gen --users 1000000 --parquet events.parquet
  armtally gen --users 200000 --seed 7 --parquet events.parquet --csv events.csv --truth truth.json
  armtally gen --arm control=1:0.10,0.04 --arm express=1:0.11,0.04 --users 50000 --csv small.csv

Flags:
`

type genFlags struct {
	users, days, neverExposed int
	seed                      uint64
	start                     string
	arms                      []string
	crossArm, repeat, preConv float64
	noise                     float64
	shuffle, rowGroup         int
	parquetOut, csvOut, truth string
}

// genSeed2 is the second word of the PCG seed; --seed is the first.
const genSeed2 = 0x61726d74616c6c79 // "armtally"

func runGen(args []string, stdout, stderr io.Writer) error {
	var f genFlags
	demo := sampledata.DemoConfig()
	fs := pflag.NewFlagSet("gen", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.SortFlags = false
	fs.IntVar(&f.users, "users", demo.Users, "number of exposed units")
	fs.Uint64Var(&f.seed, "seed", 1, "random seed")
	fs.StringVar(&f.start, "start", demo.Start.Format("2006-01-02"), "first day of exposures (YYYY-MM-DD, UTC)")
	fs.IntVar(&f.days, "days", demo.ExposureDays, "number of days over which first exposures are spread")
	fs.StringArrayVar(&f.arms, "arm", nil, "arm NAME=SHARE:RATE[,RATE] (repeatable; default the demo's three arms)")
	fs.Float64Var(&f.crossArm, "cross-arm", demo.CrossArmProb, "probability that a unit is also exposed to a second arm")
	fs.Float64Var(&f.repeat, "repeat-exposure", demo.RepeatExposureProb, "probability of a repeat exposure in the same arm")
	fs.Float64Var(&f.preConv, "pre-exposure-conversion", demo.PreExposureConvProb, "probability of a conversion event before exposure")
	fs.Float64Var(&f.noise, "noise", demo.NoiseEventsPerUser, "mean number of noise events per unit")
	fs.IntVar(&f.neverExposed, "never-exposed", -1, "units with events but no exposure (default: 2.5% of --users)")
	fs.IntVar(&f.shuffle, "shuffle", 0, "shuffle rows in blocks of this many, putting them out of time order (0: off)")
	fs.IntVar(&f.rowGroup, "row-group-size", 0, "rows per Parquet row group (0: the generator's default)")
	fs.StringVar(&f.parquetOut, "parquet", "", "write the log as Parquet to this file")
	fs.StringVar(&f.csvOut, "csv", "", "write the log as CSV to this file")
	fs.StringVar(&f.truth, "truth", "", "write the ground truth as JSON to this file")
	if err := parseFlags(fs, args, genUsage, stdout); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("gen: unexpected arguments %s (name outputs with --parquet and --csv)", strings.Join(fs.Args(), " "))
	}
	if f.parquetOut == "" && f.csvOut == "" {
		return usagef("gen: name an output with --parquet FILE or --csv FILE")
	}
	cfg := demo
	cfg.Users = f.users
	cfg.ExposureDays = f.days
	start, err := time.Parse("2006-01-02", f.start)
	if err != nil {
		return usagef("gen: --start %q: want YYYY-MM-DD", f.start)
	}
	cfg.Start = start
	if len(f.arms) > 0 {
		cfg.Arms = nil
		for _, s := range f.arms {
			a, err := sampledata.ParseArm(s, len(cfg.Metrics))
			if err != nil {
				return usagef("gen: --arm: %v", err)
			}
			cfg.Arms = append(cfg.Arms, a)
		}
	}
	cfg.CrossArmProb = f.crossArm
	cfg.RepeatExposureProb = f.repeat
	cfg.PreExposureConvProb = f.preConv
	cfg.NoiseEventsPerUser = f.noise
	cfg.NeverExposedUsers = f.neverExposed
	if f.neverExposed < 0 {
		cfg.NeverExposedUsers = f.users / 40
	}
	cfg.ShuffleBlock = f.shuffle
	cfg.RowGroupSize = f.rowGroup
	if err := sampledata.Validate(cfg); err != nil {
		return usagef("gen: %v", err)
	}

	var sum sampledata.Summary
	write := func(path string, w func(io.Writer, sampledata.Config, rand.Source) (sampledata.Summary, error)) error {
		return report.WriteFileAtomic(path, func(out io.Writer) error {
			s, err := w(out, cfg, rand.NewPCG(f.seed, genSeed2))
			sum = s
			return err
		})
	}
	if f.parquetOut != "" {
		if err := write(f.parquetOut, sampledata.WriteParquet); err != nil {
			return fmt.Errorf("gen: %w", err)
		}
	}
	if f.csvOut != "" {
		if err := write(f.csvOut, sampledata.WriteCSV); err != nil {
			return fmt.Errorf("gen: %w", err)
		}
	}
	t := sampledata.NewTruth(cfg, f.seed, sum)
	if f.truth != "" {
		err := report.WriteFileAtomic(f.truth, func(w io.Writer) error {
			enc := json.NewEncoder(w)
			enc.SetIndent("", "  ")
			return enc.Encode(t)
		})
		if err != nil {
			return fmt.Errorf("gen: %w", err)
		}
	}
	printTruth(stdout, t, f)
	return nil
}

// printTruth prints what gen wrote and the ground truth t.
func printTruth(w io.Writer, t sampledata.Truth, f genFlags) {
	var outs []string
	for _, p := range []string{f.parquetOut, f.csvOut} {
		if p != "" {
			outs = append(outs, p)
		}
	}
	fmt.Fprintf(w, "wrote %s: %d rows, %d exposed units (%d exposed to two arms), %d never exposed\n",
		strings.Join(outs, " and "), t.Rows, t.Units, t.MultiArmUnits, t.NeverExposed)
	fmt.Fprintf(w, "experiment %s, exposure event %s; every unit is mature in the window [%s, %s)\n",
		t.Experiment, t.ExposureEvent, t.WindowStart.Format(time.RFC3339), t.WindowEnd.Format(time.RFC3339))
	var metricFlags []string
	for _, m := range t.Metrics {
		metricFlags = append(metricFlags, fmt.Sprintf("--metric %s=%s:%dh", m.Name, m.Name, m.WindowSeconds/3600))
	}
	fmt.Fprintf(w, "analyse with: armtally analyze %s --experiment %s --exposure-event %s --control %s --start %s --end %s %s\n",
		outs[0], t.Experiment, t.ExposureEvent, t.Arms[0].Name,
		t.WindowStart.Format(time.RFC3339), t.WindowEnd.Format(time.RFC3339), strings.Join(metricFlags, " "))
	fmt.Fprintln(w, "ground truth (single-arm units, converted within the window):")
	for _, a := range t.Arms {
		var parts []string
		for i, m := range t.Metrics {
			parts = append(parts, fmt.Sprintf("%s %d (true rate %g)", m.Name, a.Converted[i], a.TrueRates[i]))
		}
		fmt.Fprintf(w, "  %s: %d units; %s\n", a.Name, a.SingleArmUnits, strings.Join(parts, "; "))
	}
}
