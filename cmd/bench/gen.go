package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"time"

	"github.com/parquet-go/parquet-go"

	"github.com/armtally/armtally/sampledata"
)

// genSeed2 is the second word of the PCG seed, the same as armtally gen's,
// so that a log written here holds the same rows as
// `armtally gen --users N --noise X --seed S` (which writes zstd, not snappy).
const genSeed2 = 0x61726d74616c6c79

// rowGroupRows is the number of rows per Parquet row group of the logs the
// bench writes.
const rowGroupRows = 1 << 20

// logSpec describes one generated event log.
type logSpec struct {
	// Users is the number of exposed units; 2.5% more units are never
	// exposed, as armtally gen does by default.
	Users int `json:"users"`
	// Noise is the mean number of noise events per unit.
	Noise float64 `json:"noise_events_per_user"`
	// Seed is the first word of the PCG seed.
	Seed uint64 `json:"seed"`
	// Format is "parquet" (snappy) or "csv".
	Format string `json:"format"`
}

// logInfo is what the bench records about a written log, in a JSON file
// beside it: the spec and the generator's counts.
type logInfo struct {
	Spec         logSpec `json:"spec"`
	Rows         int64   `json:"rows"`
	ExposureRows int64   `json:"exposure_rows"`
	Units        int64   `json:"units"`
	NeverExposed int64   `json:"never_exposed_units"`
	RowGroups    int     `json:"row_groups,omitempty"`
	Bytes        int64   `json:"bytes"`
	GenSeconds   float64 `json:"generate_seconds"`
}

// config returns the generator configuration of s: the demo scenario (three
// arms, purchase within 7 days and newsletter_signup within 3 days) scaled
// to s.Users units with s.Noise noise events per unit.
func (s logSpec) config() sampledata.Config {
	cfg := sampledata.DemoConfig()
	cfg.Users = s.Users
	cfg.NeverExposedUsers = s.Users / 40
	cfg.NoiseEventsPerUser = s.Noise
	cfg.RowGroupSize = rowGroupRows
	return cfg
}

// fileName returns the name of the log's file, which encodes the spec.
func (s logSpec) fileName() string {
	ext := ".parquet"
	if s.Format == "csv" {
		ext = ".csv"
	}
	return fmt.Sprintf("events-u%d-n%s-s%d%s", s.Users,
		strconv.FormatFloat(s.Noise, 'f', -1, 64), s.Seed, ext)
}

// ensureLog returns the path and info of the log described by s in dir,
// writing it first unless a complete one (its info file present) is there
// already. Progress goes to logw.
func ensureLog(dir string, s logSpec, logw io.Writer) (string, logInfo, error) {
	path := filepath.Join(dir, s.fileName())
	infoPath := path + ".json"
	if b, err := os.ReadFile(infoPath); err == nil {
		var info logInfo
		if err := json.Unmarshal(b, &info); err != nil {
			return "", logInfo{}, fmt.Errorf("read %s: %w", infoPath, err)
		}
		if st, err := os.Stat(path); err == nil && st.Size() == info.Bytes && info.Spec == s {
			fmt.Fprintf(logw, "reusing %s (%d rows)\n", path, info.Rows)
			return path, info, nil
		}
	} else if !errors.Is(err, fs.ErrNotExist) {
		return "", logInfo{}, fmt.Errorf("read %s: %w", infoPath, err)
	}
	fmt.Fprintf(logw, "writing %s (%d exposed units, %g noise events per unit)...\n", path, s.Users, s.Noise)
	info, err := writeLog(path, s)
	if err != nil {
		return "", logInfo{}, err
	}
	b, err := json.MarshalIndent(info, "", "  ")
	if err != nil {
		return "", logInfo{}, fmt.Errorf("encode log info: %w", err)
	}
	if err := os.WriteFile(infoPath, append(b, '\n'), 0o644); err != nil {
		return "", logInfo{}, fmt.Errorf("write log info: %w", err)
	}
	fmt.Fprintf(logw, "wrote %s: %d rows, %.1f MB in %.0f s\n", path, info.Rows, float64(info.Bytes)/1e6, info.GenSeconds)
	return path, info, nil
}

