package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"syscall"

	"github.com/spf13/pflag"
)

// settle applies --quick and the defaults that depend on other flags,
// resolves --only, --skip and the part booleans into f.parts, and checks
// the sizes.
func (f *harnessFlags) settle(fs *pflag.FlagSet) error {
	if f.quick {
		for name, v := range map[string]string{"users": "200000", "csv-users": "200000", "incremental-users": "200000"} {
			if !fs.Changed(name) {
				if err := fs.Set(name, v); err != nil {
					return err
				}
			}
		}
		if !fs.Changed("only") && !fs.Changed("skip") {
			f.skip = "csv-large,decode,profile"
		}
	}
	if f.smallUsers == 0 {
		f.smallUsers = f.users / 10
	}
	if f.scalingRuns == 0 {
		f.scalingRuns = f.runs
	}
	if f.decodeRuns == 0 {
		f.decodeRuns = f.runs
	}
	if f.incrementalUsers == 0 {
		f.incrementalUsers = f.users
	}
	parts, err := selectParts(f.only, f.skip)
	if err != nil {
		return err
	}
	for name, on := range map[string]bool{"scaling": f.scaling, "decode": f.decode, "profile": f.profile, "incremental": f.incremental} {
		if !on {
			delete(parts, name)
		}
	}
	if parts["scaling"] {
		parts["parquet"], parts["parquet-small"] = true, true
	}
	if parts["csv-large"] && f.csvLargeUsers < 10 {
		return fmt.Errorf("--csv-large-users must be at least 10 when the part csv-large runs")
	}
	f.parts = parts
	if f.runs < 1 || f.users < 10 || f.smallUsers < 10 || f.csvUsers < 10 {
		return fmt.Errorf("--runs must be at least 1 and --users, --small-users, --csv-users at least 10")
	}
	return nil
}

// selectParts returns the parts that --only (all when empty) and --skip
// leave.
func selectParts(only, skip string) (map[string]bool, error) {
	list := func(s string) ([]string, error) {
		var out []string
		for _, p := range strings.Split(s, ",") {
			if p = strings.TrimSpace(p); p == "" {
				continue
			}
			if !slices.Contains(harnessParts, p) {
				return nil, fmt.Errorf("unknown part %q (want one of %s)", p, strings.Join(harnessParts, ", "))
			}
			out = append(out, p)
		}
		return out, nil
	}
	on, err := list(only)
	if err != nil {
		return nil, fmt.Errorf("--only: %w", err)
	}
	off, err := list(skip)
	if err != nil {
		return nil, fmt.Errorf("--skip: %w", err)
	}
	if len(on) == 0 {
		on = harnessParts
	}
	parts := map[string]bool{}
	for _, p := range on {
		parts[p] = !slices.Contains(off, p)
	}
	for p, v := range parts {
		if !v {
			delete(parts, p)
		}
	}
	return parts, nil
}

// scenarios returns the logs of the selected parts; the first is always
// the --users Parquet log (measured only with the part parquet; written
// when decode or profile needs it).
func (f harnessFlags) scenarios() []*scenario {
	main := &scenario{Name: "parquet", Part: "parquet", Desc: "main log, snappy Parquet", Spec: logSpec{Users: f.users, Noise: f.noise, Seed: f.seed, Format: "parquet"}, Runs: f.runs, Scan: true, measure: f.parts["parquet"]}
	out := []*scenario{main}
	add := func(sc *scenario) {
		if f.parts[sc.Part] {
			sc.measure = true
			out = append(out, sc)
		}
	}
	add(&scenario{Name: "parquet-1/10", Part: "parquet-small", Desc: "a tenth of the units and events", Spec: logSpec{Users: f.smallUsers, Noise: f.noise, Seed: f.seed, Format: "parquet"}, Runs: f.runs, Scan: true})
	add(&scenario{Name: "csv", Part: "csv", Desc: "CSV log", Spec: logSpec{Users: f.csvUsers, Noise: f.noise, Seed: f.seed, Format: "csv"}, Runs: f.runs, Scan: true})
	add(&scenario{Name: "csv-large", Part: "csv-large", Desc: "large CSV log", Spec: logSpec{Users: f.csvLargeUsers, Noise: f.noise, Seed: f.seed, Format: "csv"}, Runs: f.runs})
	add(&scenario{Name: "parquet-2x-events", Part: "scaling", Desc: "same units, about 2x the events", Spec: logSpec{Users: f.users, Noise: f.noise2x, Seed: f.seed, Format: "parquet"}, Runs: f.scalingRuns})
	if !main.measure && !f.parts["decode"] && !f.parts["profile"] {
		out = out[1:]
	}
	return out
}

