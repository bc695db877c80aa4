package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/parquet-go/parquet-go"

	"github.com/armtally/armtally/sampledata"
)

// partRowGroupRows is the row-group size of the day files of a partitioned
// export: small, since a file of every day is open while the log is
// written.
const partRowGroupRows = 128 << 10

// partInfo is what the bench records about a partitioned export, in a
// JSON file beside its folder.
type partInfo struct {
	Spec  logSpec  `json:"spec"`
	Days  []string `json:"days"` // dt=YYYY-MM-DD folder names, in order
	Rows  int64    `json:"rows"`
	Units int64    `json:"units"` // exposed and never exposed
	Bytes int64    `json:"bytes"`
}

// ensurePartitioned returns the folder of the export of s split by UTC day
// into dt=YYYY-MM-DD/part-0.parquet files (snappy, as the single-file
// logs), writing it unless a complete one is there.
func ensurePartitioned(dir string, s logSpec, logw io.Writer) (string, partInfo, error) {
	folder := filepath.Join(dir, "export-"+strings.TrimSuffix(s.fileName(), ".parquet"))
	infoPath := folder + ".json"
	if b, err := os.ReadFile(infoPath); err == nil {
		var info partInfo
		if err := json.Unmarshal(b, &info); err == nil && info.Spec == s {
			fmt.Fprintf(logw, "reusing %s (%d days, %d rows)\n", folder, len(info.Days), info.Rows)
			return folder, info, nil
		}
	} else if !errors.Is(err, fs.ErrNotExist) {
		return "", partInfo{}, err
	}
	fmt.Fprintf(logw, "writing %s (%d exposed units by day)...\n", folder, s.Users)
	os.RemoveAll(folder)
	info, err := writePartitioned(folder, s)
	if err != nil {
		return "", partInfo{}, err
	}
	b, _ := json.MarshalIndent(info, "", "  ")
	if err := os.WriteFile(infoPath, append(b, '\n'), 0o644); err != nil {
		return "", partInfo{}, err
	}
	return folder, info, nil
}

// writePartitioned writes the export: the generator's rows, each to the
// file of its day.
func writePartitioned(folder string, s logSpec) (partInfo, error) {
	cfg := s.config()
	info := partInfo{Spec: s, Units: int64(cfg.Users + cfg.NeverExposedUsers)}
	type dayFile struct {
		f     *os.File
		w     *parquet.GenericWriter[snappyRow]
		batch []snappyRow
	}
	days := map[string]*dayFile{}
	experiment := cfg.Experiment
	armNames := make(map[string]*string, len(cfg.Arms))
	for _, a := range cfg.Arms {
		armNames[a.Name] = &a.Name
	}
	flush := func(d *dayFile) error {
		_, err := d.w.Write(d.batch)
		clear(d.batch)
		d.batch = d.batch[:0]
		return err
	}
	err := sampledata.Generate(cfg, rand.NewPCG(s.Seed, genSeed2), func(e sampledata.Event) error {
		name := "dt=" + e.TS.UTC().Format("2006-01-02")
		d := days[name]
		if d == nil {
			if err := os.MkdirAll(filepath.Join(folder, name), 0o755); err != nil {
				return err
			}
			f, err := os.Create(filepath.Join(folder, name, "part-0.parquet"))
			if err != nil {
				return err
			}
			d = &dayFile{f: f, w: parquet.NewGenericWriter[snappyRow](f, parquet.MaxRowsPerRowGroup(partRowGroupRows),
				parquet.CreatedBy("armtally-bench", "1", "none")), batch: make([]snappyRow, 0, 1024)}
			days[name] = d
			info.Days = append(info.Days, name)
		}
		r := snappyRow{UserID: e.User, TS: e.TS.UnixMicro(), Event: e.Name, Platform: e.Platform}
		if e.Arm != "" {
			r.Experiment, r.Arm = &experiment, armNames[e.Arm]
		}
		info.Rows++
		d.batch = append(d.batch, r)
		if len(d.batch) == cap(d.batch) {
			return flush(d)
		}
		return nil
	})
	for _, d := range days {
		if err == nil {
			err = flush(d)
		}
		if err == nil {
			err = d.w.Close()
		}
		if cerr := d.f.Close(); err == nil {
			err = cerr
		}
		if st, serr := os.Stat(d.f.Name()); serr == nil {
			info.Bytes += st.Size()
		}
	}
	slices.Sort(info.Days)
	if err != nil {
		return partInfo{}, fmt.Errorf("write %s: %w", folder, err)
	}
	return info, nil
}

// incrementalResult is the measurement of the nightly case.
type incrementalResult struct {
	Folder string
	Info   partInfo
	// Full is armtally over every day without a state; Night over every
	// day with the state of all but the last; DuckDB the one-scan SQL
	// over every day.
	Full, Night, DuckDB    stats
	StateBytes             int64
	LoadBefore, LoadAfter  string
	FullJSONEqualsNightly  bool
	DaysInState, DaysTotal int
}

