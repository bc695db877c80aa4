package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strings"
	"time"

	"github.com/spf13/pflag"
)

// harnessFlags are the flags of the run mode.
type harnessFlags struct {
	dir         string
	users       int
	smallUsers  int
	noise       float64
	noise2x     float64
	csvUsers    int
	seed        uint64
	runs        int
	scalingRuns int
	decodeRuns  int
	threads     int
	scaling     bool
	decode      bool
	profile     bool
	out         string
	armtallySrc string
	rev         string
	// incremental runs the nightly case over a partitioned export of
	// incrementalUsers units; csvLargeUsers, when positive, adds a second
	// CSV log of that many units.
	incremental      bool
	incrementalUsers int
	// incrementalNights lists the nights timed: the export cut to its
	// first N days, "last" for all of them.
	incrementalNights string
	csvLargeUsers     int
	// only and skip select the parts to run (see harnessParts); quick
	// is the small configuration.
	only, skip string
	quick      bool
	parts      map[string]bool
}

// harnessParts are the parts of the run mode, in the order they run: the
// names --only and --skip take.
var harnessParts = []string{"parquet", "parquet-small", "csv", "csv-large", "scaling", "incremental", "decode", "profile"}

// harnessPartsHelp describes the parts for --help.
const harnessPartsHelp = `parts: parquet (the --users log), parquet-small (--small-users: the Parquet 1M target at the default sizes, and the 10x scaling pair), csv (--csv-users), csv-large (--csv-large-users: the CSV 10M target), scaling (the 2x-events log; needs parquet and parquet-small, which it adds), incremental (--incremental-users), decode, profile`

// scenario is one log that armtally and DuckDB both analyse.
type scenario struct {
	Name string
	Part string // the part of the run it belongs to
	Desc string
	Spec logSpec
	Runs int
	Scan bool // also time DuckDB's scan floor
	// measure is false for a log that is only written (the main log,
	// for the decode or profile part alone).
	measure bool
	path    string
	Info    logInfo
	Counts  counts // the agreed counts
	// Medians over Runs runs.
	Armtally, DuckDB, DuckDBScan stats
	DuckDBQuery                  float64 // median in-process query seconds
	RowsRead                     int64
	// LoadBefore and LoadAfter are /proc/loadavg's 1-minute averages when
	// the timed runs started and ended (other work on the machine).
	LoadBefore, LoadAfter string
}

// decodeResult is what a decode child prints.
type decodeResult struct {
	Method  string    `json:"method"`
	Workers int       `json:"workers"`
	Sum     decodeSum `json:"sum"`
	Seconds float64   `json:"seconds"`
}

// decodeRow is one decode path's measurements.
type decodeRow struct {
	Method decodeMethod
	Sum    decodeSum
	Stats  stats
	InProc float64 // median in-process seconds
}

// benchReport is everything BENCHMARKS.md shows.
type benchReport struct {
	Flags      harnessFlags
	Machine    machine
	Analysis   analysis
	Scenarios  []*scenario
	Decode     []decodeRow
	DecodeFile string
	// DecodeRowGroups is the row groups of DecodeFile.
	DecodeRowGroups int
	ProfileTop      string
	ProfileCum      string
	ProfileNote     string
	Incremental     []*incrementalResult
	DecodeLoad      [2]string // load averages before and after the decode runs
	BenchCmd        string
	Started         time.Time
	Elapsed         time.Duration
	ArmtallyCmd     []string
	// ArmtallySource says which source the armtally binary was built from.
	ArmtallySource string
}

