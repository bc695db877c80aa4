package pipeline

import (
	"bufio"
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"runtime/debug"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/internal/mapped"
	"github.com/armtally/armtally/ingest"
)

// An incremental run (Options.State) keeps a state file beside its
// readouts: the manifest of the files read (path, size, modification time,
// a hash of the first and last 64 KiB), the reader's counts, and each
// experiment's saved tally (experiment.Tallier.WriteState). The next run
// with the same file reads only the files that are not in the manifest,
// resumes each tally from its saved state and gives the readouts a run
// over all the files would give, byte for byte. It reads every file again
// (a full recompute, said by a WarnStateRecomputed warning in each readout
// and in StateReport) when a file of the manifest changed or is gone, the
// definition of the run (experiments, column mapping, reader settings) or
// the armtally build differs, the state file is damaged, the new rows
// change what the saved tally summarised (see experiment.StaleStateError),
// or rows the reader left out reach an experiment's as-of date.
//
// Layout: the magic line and the layout version (varints), each
// experiment's saved tally (experiment.Tallier.WriteState, which checks
// its own parts), then the trailer: the build, the definition hash, the
// manifest, the reader's counts and where each tally starts and ends
// (varints and length-prefixed strings), its length and CRC-32C (4 bytes
// each, little-endian) and the end line. The file is mapped into memory
// (read in full where it cannot be) and no part of it is read twice;
// the new state is written as the tallies are merged, in one stream.

const (
	stateFileMagic   = "armtally-state\n"
	stateFileEnd     = "armtally-state-end\n"
	stateFileVersion = 2
	// stateHashBlock is how much of each end of a file its content hash
	// covers: a Parquet file's footer, a CSV file's last rows.
	stateHashBlock = 64 << 10
)

// StateReport says what an incremental run did with its state file.
type StateReport struct {
	// Resumed: the saved state was used and only new files were read.
	Resumed bool
	// Recomputed: a saved state existed but could not be used (Reason
	// says why); every file was read again.
	Recomputed bool
	Reason     string
	// FilesRead of FilesTotal files were read in this run.
	FilesRead, FilesTotal int
	// Bytes is the size of the state file written, Units the unit
	// records in it (summed over the experiments).
	Bytes int64
	Units int64
}

// fileEntry is one file of the manifest.
type fileEntry struct {
	path    string
	size    int64
	modTime int64
	hash    string
}

// definitionHash fingerprints what the saved tallies depend on.
func definitionHash(in Input, exps []Experiment) (string, error) {
	specs := make([]experiment.Spec, len(exps))
	for i, e := range exps {
		specs[i] = e.Spec
	}
	b, err := json.Marshal(struct {
		Specs       []experiment.Spec
		Mapping     ingest.Mapping
		Delimiter   rune
		MaxBadRows  int64
		MaxBadShare float64
	}{specs, mappingOf(in), in.Delimiter, in.MaxBadRows, in.MaxBadShare})
	if err != nil {
		return "", err
	}
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:]), nil
}

// buildVersion names the armtally build: its module version and, when the
// build recorded them, its commit and whether the tree was modified.
func buildVersion() string {
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		return "unknown"
	}
	v := bi.Main.Version
	for _, s := range bi.Settings {
		if s.Key == "vcs.revision" || s.Key == "vcs.modified" {
			v += " " + s.Key + "=" + s.Value
		}
	}
	return v
}

// manifest describes the sources as the state file records them: files
// on disk by absolute path, so that a run from another folder finds them.
func manifest(srcs []ingest.Source, onDisk bool) ([]fileEntry, error) {
	out := make([]fileEntry, len(srcs))
	for i, s := range srcs {
		path := s.Name
		if onDisk {
			if abs, err := filepath.Abs(path); err == nil {
				path = abs
			}
		}
		size, mod, err := s.Stat()
		if err != nil {
			return nil, &DataError{err}
		}
		h, err := contentHash(s)
		if err != nil {
			return nil, &DataError{err}
		}
		out[i] = fileEntry{path: path, size: size, modTime: mod.UnixNano(), hash: h}
	}
	return out, nil
}