// writeLog writes the log of s to path through a temporary file renamed into
// place on success.
func writeLog(path string, s logSpec) (logInfo, error) {
	cfg := s.config()
	if err := sampledata.Validate(cfg); err != nil {
		return logInfo{}, err
	}
	tmp, err := os.CreateTemp(filepath.Dir(path), ".tmp-"+filepath.Base(path)+"-*")
	if err != nil {
		return logInfo{}, fmt.Errorf("write log: %w", err)
	}
	defer os.Remove(tmp.Name()) // a no-op after the rename
	start := time.Now()
	src := rand.NewPCG(s.Seed, genSeed2)
	info := logInfo{Spec: s}
	switch s.Format {
	case "csv":
		sum, err := sampledata.WriteCSV(tmp, cfg, src)
		if err != nil {
			tmp.Close()
			return logInfo{}, fmt.Errorf("write %s: %w", path, err)
		}
		info.Rows, info.ExposureRows = sum.Rows, sum.ExposureRows
		info.Units, info.NeverExposed = sum.Units, sum.NeverExposedUnits
	case "parquet":
		n, err := writeSnappyParquet(tmp, cfg, src)
		if err != nil {
			tmp.Close()
			return logInfo{}, fmt.Errorf("write %s: %w", path, err)
		}
		info.Rows, info.ExposureRows = n.rows, n.exposureRows
		info.Units, info.NeverExposed = int64(cfg.Users), int64(cfg.NeverExposedUsers)
		info.RowGroups = int((n.rows + rowGroupRows - 1) / rowGroupRows)
	default:
		tmp.Close()
		return logInfo{}, fmt.Errorf("write %s: unknown format %q", path, s.Format)
	}
	if err := tmp.Close(); err != nil {
		return logInfo{}, fmt.Errorf("write %s: %w", path, err)
	}
	st, err := os.Stat(tmp.Name())
	if err != nil {
		return logInfo{}, fmt.Errorf("write %s: %w", path, err)
	}
	info.Bytes = st.Size()
	info.GenSeconds = time.Since(start).Seconds()
	if err := os.Rename(tmp.Name(), path); err != nil {
		return logInfo{}, fmt.Errorf("write %s: %w", path, err)
	}
	return info, nil
}

// snappyRow is the Parquet schema of sampledata.WriteParquet (the same
// columns, types and encodings: dictionary-encoded strings, ts as
// TIMESTAMP(MICROS, UTC) with delta encoding, experiment and arm optional)
// with snappy compression instead of zstd.
type snappyRow struct {
	UserID     string  `parquet:"user_id,dict,snappy"`
	TS         int64   `parquet:"ts,timestamp(microsecond:utc),delta,snappy"`
	Event      string  `parquet:"event,dict,snappy"`
	Experiment *string `parquet:"experiment,optional,dict,snappy"`
	Arm        *string `parquet:"arm,optional,dict,snappy"`
	Platform   string  `parquet:"platform,dict,snappy"`
}

// rowCounts are the counts writeSnappyParquet returns.
type rowCounts struct {
	rows, exposureRows int64
}

// writeSnappyParquet generates the log of cfg from src with
// sampledata.Generate and writes it to w as snappy Parquet in row groups of
// cfg.RowGroupSize rows.
func writeSnappyParquet(w io.Writer, cfg sampledata.Config, src rand.Source) (rowCounts, error) {
	pw := parquet.NewGenericWriter[snappyRow](w,
		parquet.MaxRowsPerRowGroup(int64(cfg.RowGroupSize)),
		parquet.CreatedBy("armtally-bench", "1", "none"),
	)
	experiment := cfg.Experiment
	armNames := make(map[string]*string, len(cfg.Arms))
	for _, a := range cfg.Arms {
		armNames[a.Name] = &a.Name
	}
	var n rowCounts
	batch := make([]snappyRow, 0, 4096)
	flush := func() error {
		if _, err := pw.Write(batch); err != nil {
			return err
		}
		clear(batch)
		batch = batch[:0]
		return nil
	}
	err := sampledata.Generate(cfg, src, func(e sampledata.Event) error {
		r := snappyRow{UserID: e.User, TS: e.TS.UnixMicro(), Event: e.Name, Platform: e.Platform}
		if e.Arm != "" {
			r.Experiment = &experiment
			r.Arm = armNames[e.Arm]
			n.exposureRows++
		}
		n.rows++
		batch = append(batch, r)
		if len(batch) == cap(batch) {
			return flush()
		}
		return nil
	})
	if err != nil {
		return n, err
	}
	if err := flush(); err != nil {
		return n, err
	}
	if err := pw.Close(); err != nil {
		return n, fmt.Errorf("close: %w", err)
	}
	return n, nil
}
