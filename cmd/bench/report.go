package main

import (
	"bytes"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"strings"
	"time"

	"github.com/armtally/armtally/report"
)

// Markers around the part of BENCHMARKS.md that the run mode rewrites; the
// text outside them is kept.
const (
	beginMarker = "<!-- bench run: generated from here -->"
	endMarker   = "<!-- bench run: generated up to here -->"
)

// writeReport renders rep between the markers of the Markdown file at path,
// keeping the rest of the file, or creates the file with only the generated
// part.
func writeReport(path string, rep *benchReport) error {
	gen := renderReport(rep)
	old, err := os.ReadFile(path)
	if err != nil && !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("report: %w", err)
	}
	var out []byte
	i, j := bytes.Index(old, []byte(beginMarker)), bytes.Index(old, []byte(endMarker))
	switch {
	case i >= 0 && j > i:
		out = append(out, old[:i]...)
		out = append(out, gen...)
		out = append(out, old[j+len(endMarker):]...)
	case len(old) > 0:
		return fmt.Errorf("report: %s has no %q ... %q markers; not overwriting it", path, beginMarker, endMarker)
	default:
		out = []byte("# Benchmarks\n\n" + gen + "\n")
	}
	tmp := path + ".tmp"
	if err := os.WriteFile(tmp, out, 0o644); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if err := os.Rename(tmp, path); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}

// secs formats a duration in seconds with two decimals.
func secs(d time.Duration) string { return fmt.Sprintf("%.2f s", d.Seconds()) }

// mbs formats bytes as megabytes (10^6).
func mbs(b int64) string { return fmt.Sprintf("%.0f MB", mb(b)) }

// ratio formats a / b.
func ratio(a, b float64) string {
	if b == 0 {
		return "n/a"
	}
	return fmt.Sprintf("%.2f", a/b)
}

