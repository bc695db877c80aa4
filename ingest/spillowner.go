package ingest

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"
)

// spillPrefix starts the name of every spill folder.
const spillPrefix = "armtally-spill-"

// spillMarker is the file in a spill folder that names its owner: lines
// "pid N" and "start T", T the process's start time in clock ticks after
// boot (field 22 of /proc/PID/stat), empty where the system does not tell.
const spillMarker = "owner"

// writeSpillMarker writes the marker of the running process into dir.
func writeSpillMarker(dir string) error {
	start, _ := processStart(os.Getpid())
	body := fmt.Sprintf("pid %d\nstart %s\n", os.Getpid(), start)
	return os.WriteFile(filepath.Join(dir, spillMarker), []byte(body), 0o644)
}

// readSpillMarker returns the process id and start time of a marker.
func readSpillMarker(path string) (pid int, start string, err error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return 0, "", err
	}
	seen := false
	for _, line := range strings.Split(string(b), "\n") {
		k, v, _ := strings.Cut(line, " ")
		switch k {
		case "pid":
			if pid, err = strconv.Atoi(v); err != nil || pid <= 0 {
				return 0, "", fmt.Errorf("%s: bad pid line %q", path, line)
			}
			seen = true
		case "start":
			start = v
		}
	}
	if !seen {
		return 0, "", fmt.Errorf("%s: no pid line", path)
	}
	return pid, start, nil
}

// processStart returns the start time of process pid as /proc/PID/stat
// gives it (clock ticks after boot). The error wraps fs.ErrNotExist when
// no such process runs, or when the system has no /proc to ask.
func processStart(pid int) (string, error) {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if err != nil {
		return "", err
	}
	// The second field, the command, is in parentheses and may hold
	// spaces: the fields after the last ')' start with the third.
	i := strings.LastIndexByte(string(b), ')')
	if i < 0 {
		return "", fmt.Errorf("/proc/%d/stat: no command field", pid)
	}
	fields := strings.Fields(string(b[i+1:]))
	if len(fields) < 20 {
		return "", fmt.Errorf("/proc/%d/stat: %d fields", pid, len(fields)+2)
	}
	return fields[19], nil
}

// spillOwnerGone says whether the process that made a spill folder, by
// its marker, no longer runs: its /proc entry is absent, or the process of
// that id started at another time (the id was reused). Without /proc (a
// system other than Linux) or a readable marker it cannot tell and says
// false.
func spillOwnerGone(markerPath string) bool {
	if _, err := processStart(os.Getpid()); err != nil {
		return false
	}
	pid, start, err := readSpillMarker(markerPath)
	if err != nil {
		return false
	}
	got, err := processStart(pid)
	if errors.Is(err, fs.ErrNotExist) {
		return true
	}
	return err == nil && start != "" && got != start
}

// RemoveStaleSpills removes the spill folders (armtally-spill-*) in dir
// ("" is the system's temporary folder) whose marker names a process that
// no longer runs: left behind by a run that was killed (SIGKILL, a crash,
// a power cut) before it could remove its own. It returns the folders
// removed, and an error naming each stale folder it could not remove. A
// dir that does not exist holds no stale folder.
//
// Only Linux tells whether a process runs (through /proc); elsewhere
// nothing is removed. A folder without a readable marker (one being made
// at this moment, or one of an armtally that wrote no marker) is left
// alone.
func RemoveStaleSpills(dir string) (removed []string, err error) {
	if dir == "" {
		dir = os.TempDir()
	}
	entries, err := os.ReadDir(dir)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("spill: looking for stale spill folders: %w", err)
	}
	var errs []error
	for _, e := range entries {
		if !e.IsDir() || !strings.HasPrefix(e.Name(), spillPrefix) {
			continue
		}
		path := filepath.Join(dir, e.Name())
		if !spillOwnerGone(filepath.Join(path, spillMarker)) {
			continue
		}
		if err := os.RemoveAll(path); err != nil {
			errs = append(errs, fmt.Errorf("spill: cannot remove the stale spill folder %s: %w", path, err))
			continue
		}
		removed = append(removed, path)
	}
	return removed, errors.Join(errs...)
}