// runHarness is the run mode.
func runHarness(args []string, stdout, stderr io.Writer) error {
	var f harnessFlags
	fs := pflag.NewFlagSet("run", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.SortFlags = false
	fs.StringVar(&f.dir, "dir", defaultDataDir(), "folder for the generated logs and outputs (reused across runs)")
	fs.IntVar(&f.users, "users", 10_000_000, "exposed units of the main Parquet log")
	fs.IntVar(&f.smallUsers, "small-users", 0, "exposed units of the small Parquet log (0: --users / 10)")
	fs.Float64Var(&f.noise, "noise", 7.9, "mean noise events per unit (7.9 gives about 10 rows per unit)")
	fs.Float64Var(&f.noise2x, "noise-2x", 17.7, "noise events per unit of the 2x-events log (17.7 gives about 20 rows per unit)")
	fs.IntVar(&f.csvUsers, "csv-users", 1_000_000, "exposed units of the CSV log")
	fs.IntVar(&f.csvLargeUsers, "csv-large-users", 10_000_000, "exposed units of the large CSV log (10M units: about 5.7 GB, written only when the part csv-large runs and the disk has room)")
	fs.IntVar(&f.incrementalUsers, "incremental-users", 0, "exposed units of the partitioned export (0: --users)")
	fs.StringVar(&f.incrementalNights, "incremental-nights", "17,30,last", "nights of the incremental part, comma-separated: N times the export cut to its first N days (day 17, 2026-11-11, is inside the exposure window 2026-11-03 to 2026-11-19; day 30, 2026-11-24, is the issue's case, a 30-day export: after the last exposure, 2026-11-16, its 0.33M rows still hold 0.11M purchases of saved units), \"last\" the whole export")
	fs.Uint64Var(&f.seed, "seed", 1, "random seed of every log")
	fs.IntVar(&f.runs, "runs", 3, "timed runs per measurement, armtally and DuckDB alternated (after one untimed check run)")
	fs.IntVar(&f.scalingRuns, "scaling-runs", 0, "timed runs of the 2x-events log (0: --runs)")
	fs.IntVar(&f.decodeRuns, "decode-runs", 0, "timed runs per decode path (0: --runs)")
	fs.IntVar(&f.threads, "threads", 2, "DuckDB threads (and decode goroutines)")
	fs.StringVar(&f.only, "only", "", "run only these parts, comma-separated ("+harnessPartsHelp+")")
	fs.StringVar(&f.skip, "skip", "", "run every part but these, comma-separated")
	fs.BoolVar(&f.quick, "quick", false, "a small configuration that finishes in a few minutes: --users 200000 --csv-users 200000 --incremental-users 200000 --skip csv-large,decode,profile unless given")
	fs.BoolVar(&f.scaling, "scaling", true, "the part scaling (--skip scaling is the same as false)")
	fs.BoolVar(&f.decode, "decode", true, "the part decode")
	fs.BoolVar(&f.profile, "profile", true, "the part profile")
	fs.BoolVar(&f.incremental, "incremental", true, "the part incremental")
	fs.StringVar(&f.out, "out", "BENCHMARKS.md", "Markdown file whose generated part is rewritten (created when missing)")
	fs.StringVar(&f.armtallySrc, "repo", "../..", "armtally's repository, where ./cmd/armtally is built")
	fs.StringVar(&f.rev, "rev", "HEAD", "commit of --repo to build armtally from (exported with git archive); \"\" builds the working tree")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if err := f.settle(fs); err != nil {
		return fmt.Errorf("run: %w", err)
	}
	logf := func(format string, a ...any) { fmt.Fprintf(stderr, format+"\n", a...) }
	rep := &benchReport{Flags: f, Analysis: defaultAnalysis(), Started: time.Now()}
	rep.BenchCmd = "go run . run " + strings.Join(args, " ")
	if err := os.MkdirAll(f.dir, 0o755); err != nil {
		return fmt.Errorf("run: %w", err)
	}
	m, err := describeMachine()
	if err != nil {
		return fmt.Errorf("run: %w", err)
	}
	rep.Machine = m

	self, err := os.Executable()
	if err != nil {
		return fmt.Errorf("run: %w", err)
	}
	if f.dir, err = filepath.Abs(f.dir); err != nil {
		return fmt.Errorf("run: %w", err)
	}
	bin, desc, err := buildArmtally(f.armtallySrc, f.rev, f.dir, logf)
	if err != nil {
		return fmt.Errorf("run: %w", err)
	}
	rep.ArmtallySource = desc

	scenarios := f.scenarios()
	if err := checkDisk(f.dir, scenarios, f, logf); err != nil {
		return fmt.Errorf("run: %w", err)
	}
	for _, sc := range scenarios {
		sc.path, sc.Info, err = ensureLog(f.dir, sc.Spec, stderr)
		if err != nil {
			return fmt.Errorf("run: %w", err)
		}
	}
	a := rep.Analysis
	rep.ArmtallyCmd = a.armtallyArgs("FILE", "readout.json", "readout.md")
	for _, sc := range scenarios {
		if !sc.measure {
			continue
		}
		if err := measureScenario(sc, bin, self, f, a, logf); err != nil {
			return fmt.Errorf("run: %s: %w", sc.Name, err)
		}
		rep.Scenarios = append(rep.Scenarios, sc)
	}

	if f.parts["incremental"] {
		folder, info, err := ensurePartitioned(f.dir, logSpec{Users: f.incrementalUsers, Noise: f.noise, Seed: f.seed, Format: "parquet"}, stderr)
		if err != nil {
			return fmt.Errorf("run: %w", err)
		}
		nights, err := nightDays(f.incrementalNights, len(info.Days))
		if err != nil {
			return fmt.Errorf("run: %w", err)
		}
		for _, n := range nights {
			inc, err := measureIncremental(folder, info, n, bin, self, f, a, logf)
			if err != nil {
				return fmt.Errorf("run: incremental, %d days: %w", n, err)
			}
			rep.Incremental = append(rep.Incremental, inc)
		}
	}
	var mainLog *scenario // the --users Parquet log, written when decode or profile runs
	if len(scenarios) > 0 && scenarios[0].Name == "parquet" {
		mainLog = scenarios[0]
	}
	if f.parts["decode"] {
		rep.DecodeFile, rep.DecodeRowGroups = mainLog.path, mainLog.Info.RowGroups
		rep.DecodeLoad[0] = loadAvg()
		rows, err := measureDecode(self, mainLog.path, f.threads, f.decodeRuns, logf)
		if err != nil {
			return fmt.Errorf("run: %w", err)
		}
		rep.Decode = rows
		rep.DecodeLoad[1] = loadAvg()
	}
	if f.parts["profile"] {
		if err := profileMain(rep, self, mainLog.path, f.dir, logf); err != nil {
			return fmt.Errorf("run: %w", err)
		}
	}
	rep.Elapsed = time.Since(rep.Started)
	if err := writeReport(f.out, rep); err != nil {
		return fmt.Errorf("run: %w", err)
	}
	raw, err := json.MarshalIndent(rep, "", "  ")
	if err != nil {
		return fmt.Errorf("run: %w", err)
	}
	if err := os.WriteFile(filepath.Join(f.dir, "results.json"), raw, 0o644); err != nil {
		return fmt.Errorf("run: %w", err)
	}
	logf("wrote %s (%s)", f.out, rep.Elapsed.Round(time.Second))
	return nil
}

// measureScenario first checks that armtally and DuckDB agree on the
// scenario's log (aborting on any difference), then times them, runs
// interleaved.
func measureScenario(sc *scenario, bin, self string, f harnessFlags, a analysis, logf func(string, ...any)) error {
	jsonPath := filepath.Join(f.dir, "readout.json")
	mdPath := filepath.Join(f.dir, "readout.md")
	armArgs := a.armtallyArgs(sc.path, jsonPath, mdPath)
	duckArgs := []string{"duckdb-query", "--file", sc.path, "--format", sc.Spec.Format, "--query", "analyze-1pass", "--threads", fmt.Sprint(f.threads)}
	scanArgs := []string{"duckdb-query", "--file", sc.path, "--format", sc.Spec.Format, "--query", "scan", "--threads", fmt.Sprint(f.threads)}

	runArmtally := func() (sample, counts, error) {
		os.Remove(jsonPath)
		s, _, err := runChild(bin, armArgs)
		if err != nil {
			return s, counts{}, err
		}
		data, err := os.ReadFile(jsonPath)
		if err != nil {
			return s, counts{}, err
		}
		c, rows, err := armtallyCounts(data, a.Metric)
		sc.RowsRead = rows
		return s, c, err
	}
	runDuck := func(args []string) (sample, childResult, error) {
		s, out, err := runChild(self, args)
		if err != nil {
			return s, childResult{}, err
		}
		var res childResult
		if err := json.Unmarshal(out, &res); err != nil {
			return s, res, fmt.Errorf("duckdb-query output: %w", err)
		}
		return s, res, nil
	}

	logf("%s: checking armtally against DuckDB on %s", sc.Name, sc.path)
	as, ac, err := runArmtally()
	if err != nil {
		return err
	}
	ds, dres, err := runDuck(duckArgs)
	if err != nil {
		return err
	}
	if dres.Counts == nil {
		return fmt.Errorf("duckdb-query printed no counts")
	}
	if err := compareCounts(ac, *dres.Counts); err != nil {
		return fmt.Errorf("CHECK FAILED on %s: %w", sc.path, err)
	}
	if sc.RowsRead != sc.Info.Rows {
		return fmt.Errorf("CHECK FAILED on %s: armtally read %d rows, the generator wrote %d", sc.path, sc.RowsRead, sc.Info.Rows)
	}
	sc.Counts = ac
	logf("%s: counts agree (%s); check run: armtally %.1f s, duckdb %.1f s", sc.Name, countsLine(ac), as.Wall.Seconds(), ds.Wall.Seconds())
	if sc.Scan {
		if _, _, err := runDuck(scanArgs); err != nil { // warm-up
			return err
		}
	}

	sc.LoadBefore = loadAvg()
	defer func() { sc.LoadAfter = loadAvg() }()
	var arm, duck, scan []sample
	var queries []time.Duration
	for i := range sc.Runs {
		s, c, err := runArmtally()
		if err != nil {
			return err
		}
		if err := compareCounts(c, sc.Counts); err != nil {
			return fmt.Errorf("armtally run %d changed its counts: %w", i+1, err)
		}
		arm = append(arm, s)
		s, res, err := runDuck(duckArgs)
		if err != nil {
			return err
		}
		if res.Counts == nil {
			return fmt.Errorf("duckdb-query printed no counts")
		}
		if err := compareCounts(sc.Counts, *res.Counts); err != nil {
			return fmt.Errorf("duckdb run %d changed its counts: %w", i+1, err)
		}
		duck = append(duck, s)
		queries = append(queries, time.Duration(res.QuerySeconds*float64(time.Second)))
		if sc.Scan {
			s, res, err := runDuck(scanArgs)
			if err != nil {
				return err
			}
			if res.Scan == nil || res.Scan.Rows != sc.Info.Rows {
				return fmt.Errorf("duckdb scan read %v rows, want %d", res.Scan, sc.Info.Rows)
			}
			scan = append(scan, s)
		}
		logf("%s run %d/%d: armtally %.2f s %.0f MB; duckdb %.2f s %.0f MB%s", sc.Name, i+1, sc.Runs,
			arm[i].Wall.Seconds(), mb(arm[i].MaxRSS), duck[i].Wall.Seconds(), mb(duck[i].MaxRSS), scanNote(scan, i))
	}
	sc.Armtally, sc.DuckDB, sc.DuckDBScan = summarise(arm), summarise(duck), summarise(scan)
	qs := summarise(func() []sample {
		var out []sample
		for _, q := range queries {
			out = append(out, sample{Wall: q})
		}
		return out
	}())
	sc.DuckDBQuery = qs.Wall.Seconds()
	return nil
}

func scanNote(scan []sample, i int) string {
	if i >= len(scan) {
		return ""
	}
	return fmt.Sprintf("; scan %.2f s %.0f MB", scan[i].Wall.Seconds(), mb(scan[i].MaxRSS))
}

func countsLine(c counts) string {
	var parts []string
	for _, a := range c.Arms {
		parts = append(parts, fmt.Sprintf("%s %d/%d/%d", a.Arm, a.MetricUnits, a.Conversions, a.Immature))
	}
	return "units/conversions/immature: " + strings.Join(parts, ", ")
}

func mb(b int64) float64 { return float64(b) / 1e6 }

// timeDecode runs one decode path in this process and times it.
func timeDecode(m decodeMethod, path string, workers int) (decodeResult, error) {
	start := time.Now()
	sum, err := m.Run(path, workers)
	if err != nil {
		return decodeResult{}, err
	}
	return decodeResult{Method: m.Name, Workers: workers, Sum: sum, Seconds: time.Since(start).Seconds()}, nil
}

// measureDecode times every decode path as a child process, runs
// interleaved, after one untimed run of each whose checksums must agree.
func measureDecode(self, path string, workers, runs int, logf func(string, ...any)) ([]decodeRow, error) {
	methods := decodeMethods()
	rows := make([]decodeRow, len(methods))
	run := func(m decodeMethod) (sample, decodeResult, error) {
		s, out, err := runChild(self, []string{"decode", "--file", path, "--method", m.Name, "--workers", fmt.Sprint(workers)})
		if err != nil {
			return s, decodeResult{}, err
		}
		var res decodeResult
		if err := json.Unmarshal(out, &res); err != nil {
			return s, res, fmt.Errorf("decode output: %w", err)
		}
		return s, res, nil
	}
	for i, m := range methods {
		s, res, err := run(m)
		if err != nil {
			return nil, err
		}
		rows[i] = decodeRow{Method: m, Sum: res.Sum}
		logf("decode check %s: %.2f s, %+v", m.Name, s.Wall.Seconds(), res.Sum)
		if res.Sum != rows[0].Sum {
			return nil, fmt.Errorf("CHECK FAILED: decode path %q read %+v, %q read %+v", m.Name, res.Sum, methods[0].Name, rows[0].Sum)
		}
	}
	samples := make([][]sample, len(methods))
	inproc := make([][]sample, len(methods))
	for r := range runs {
		for i, m := range methods {
			s, res, err := run(m)
			if err != nil {
				return nil, err
			}
			samples[i] = append(samples[i], s)
			inproc[i] = append(inproc[i], sample{Wall: time.Duration(res.Seconds * float64(time.Second))})
			logf("decode run %d/%d %s: %.2f s %.0f MB", r+1, runs, m.Name, s.Wall.Seconds(), mb(s.MaxRSS))
		}
	}
	for i := range methods {
		rows[i].Stats = summarise(samples[i])
		rows[i].InProc = summarise(inproc[i]).Wall.Seconds()
	}
	return rows, nil
}

// profileMain profiles the in-process analysis of path and keeps pprof's
// top entries, flat and cumulative.
func profileMain(rep *benchReport, self, path, dir string, logf func(string, ...any)) error {
	prof := filepath.Join(dir, "analyze.cpu.prof")
	logf("profiling the analysis of %s", path)
	s, out, err := runChild(self, []string{"profile", "--file", path, "--cpuprofile", prof})
	if err != nil {
		return err
	}
	rep.ProfileNote = fmt.Sprintf("%s (wall %.1f s with the profiler on, peak RSS %.0f MB)", strings.TrimSpace(string(out)), s.Wall.Seconds(), mb(s.MaxRSS))
	for _, v := range []struct {
		dst  *string
		args []string
	}{
		{&rep.ProfileTop, []string{"tool", "pprof", "-top", "-nodecount=30", self, prof}},
		{&rep.ProfileCum, []string{"tool", "pprof", "-top", "-cum", "-nodecount=30", self, prof}},
	} {
		cmd := exec.CommandContext(context.Background(), "go", v.args...)
		var stderr bytes.Buffer
		cmd.Stderr = &stderr
		b, err := cmd.Output()
		if err != nil {
			return fmt.Errorf("go %s: %w\n%s", strings.Join(v.args, " "), err, stderr.String())
		}
		*v.dst = strings.TrimSpace(string(b))
	}
	return nil
}

// machine describes where the numbers came from.
type machine struct {
	CPUs     int
	CPUModel string
	MemTotal string
	Go       string
	DuckDB   string
	Kernel   string
}

func describeMachine() (machine, error) {
	m := machine{CPUs: runtime.NumCPU(), Go: runtime.Version()}
	if b, err := os.ReadFile("/proc/cpuinfo"); err == nil {
		for _, line := range strings.Split(string(b), "\n") {
			if k, v, ok := strings.Cut(line, ":"); ok && strings.TrimSpace(k) == "model name" {
				m.CPUModel = strings.TrimSpace(v)
				break
			}
		}
	}
	if b, err := os.ReadFile("/proc/meminfo"); err == nil {
		for _, line := range strings.Split(string(b), "\n") {
			if k, v, ok := strings.Cut(line, ":"); ok && k == "MemTotal" {
				m.MemTotal = strings.TrimSpace(v)
				break
			}
		}
	}
	if b, err := os.ReadFile("/proc/sys/kernel/osrelease"); err == nil {
		m.Kernel = strings.TrimSpace(string(b))
	}
	v, err := duckdbVersion()
	if err != nil {
		return m, err
	}
	m.DuckDB = v
	return m, nil
}

// loadAvg returns the 1-minute load average, or "?".
func loadAvg() string {
	b, err := os.ReadFile("/proc/loadavg")
	if err != nil {
		return "?"
	}
	if f := strings.Fields(string(b)); len(f) > 0 {
		return f[0]
	}
	return "?"
}

// writeJSON writes v as indented JSON.
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(v); err != nil {
		return fmt.Errorf("encode: %w", err)
	}
	return nil
}