// renderReport returns the generated part of BENCHMARKS.md, markers
// included.
func renderReport(rep *benchReport) string {
	var b strings.Builder
	p := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	f := rep.Flags
	a := rep.Analysis
	m := rep.Machine
	p("%s\n\n", beginMarker)
	p("Written by `%s` (from `cmd/bench`), started %s, took %s.\n\n",
		strings.TrimSpace(rep.BenchCmd), rep.Started.UTC().Format("2006-01-02 15:04 MST"), rep.Elapsed.Round(time.Second))
	p("**Machine.** %d CPUs (`nproc`), %s; %s memory; Linux %s; %s; DuckDB %s (duckdb-go v2.10506.0).\n",
		m.CPUs, m.CPUModel, m.MemTotal, m.Kernel, m.Go, m.DuckDB)
	p("armtally built from %s. Files are read from the page cache: every measurement follows an untimed run of the same command.\n\n", rep.ArmtallySource)
	p("**What runs.** Each timed command is a child process; run under GNU time (`/usr/bin/time -f '%%M %%U %%S'`), which gives its peak resident memory (the child's `ru_maxrss`) and CPU time; the wall time is measured around it. ")
	p("The tables show medians over the runs (the runs of armtally and DuckDB interleaved), ratios of medians, and the range of wall times.\n\n")
	p("- armtally: `armtally %s` (the JSON readout is read back for the check; the Markdown goes to a file).\n", strings.Join(rep.ArmtallyCmd, " "))
	p("- DuckDB: `bench duckdb-query --file FILE --format parquet|csv --query analyze-1pass --threads %d`: an in-memory DuckDB with `SET threads = %d` runs the fastest SQL known for these counts (`duckdbAnalyzeOnePass` in `duckdb.go`): one scan of the exposure and metric rows, one aggregation per unit (t0, the arm at t0, the distinct arms, the list of metric-event times), then per arm the units with a time in [t0, t0 + W). (`--query analyze`, the statement-by-statement port of `cmd/armtally/testdata/crosscheck/crosscheck.mjs`, is slower and no longer timed.)\n", f.threads, f.threads)
	p("- DuckDB scan floor: `bench duckdb-query ... --query scan`: `SELECT count(*), min(ts), max(ts), sum(hash(user_id, event, experiment, arm))`, the least DuckDB does to read the five needed columns.\n")
	p("- The analysis: experiment `%s`, arms %s (control `%s`), window [%s, %s), metric `%s` = `%s` within %s, multi-arm units excluded, immature units excluded.\n\n",
		a.Experiment, strings.Join(a.Arms, ", "), a.Control, a.Start.Format(time.RFC3339), a.End.Format(time.RFC3339), a.Metric, strings.Join(a.Events, ","), windowText(a.Window))

	renderTargets(p, rep)

	p("### Logs\n\n")
	p("| Log | Format | Exposed units | Never exposed | Rows | Rows per unit | File size | Generated in |\n|:--|:--|--:|--:|--:|--:|--:|--:|\n")
	for _, sc := range rep.Scenarios {
		in := sc.Info
		p("| %s (`%s`) | %s | %s | %s | %s | %.2f | %s | %.0f s |\n", sc.Desc, sc.Spec.fileName(), formatName(sc.Spec.Format),
			report.FormatCount(in.Units), report.FormatCount(in.NeverExposed), report.FormatCount(in.Rows), float64(in.Rows)/float64(in.Units), mbs(in.Bytes), in.GenSeconds)
	}
	p("\nThe logs come from `sampledata.Generate` (the demo scenario, seed %d, %g noise events per unit; 2.5%% extra never-exposed units); ", f.seed, f.noise)
	p("Parquet is written by `cmd/bench` with parquet-go: the schema of `sampledata.WriteParquet` (dictionary-encoded strings, `ts` TIMESTAMP(MICROS, UTC) delta-encoded) with snappy instead of zstd, %s rows per row group; CSV is `sampledata.WriteCSV`.\n\n", report.FormatCount(rowGroupRows))

	p("### Check: the same counts\n\n")
	p("Before any timing, armtally's JSON and DuckDB's result must agree exactly (the run aborts otherwise), and every timed run is checked again.\n\n")
	p("| Log | Arm | Units (after multi-arm exclusion) | Mature units | Conversions | Immature units |\n|:--|:--|--:|--:|--:|--:|\n")
	for _, sc := range rep.Scenarios {
		for _, c := range sc.Counts.Arms {
			p("| %s | `%s` | %s | %s | %s | %s |\n", sc.Name, c.Arm, report.FormatCount(c.Units), report.FormatCount(c.MetricUnits), report.FormatCount(c.Conversions), report.FormatCount(c.Immature))
		}
	}
	p("\nMulti-arm units left out: ")
	var parts []string
	for _, sc := range rep.Scenarios {
		parts = append(parts, fmt.Sprintf("%s %s of %s exposed", sc.Name, report.FormatCount(sc.Counts.MultiArmUnits), report.FormatCount(sc.Counts.UnitsExposed)))
	}
	p("%s.\n\n", strings.Join(parts, "; "))

	p("### armtally against DuckDB (%d threads)\n\n", f.threads)
	p("| Log | Rows | Runs | armtally wall | DuckDB wall | armtally / DuckDB | armtally CPU / DuckDB CPU | DuckDB scan floor | armtally / scan | armtally peak RSS | DuckDB peak RSS | armtally / DuckDB RSS |\n")
	p("|:--|--:|--:|--:|--:|--:|--:|--:|--:|--:|--:|--:|\n")
	for _, sc := range rep.Scenarios {
		scan, scanRatio := "not run", "n/a"
		if sc.DuckDBScan.Runs > 0 {
			scan = secs(sc.DuckDBScan.Wall)
			scanRatio = ratio(sc.Armtally.Wall.Seconds(), sc.DuckDBScan.Wall.Seconds())
		}
		p("| %s | %s | %d | %s | %s | %s | %s | %s | %s | %s | %s | %s |\n", sc.Name, report.FormatCount(sc.Info.Rows), sc.Armtally.Runs,
			secs(sc.Armtally.Wall), secs(sc.DuckDB.Wall), ratio(sc.Armtally.Wall.Seconds(), sc.DuckDB.Wall.Seconds()),
			ratio(sc.Armtally.CPU.Seconds(), sc.DuckDB.CPU.Seconds()), scan, scanRatio, mbs(sc.Armtally.MaxRSS), mbs(sc.DuckDB.MaxRSS), ratio(float64(sc.Armtally.MaxRSS), float64(sc.DuckDB.MaxRSS)))
	}
	p("\nRanges of wall times, CPU time (user + system, median), scan-floor memory, and the machine's 1-minute load average when the timed runs of the log began and ended (the machine is shared; a load above 2 means other work competed for the two cores):\n\n")
	p("| Log | armtally wall range | armtally CPU | DuckDB wall range | DuckDB CPU | DuckDB query only (in-process) | scan wall range | scan peak RSS | load average |\n|:--|--:|--:|--:|--:|--:|--:|--:|--:|\n")
	for _, sc := range rep.Scenarios {
		scanRange, scanRSS := "not run", "n/a"
		if sc.DuckDBScan.Runs > 0 {
			scanRange = secs(sc.DuckDBScan.WallMin) + " to " + secs(sc.DuckDBScan.WallMax)
			scanRSS = mbs(sc.DuckDBScan.MaxRSS)
		}
		p("| %s | %s to %s | %s | %s to %s | %s | %.2f s | %s | %s | %s to %s |\n", sc.Name,
			secs(sc.Armtally.WallMin), secs(sc.Armtally.WallMax), secs(sc.Armtally.CPU),
			secs(sc.DuckDB.WallMin), secs(sc.DuckDB.WallMax), secs(sc.DuckDB.CPU), sc.DuckDBQuery, scanRange, scanRSS,
			sc.LoadBefore, sc.LoadAfter)
	}

	if sc2, sc1, sc10 := findScenario(rep, "parquet-2x-events"), findScenario(rep, "parquet"), findScenario(rep, "parquet-1/10"); sc1 != nil && (sc2 != nil || sc10 != nil) {
		p("\n### Scaling\n\n")
		p("| Comparison | Rows | Units | armtally wall | armtally peak RSS | DuckDB wall | DuckDB peak RSS |\n|:--|--:|--:|--:|--:|--:|--:|\n")
		row := func(label string, num, den *scenario) {
			p("| %s | x%.2f | x%.2f | x%.2f | x%.2f | x%.2f | x%.2f |\n", label,
				float64(num.Info.Rows)/float64(den.Info.Rows), float64(num.Info.Units)/float64(den.Info.Units),
				num.Armtally.Wall.Seconds()/den.Armtally.Wall.Seconds(), float64(num.Armtally.MaxRSS)/float64(den.Armtally.MaxRSS),
				num.DuckDB.Wall.Seconds()/den.DuckDB.Wall.Seconds(), float64(num.DuckDB.MaxRSS)/float64(den.DuckDB.MaxRSS))
		}
		if sc2 != nil {
			row("2x events, same units: parquet-2x-events / parquet", sc2, sc1)
		}
		if sc10 != nil {
			row("10x events and units: parquet / parquet-1/10", sc1, sc10)
		}
		p("\n")
	}

	for _, inc := range rep.Incremental {
		renderIncremental(p, inc, f)
	}

	if len(rep.Decode) > 0 {
		p("\n### Decode paths (the five needed columns, %d goroutines)\n\n", f.threads)
		p("Each path reads `user_id`, `ts`, `event`, `experiment` and `arm` of `%s` (%d row groups), every row group handed to the next free goroutine, and folds every value into a checksum (rows, sum of ts, nulls, total string length); all paths must return the same checksum (%s rows, %s nulls, %s string bytes). ",
			shortPath(rep.DecodeFile), rep.DecodeRowGroups, report.FormatCount(rep.Decode[0].Sum.Rows), report.FormatCount(rep.Decode[0].Sum.Nulls), report.FormatCount(rep.Decode[0].Sum.StrBytes))
		p("Command: `bench decode --file FILE --method NAME --workers %d`, a child process per run; %d runs each, interleaved; load average %s when they began, %s when they ended.\n\n", f.threads, rep.Decode[0].Stats.Runs, rep.DecodeLoad[0], rep.DecodeLoad[1])
		p("| Path | Median wall | Range | In-process median | Peak RSS | vs parquet-go pages | What it does |\n|:--|--:|--:|--:|--:|--:|:--|\n")
		base := rep.Decode[0].Stats.Wall.Seconds()
		for _, d := range rep.Decode {
			p("| %s | %s | %s to %s | %.2f s | %s | x%s | %s |\n", d.Method.Name, secs(d.Stats.Wall), secs(d.Stats.WallMin), secs(d.Stats.WallMax),
				d.InProc, mbs(d.Stats.MaxRSS), ratio(d.Stats.Wall.Seconds(), base), d.Method.Desc)
		}
		p("\n")
	}

	if rep.ProfileTop != "" {
		p("\n### Profile of armtally's analysis of the main log\n\n")
		p("`bench profile --file FILE --cpuprofile analyze.cpu.prof` runs `pipeline.Run`, the call `armtally analyze` makes, in-process under `runtime/pprof`; %s. Then `go tool pprof -top -nodecount=30` and the same with `-cum`:\n\n", rep.ProfileNote)
		p("```\n%s\n```\n\n```\n%s\n```\n", trimPprof(rep.ProfileTop), trimPprof(rep.ProfileCum))
	}

	p("\n### Reproduce\n\n")
	p("```sh\ncd cmd/bench\n%s\n```\n\n", strings.TrimSpace(rep.BenchCmd))
	p("Logs go to `--dir` (default `$TMPDIR/armtally-bench`) and are reused when present; `go run . gen --users N --noise X [--format csv]` writes one alone. ")
	p("Single measurements: `/usr/bin/time -f '%%e s %%M KB' DIR/armtally %s`; `go run . duckdb-query --file FILE --query analyze`; `go run . decode --file FILE --method 'parquet-go pages'`.\n\n", strings.Join(rep.ArmtallyCmd, " "))
	p("%s", endMarker)
	return b.String()
}