// Bytes per generated row, a little above what the generator writes
// (about 57 for CSV, 7.1 for a snappy Parquet log and 10.3 for the
// partitioned export at 10 rows per unit), for the disk check.
const (
	csvBytesPerRow     = 60
	parquetBytesPerRow = 8
	exportBytesPerRow  = 11
	// diskMargin is the free space left after every log is written.
	diskMargin = 1 << 30
)

// estimateBytes is the size of the log of s, from its expected rows
// (the exposed units, 2.5% more never exposed, about 2.1 + noise rows each).
func estimateBytes(s logSpec, perRow float64) int64 {
	return int64(float64(s.Users) * 1.025 * (2.1 + s.Noise) * perRow)
}

// checkDisk estimates what the logs not yet in dir need and refuses to
// start when the disk has less free space than that and a margin, saying
// how much there is, before anything is written.
func checkDisk(dir string, scs []*scenario, f harnessFlags, logf func(string, ...any)) error {
	var need int64
	var what []string
	for _, sc := range scs {
		if logPresent(filepath.Join(dir, sc.Spec.fileName())) {
			continue
		}
		per := float64(parquetBytesPerRow)
		if sc.Spec.Format == "csv" {
			per = csvBytesPerRow
		}
		n := estimateBytes(sc.Spec, per)
		need += n
		what = append(what, fmt.Sprintf("%s %.1f GB", sc.Spec.fileName(), float64(n)/1e9))
	}
	if f.parts["incremental"] {
		s := logSpec{Users: f.incrementalUsers, Noise: f.noise, Seed: f.seed, Format: "parquet"}
		name := "export-" + strings.TrimSuffix(s.fileName(), ".parquet")
		if _, err := os.Stat(filepath.Join(dir, name+".json")); err != nil {
			n := estimateBytes(s, exportBytesPerRow)
			need += n
			what = append(what, fmt.Sprintf("%s %.1f GB", name, float64(n)/1e9))
		}
	}
	free, err := freeBytes(dir)
	if err != nil {
		return err
	}
	if need == 0 {
		logf("disk: every log is in %s already; %.1f GB free", dir, float64(free)/1e9)
		return nil
	}
	logf("disk: the logs to write need about %.1f GB (%s); %.1f GB free in %s", float64(need)/1e9, strings.Join(what, ", "), float64(free)/1e9, dir)
	if free < need+diskMargin {
		return fmt.Errorf("not enough disk in %s: the logs to write need about %.1f GB and 1 GB is kept free, %.1f GB are free (leave a part out with --skip, e.g. --skip csv-large, or choose another --dir)",
			dir, float64(need)/1e9, float64(free)/1e9)
	}
	return nil
}

// logPresent reports whether the log at path is complete: its info file
// is there and gives its size.
func logPresent(path string) bool {
	b, err := os.ReadFile(path + ".json")
	if err != nil {
		return false
	}
	var info logInfo
	if json.Unmarshal(b, &info) != nil {
		return false
	}
	st, err := os.Stat(path)
	return err == nil && st.Size() == info.Bytes
}

// freeBytes returns the space free to an unprivileged user on the file
// system of dir.
func freeBytes(dir string) (int64, error) {
	var st syscall.Statfs_t
	if err := syscall.Statfs(dir, &st); err != nil {
		return 0, fmt.Errorf("free space of %s: %w", dir, err)
	}
	return int64(st.Bavail) * int64(st.Bsize), nil
}