// buildArmtally builds ./cmd/armtally of the repository at repo into dir
// and returns the binary's path and a description of its source. With a
// non-empty rev it builds that commit, exported with git archive into
// dir/src-COMMIT, so that edits in the working tree do not reach the
// numbers; with "" it builds the working tree.
func buildArmtally(repo, rev, dir string, logf func(string, ...any)) (string, string, error) {
	src, desc := repo, "the working tree of "+repo
	if rev != "" {
		out, err := exec.Command("git", "-C", repo, "rev-parse", "--verify", rev+"^{commit}").Output()
		if err != nil {
			return "", "", fmt.Errorf("git rev-parse %s: %w", rev, err)
		}
		commit := strings.TrimSpace(string(out))
		src = filepath.Join(dir, "src-"+commit)
		desc = "commit " + commit
		if _, err := os.Stat(filepath.Join(src, "go.mod")); err != nil {
			tmp := src + ".tmp"
			os.RemoveAll(tmp)
			if err := os.MkdirAll(tmp, 0o755); err != nil {
				return "", "", err
			}
			sh := fmt.Sprintf("git -C %q archive %s | tar -x -C %q", repo, commit, tmp)
			if out, err := exec.Command("sh", "-c", sh).CombinedOutput(); err != nil {
				return "", "", fmt.Errorf("%s: %w\n%s", sh, err, out)
			}
			if err := os.Rename(tmp, src); err != nil {
				return "", "", err
			}
		}
	}
	bin := filepath.Join(dir, "armtally")
	logf("building ./cmd/armtally from %s into %s", desc, bin)
	build := exec.Command("go", "build", "-o", bin, "./cmd/armtally")
	build.Dir = src
	if out, err := build.CombinedOutput(); err != nil {
		return "", "", fmt.Errorf("go build ./cmd/armtally in %s: %w\n%s", src, err, out)
	}
	return bin, desc, nil
}