// renderIncremental writes the section of the nightly case.
func renderIncremental(p func(string, ...any), inc *incrementalResult, f harnessFlags) {
	in := inc.Info
	p("\n### Incremental nightly run: day %d of %d\n\n", inc.DaysTotal, len(in.Days))
	p("The same generator and analysis, written as a partitioned export: one snappy Parquet file per UTC day (`dt=YYYY-MM-DD/part-0.parquet`, %s rows per row group), %d days, %s rows, %s units (exposed and never exposed), %s; this night uses its first %d days. ",
		report.FormatCount(partRowGroupRows), len(in.Days), report.FormatCount(in.Rows), report.FormatCount(in.Units), mbs(in.Bytes), inc.DaysTotal)
	p("The state file of the first %d days is made once (untimed, `armtally analyze ... --state FILE`); each timed nightly run starts from a copy of it and reads day %d (`%s`) on top; the full runs and DuckDB read the same %d days. ", inc.DaysInState, inc.DaysTotal, in.Days[inc.DaysTotal-1], inc.DaysTotal)
	p("The nightly JSON readout was checked byte for byte against a full run's (equal: %v), and the full run's counts against DuckDB's. ", inc.FullJSONEqualsNightly)
	p("Runs interleaved (nightly, full, DuckDB), %d each; load average %s when they began, %s when they ended.\n\n", inc.Night.Runs, inc.LoadBefore, inc.LoadAfter)
	p("| Run | Median wall | Range | CPU | Peak RSS | wall / full armtally | wall / DuckDB |\n|:--|--:|--:|--:|--:|--:|--:|\n")
	for _, r := range []struct {
		name string
		st   stats
	}{{"armtally nightly (state + last day)", inc.Night}, {"armtally full (every day)", inc.Full}, {"DuckDB one-scan SQL (every day)", inc.DuckDB}} {
		p("| %s | %s | %s to %s | %s | %s | %s | %s |\n", r.name, secs(r.st.Wall), secs(r.st.WallMin), secs(r.st.WallMax), secs(r.st.CPU), mbs(r.st.MaxRSS),
			ratio(r.st.Wall.Seconds(), inc.Full.Wall.Seconds()), ratio(r.st.Wall.Seconds(), inc.DuckDB.Wall.Seconds()))
	}
	p("\nState file: %s, %.1f bytes per unit of the log.\n\n", mbs(inc.StateBytes), float64(inc.StateBytes)/float64(in.Units))
}

func findScenario(rep *benchReport, name string) *scenario {
	for _, sc := range rep.Scenarios {
		if sc.Name == name {
			return sc
		}
	}
	return nil
}

func formatName(f string) string {
	if f == "csv" {
		return "CSV"
	}
	return "Parquet (snappy)"
}

func shortPath(p string) string {
	if i := strings.LastIndex(p, "/"); i >= 0 {
		return p[i+1:]
	}
	return p
}

// trimPprof drops pprof's header lines that name local files.
func trimPprof(s string) string {
	var out []string
	for _, line := range strings.Split(s, "\n") {
		if strings.HasPrefix(line, "File: ") || strings.HasPrefix(line, "Build ID: ") {
			continue
		}
		out = append(out, line)
	}
	return strings.Join(out, "\n")
}

// windowText formats an attribution window in days or hours.
func windowText(d time.Duration) string {
	if d%(24*time.Hour) == 0 {
		return fmt.Sprintf("%d days", d/(24*time.Hour))
	}
	return fmt.Sprintf("%g hours", d.Hours())
}