// measureIncremental times the nightly run of the last day against a full
// run and DuckDB over the export, runs interleaved; the nightly run's JSON
// readout must equal the full run's byte for byte (the run aborts
// otherwise).
func measureIncremental(folder string, info partInfo, nDays int, bin, self string, f harnessFlags, a analysis, logf func(string, ...any)) (*incrementalResult, error) {
	res := &incrementalResult{Folder: folder, Info: info, DaysTotal: nDays, DaysInState: nDays - 1}
	// work/ holds hard links of the day files: every day for the full
	// runs, all but the last while the state is made.
	work := filepath.Join(f.dir, "incremental-work")
	os.RemoveAll(work)
	link := func(day string) error {
		if err := os.MkdirAll(filepath.Join(work, day), 0o755); err != nil {
			return err
		}
		return os.Link(filepath.Join(folder, day, "part-0.parquet"), filepath.Join(work, day, "part-0.parquet"))
	}
	days := info.Days[:nDays]
	for _, d := range days[:len(days)-1] {
		if err := link(d); err != nil {
			return nil, err
		}
	}
	base := filepath.Join(f.dir, "incremental-base.state")
	state := filepath.Join(f.dir, "incremental.state")
	os.Remove(base)
	fullJSON, nightJSON := filepath.Join(f.dir, "full.json"), filepath.Join(f.dir, "night.json")
	md := filepath.Join(f.dir, "readout.md")
	if _, _, err := runChild(bin, append(a.armtallyArgs(work, nightJSON, md), "--state", base)); err != nil {
		return nil, err
	}
	if err := link(days[len(days)-1]); err != nil {
		return nil, err
	}
	// copyState puts the saved state in place and syncs it: a nightly
	// job's state was written a day before, not a moment ago, and the
	// writeback of a fresh copy would otherwise share the disk with the
	// timed run.
	copyState := func() error {
		b, err := os.ReadFile(base)
		if err != nil {
			return err
		}
		f, err := os.Create(state)
		if err != nil {
			return err
		}
		_, err = f.Write(b)
		if err == nil {
			err = f.Sync()
		}
		return errors.Join(err, f.Close())
	}
	duckArgs := []string{"duckdb-query", "--file", filepath.Join(work, "*", "*.parquet"), "--format", "parquet", "--query", "analyze-1pass", "--threads", fmt.Sprint(f.threads)}
	// The check, untimed: the nightly readout is the full one.
	if err := copyState(); err != nil {
		return nil, err
	}
	if _, _, err := runChild(bin, append(a.armtallyArgs(work, nightJSON, md), "--state", state)); err != nil {
		return nil, err
	}
	if _, _, err := runChild(bin, a.armtallyArgs(work, fullJSON, md)); err != nil {
		return nil, err
	}
	fj, err1 := os.ReadFile(fullJSON)
	nj, err2 := os.ReadFile(nightJSON)
	if err := errors.Join(err1, err2); err != nil {
		return nil, err
	}
	if !bytes.Equal(fj, nj) {
		return nil, fmt.Errorf("CHECK FAILED: the nightly readout of %s differs from the full one", work)
	}
	ac, _, err := armtallyCounts(fj, a.Metric)
	if err != nil {
		return nil, err
	}
	_, out, err := runChild(self, duckArgs)
	if err != nil {
		return nil, err
	}
	var dres childResult
	if err := json.Unmarshal(out, &dres); err != nil || dres.Counts == nil {
		return nil, fmt.Errorf("duckdb-query output: %v", err)
	}
	if err := compareCounts(ac, *dres.Counts); err != nil {
		return nil, fmt.Errorf("CHECK FAILED on %s: %w", work, err)
	}
	res.FullJSONEqualsNightly = true
	if st, err := os.Stat(state); err == nil {
		res.StateBytes = st.Size()
	}
	logf("incremental, %d days: the nightly readout equals the full one; state file %.1f MB", nDays, mb(res.StateBytes))
	res.LoadBefore = loadAvg()
	var full, night, duck []sample
	for i := range f.runs {
		if err := copyState(); err != nil {
			return nil, err
		}
		s, _, err := runChild(bin, append(a.armtallyArgs(work, nightJSON, md), "--state", state))
		if err != nil {
			return nil, err
		}
		night = append(night, s)
		if s, _, err = runChild(bin, a.armtallyArgs(work, fullJSON, md)); err != nil {
			return nil, err
		}
		full = append(full, s)
		if s, _, err = runChild(self, duckArgs); err != nil {
			return nil, err
		}
		duck = append(duck, s)
		logf("incremental, %d days, run %d/%d: nightly %.2f s %.0f MB; full %.2f s %.0f MB; duckdb %.2f s %.0f MB", nDays, i+1, f.runs,
			night[i].Wall.Seconds(), mb(night[i].MaxRSS), full[i].Wall.Seconds(), mb(full[i].MaxRSS), duck[i].Wall.Seconds(), mb(duck[i].MaxRSS))
	}
	res.LoadAfter = loadAvg()
	res.Full, res.Night, res.DuckDB = summarise(full), summarise(night), summarise(duck)
	return res, nil
}

// nightDays parses --incremental-nights against an export of total days:
// each N is the export cut to its first N days (at least 2), "last" all of
// them; the list comes back without repeats, in the order given.
func nightDays(list string, total int) ([]int, error) {
	var out []int
	for _, f := range strings.Split(list, ",") {
		f = strings.TrimSpace(f)
		n := total
		if f != "last" {
			var err error
			if n, err = strconv.Atoi(f); err != nil || n < 2 || n > total {
				return nil, fmt.Errorf("--incremental-nights: %q is neither \"last\" nor a number of days from 2 to %d", f, total)
			}
		}
		if !slices.Contains(out, n) {
			out = append(out, n)
		}
	}
	return out, nil
}