// contentHash hashes the size and the first and last stateHashBlock bytes
// of a source.
func contentHash(s ingest.Source) (string, error) {
	r, size, c, err := s.Open()
	if err != nil {
		return "", err
	}
	defer c.Close()
	h := sha256.New()
	binary.Write(h, binary.LittleEndian, size)
	for _, off := range []int64{0, max(0, size-stateHashBlock)} {
		buf := make([]byte, min(size, stateHashBlock))
		if _, err := r.ReadAt(buf, off); err != nil && err != io.EOF {
			return "", fmt.Errorf("%s: %w", s.Name, err)
		}
		h.Write(buf)
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// planResume decides what an incremental run reads: it returns the opened
// state file (positioned at the first saved tally), its saved counts and
// the sources not in its manifest; or nil and a reason to read everything
// ("" when there is no state file).
func planResume(path, def string, files []fileEntry, srcs []ingest.Source, useMap bool) (*stateFile, []ingest.Source, string) {
	sf, why := openStateFile(path, useMap)
	if sf == nil {
		return nil, nil, why
	}
	if why = sf.checkedHeader(def); why != "" {
		sf.close()
		return nil, nil, why
	}
	current := make(map[string]fileEntry, len(files))
	for _, fe := range files {
		current[fe.path] = fe
	}
	seen := make(map[string]bool, len(sf.files))
	for _, fe := range sf.files {
		now, ok := current[fe.path]
		if !ok || now != fe {
			sf.close()
			if !ok {
				return nil, nil, fmt.Sprintf("file %s was read before and is gone", fe.path)
			}
			return nil, nil, fmt.Sprintf("file %s changed since it was read", fe.path)
		}
		seen[fe.path] = true
	}
	var fresh []ingest.Source
	var newBytes, savedBytes int64
	for i, s := range srcs {
		if !seen[files[i].path] {
			fresh = append(fresh, s)
			newBytes += files[i].size
		} else {
			savedBytes += files[i].size
		}
	}
	if savedBytes > 0 {
		sf.growth = float64(newBytes) / float64(savedBytes)
	}
	return sf, fresh, ""
}

// stateFile is a state file being read.
type stateFile struct {
	data     []byte
	release  func()
	files    []fileEntry
	stats    ingest.Stats
	sections [][]byte // each experiment's saved tally
	// growth is the new files' bytes over the saved ones' (0: unknown),
	// from which the talliers size their unit indexes.
	growth float64
}

// openStateFile maps the state file (reads it into memory when not
// mapped); it returns nil and a reason when it
// cannot be read ("" when there is none).
func openStateFile(path string, useMap bool) (*stateFile, string) {
	data, release, err := readFile(path, useMap)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, ""
	}
	if err != nil {
		return nil, fmt.Sprintf("the state file cannot be read: %v", err)
	}
	return &stateFile{data: data, release: release}, ""
}

// close releases the file's bytes: after the last use of the talliers
// that read them.
func (sf *stateFile) close() { sf.release() }

// checkedHeader is readHeader with a fault on reading the mapped file
// (cut short since it was opened) returned as a reason, not a crash.
func (sf *stateFile) checkedHeader(def string) string {
	var why string
	if err := mapped.Guard(errStateUnreadable, func() error {
		why = sf.readHeader(def)
		return nil
	}); err != nil {
		return err.Error()
	}
	return why
}

// errStateUnreadable is a fault on reading a mapped state file.
var errStateUnreadable = errors.New("the state file cannot be read")

// readHeader reads the layout version and the trailer; it returns a
// reason when the state cannot be used.
func (sf *stateFile) readHeader(def string) string {
	b := sf.data
	r := bufio.NewReader(bytes.NewReader(b))
	bad := false
	num := func() int64 {
		v, err := binary.ReadVarint(r)
		bad = bad || err != nil
		return v
	}
	str := func() string {
		n := num()
		if bad || n < 0 || n > 1<<20 {
			bad = true
			return ""
		}
		b := make([]byte, n)
		_, err := io.ReadFull(r, b)
		bad = bad || err != nil
		return string(b)
	}
	if str() != stateFileMagic || bad {
		return "the state file is not one armtally wrote"
	}
	if v := num(); v != stateFileVersion {
		return fmt.Sprintf("the state file has layout %d, this armtally reads %d", v, stateFileVersion)
	}
	start := len(stateFileMagic) + 2 // the magic's length, the magic, the version
	tail := 8 + len(stateFileEnd)
	if len(b) < start+tail || string(b[len(b)-len(stateFileEnd):]) != stateFileEnd {
		return "the state file is damaged (cut short)"
	}
	foot := b[len(b)-tail:]
	n := int(binary.LittleEndian.Uint32(foot))
	if n > len(b)-start-tail {
		return "the state file is damaged (cut short)"
	}
	trailer := b[len(b)-tail-n : len(b)-tail]
	if binary.LittleEndian.Uint32(foot[4:]) != crc32.Checksum(trailer, crc32.MakeTable(crc32.Castagnoli)) {
		return "the state file is damaged (its trailer checksum does not match)"
	}
	r = bufio.NewReader(bytes.NewReader(trailer))
	if str() != buildVersion() {
		return "the state file was written by another armtally build"
	}
	if str() != def {
		return "the definition of the run changed (experiments, column mapping or reader settings)"
	}
	for n := num(); n > 0 && !bad; n-- {
		sf.files = append(sf.files, fileEntry{path: str(), size: num(), modTime: num(), hash: str()})
	}
	st := &sf.stats
	st.Files, st.RowsRead, st.Rows, st.Filtered, st.FilteredMaxTS = int(num()), num(), num(), num(), num()
	for n := num(); n > 0 && !bad; n-- {
		reason := ingest.BadRowReason(str())
		st.BadRows = append(st.BadRows, ingest.BadRowCount{Reason: reason, Count: num()})
		st.BadRowExamples = append(st.BadRowExamples, nil) // counts only
	}
	for n := num(); n > 0 && !bad; n-- {
		from, to := num(), num()
		if from < int64(start) || to < from || to > int64(len(b)-tail-len(trailer)) {
			bad = true
			break
		}
		sf.sections = append(sf.sections, b[from:to:to])
	}
	if bad {
		return "the state file is damaged"
	}
	return ""
}

// stateOut is a state file being written: the spare file beside the
// state (spareName), overwritten in place and exchanged with the old state
// once complete, or, where that cannot be, a temporary file in the same
// folder, renamed over the old one.
//
// The spare is the state of the night before last, kept for this: writing
// over its blocks and exchanging two names frees no blocks, where renaming
// a new file over the old state freed the old one's (0.09 s of a 0.7 s
// night on a file system mounted with discard, cmd/bench/BENCHMARKS.md).
// The folder then holds two states between runs, as it already did while
// one was written.
type stateOut struct {
	path     string
	f        *os.File
	spare    bool // f is the locked spare, written in place
	cw       *countWriter
	w        *bufio.Writer
	sections [][2]int64
}

// spareName is the name of the spare state file beside the state path.
func spareName(path string) string {
	return filepath.Join(filepath.Dir(path), "."+filepath.Base(path)+".spare")
}

func createStateOut(path string) (*stateOut, error) {
	if f := openSpare(spareName(path)); f != nil {
		o := &stateOut{path: path, f: f, spare: true}
		if err := o.reset(); err != nil {
			o.abort()
			return nil, err
		}
		return o, nil
	}
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*.tmp")
	if err != nil {
		return nil, &StateError{fmt.Errorf("state file %s: %w", path, err)}
	}
	o := &stateOut{path: path, f: f}
	if err := o.reset(); err != nil {
		o.abort()
		return nil, err
	}
	return o, nil
}

// reset empties the file and writes its start.
func (o *stateOut) reset() error {
	if _, err := o.f.Seek(0, io.SeekStart); err != nil {
		return &StateError{err}
	}
	// The spare's bytes are overwritten and the file cut at the end
	// (finish); a temporary file is emptied.
	if !o.spare {
		if err := o.f.Truncate(0); err != nil {
			return &StateError{err}
		}
	}
	f := o.f
	o.cw = &countWriter{w: f, writeback: func(off, n int64) { startWriteback(f, off, n) }}
	o.w = bufio.NewWriterSize(o.cw, 1<<16)
	o.sections = nil
	var b []byte
	b = binary.AppendVarint(b, int64(len(stateFileMagic)))
	b = append(b, stateFileMagic...)
	b = binary.AppendVarint(b, stateFileVersion)
	o.w.Write(b)
	return nil
}

func (o *stateOut) pos() int64 { return o.cw.n + int64(o.w.Buffered()) }

// write writes the saved tally of tl, which merges a resumed one. An
// error other than a stale or damaged saved state is a *StateError.
func (o *stateOut) write(tl *experiment.Tallier) error {
	from := o.pos()
	err := tl.WriteState(o.w)
	var stale *experiment.StaleStateError
	switch {
	case errors.As(err, &stale) || errors.Is(err, experiment.ErrStateFormat):
		return err
	case err != nil:
		return &StateError{fmt.Errorf("state file %s: %w", o.path, err)}
	}
	o.sections = append(o.sections, [2]int64{from, o.pos()})
	return nil
}

// finish writes the trailer, syncs the file and renames it over the old
// one; it returns the file's size.
func (o *stateOut) finish(def string, files []fileEntry, st ingest.Stats) (int64, error) {
	var t []byte
	num := func(v int64) { t = binary.AppendVarint(t, v) }
	str := func(s string) {
		num(int64(len(s)))
		t = append(t, s...)
	}
	str(buildVersion())
	str(def)
	num(int64(len(files)))
	for _, fe := range files {
		str(fe.path)
		num(fe.size)
		num(fe.modTime)
		str(fe.hash)
	}
	for _, v := range []int64{int64(st.Files), st.RowsRead, st.Rows, st.Filtered, st.FilteredMaxTS} {
		num(v)
	}
	num(int64(len(st.BadRows)))
	for _, b := range st.BadRows {
		str(b.Reason.String())
		num(b.Count)
	}
	num(int64(len(o.sections)))
	for _, s := range o.sections {
		num(s[0])
		num(s[1])
	}
	t = binary.LittleEndian.AppendUint32(t, uint32(len(t)))
	t = binary.LittleEndian.AppendUint32(t, crc32.Checksum(t[:len(t)-4], crc32.MakeTable(crc32.Castagnoli)))
	t = append(t, stateFileEnd...)
	o.w.Write(t)
	err := o.w.Flush()
	if err == nil && o.spare {
		err = o.f.Truncate(o.cw.n)
	}
	if err == nil {
		err = o.f.Sync()
	}
	if err == nil && o.spare {
		// Exchanged while the spare is still open and locked, so that no
		// other run writes it in between.
		err = replaceState(o.f.Name(), o.path)
	}
	if cerr := o.f.Close(); err == nil {
		err = cerr
	}
	if err == nil && !o.spare {
		err = os.Rename(o.f.Name(), o.path)
	}
	if err != nil {
		os.Remove(o.f.Name())
		return 0, &StateError{fmt.Errorf("state file %s: %w", o.path, err)}
	}
	return o.cw.n, nil
}

// abort removes the file being written.
func (o *stateOut) abort() {
	o.f.Close()
	os.Remove(o.f.Name())
}

// countWriter counts the bytes written through it. When writeback is set
// (startWriteback of the file w writes to), it is called for every
// writebackStep bytes written, so that the disk writes the state while
// the merge still computes it and the final sync waits for little: the
// sync of a 222 MB state took 0.38 s of a 0.75 s night
// (cmd/bench/BENCHMARKS.md).
type countWriter struct {
	w         io.Writer
	n         int64
	writeback func(off, n int64)
	started   int64 // bytes handed to writeback
}

// writebackStep is how many bytes a countWriter lets the page cache hold
// before it starts their writeback.
const writebackStep = 8 << 20

func (c *countWriter) Write(p []byte) (int, error) {
	n, err := c.w.Write(p)
	c.n += int64(n)
	if c.writeback != nil && c.n-c.started >= writebackStep {
		c.writeback(c.started, c.n-c.started)
		c.started = c.n
	}
	return n, err
}

// runWithState is Run with Options.State: it resumes from the state file
// when it can, reads every file otherwise, and saves the new state.
func runWithState(ctx context.Context, in Input, exps []Experiment, opts Options) (*Result, error) {
	if in.Shape != experiment.InputEventLog || in.Records != nil || opts.MemoryLimit > 0 {
		return nil, &ConfigError{errors.New("a state file applies to event logs read from files, without a memory limit")}
	}
	srcs, err := sources(in)
	if err != nil {
		return nil, err
	}
	files, err := manifest(srcs, in.FS == nil)
	if err != nil {
		return nil, err
	}
	def, err := definitionHash(in, exps)
	if err != nil {
		return nil, &ConfigError{err}
	}
	rep := StateReport{FilesTotal: len(srcs)}
	out, err := createStateOut(opts.State)
	if err != nil {
		return nil, err
	}
	// The audit table's unit records are read after the run: its saved
	// state is then read into memory rather than mapped.
	sf, fresh, why := planResume(opts.State, def, files, srcs, !opts.KeepUnits)
	var res *Result
	var talliers []*experiment.Tallier
	if sf != nil {
		if opts.BeforeRead != nil {
			opts.BeforeRead(sourceBytes(fresh))
		}
		res, talliers, why, err = resumeRun(ctx, in, exps, opts, sf, fresh, out)
		sf.close()
		if err != nil {
			out.abort()
			return nil, err
		}
		rep.Resumed, rep.FilesRead = res != nil, len(fresh)
	}
	if res == nil {
		rep.Recomputed, rep.Reason, rep.FilesRead = why != "", why, len(srcs)
		full := in
		full.Paths, full.FS, full.Sources = nil, nil, srcs
		if opts.BeforeRead != nil {
			opts.BeforeRead(sourceBytes(srcs))
		}
		if err = out.reset(); err == nil {
			res, talliers, err = runTalliers(ctx, full, exps, opts, nil, ingest.Stats{}, out)
		}
		if err != nil {
			out.abort()
			return nil, err
		}
		if why != "" {
			for i := range res.Readouts {
				r := &res.Readouts[i]
				r.Warnings = append(r.Warnings, experiment.Warning{Code: experiment.WarnStateRecomputed, Reason: why})
			}
		}
	}
	if rep.Bytes, err = out.finish(def, files, res.Stats); err != nil {
		return nil, err
	}
	for _, tl := range talliers {
		rep.Units += int64(tl.StateUnits())
	}
	res.State = &rep
	return res, nil
}

// resumeRun reads the new files on top of the saved tallies. It returns
// a nil Result and the reason when the run must read every file instead.
func resumeRun(ctx context.Context, in Input, exps []Experiment, opts Options, sf *stateFile, fresh []ingest.Source, out *stateOut) (*Result, []*experiment.Tallier, string, error) {
	var bad int64
	for _, b := range sf.stats.BadRows {
		bad += b.Count
	}
	sub := in
	sub.Paths, sub.FS, sub.Sources = nil, nil, fresh
	if in.MaxBadRows > 0 {
		if sub.MaxBadRows = in.MaxBadRows - bad; sub.MaxBadRows <= 0 {
			return nil, nil, "the saved rows used up the bad-row budget", nil
		}
	}
	if len(sf.sections) != len(exps) {
		return nil, nil, "the state file is damaged (another number of experiments)", nil
	}
	res, talliers, err := runTalliers(ctx, sub, exps, opts, sf, sf.stats, out)
	var stale *experiment.StaleStateError
	switch {
	case errors.As(err, &stale):
		return nil, nil, stale.Reason, nil
	case errors.Is(err, experiment.ErrStateFormat):
		return nil, nil, fmt.Sprintf("the state file is damaged: %v", err), nil
	case err != nil:
		var de *DataError
		if errors.As(err, &de) {
			// Reading every file gives the error a full run gives.
			return nil, nil, "reading the new files failed", nil
		}
		return nil, nil, "", err
	}
	if st := res.Stats; st.Filtered > 0 {
		for _, e := range exps {
			if e.Spec.AsOf != nil && st.FilteredMaxTS >= e.Spec.AsOf.UnixNano() {
				// The rows the reader leaves out move the freshness only
				// when all of them are before the as-of date
				// (Tallier.AddFiltered), which every file decides.
				return nil, nil, "rows of other events reach the as-of date: a rerun look is computed over every file", nil
			}
		}
	}
	if s := in.MaxBadShare; s > 0 {
		var total int64
		for _, b := range res.Stats.BadRows {
			total += b.Count
		}
		if total > 0 && float64(total) > s*float64(res.Stats.RowsRead) {
			return nil, nil, "the bad-row share is judged over every file", nil
		}
	}
	return res, talliers, "", nil
}

// StateError is a failure to write the state file of an incremental run.
type StateError struct{ Err error }

func (e *StateError) Error() string { return e.Err.Error() }
func (e *StateError) Unwrap() error { return e.Err }
