package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/armtally/armtally/report"
)

// commandEnv, set to 1, makes the test binary run as armtally (see
// TestMain): the signal tests need a process of their own.
const commandEnv = "ARMTALLY_TEST_AS_COMMAND"

func TestMain(m *testing.M) {
	if os.Getenv(commandEnv) == "1" {
		os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
	}
	os.Exit(m.Run())
}

// writeTestFile writes content to dir/name and returns the path.
func writeTestFile(t *testing.T, dir, name, content string) string {
	t.Helper()
	path := filepath.Join(dir, name)
	if err := os.WriteFile(path, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// fileContent returns the content of path, "<none>" when it does not
// exist.
func fileContent(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if errors.Is(err, os.ErrNotExist) {
		return "<none>"
	}
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// Output paths that would destroy an input or another output, or fail
// after the analysis, are refused with exit 2 before any input is read:
// the input here is not a valid log (reading it is exit 3), and every
// file stays as it was.
func TestOutputPathsRefused(t *testing.T) {
	dir := t.TempDir()
	good := spillLog(t, dir, 30)
	goodBefore := fileContent(t, good)
	bad := writeTestFile(t, dir, "bad.csv", "user_id,ts,event,experiment,arm\nu1,not a time,exposure,exp,control\n")
	okJSON := writeTestFile(t, dir, "ok.json", "{\"old\": true}\n")
	spec := writeTestFile(t, dir, "spec.toml", "[[experiment]]\nkey = \"exp\"\n[[experiment.metric]]\nname = \"purchase\"\nevents = [\"purchase\"]\n")
	link := filepath.Join(dir, "link.csv")
	if err := os.Symlink(good, link); err != nil {
		t.Fatal(err)
	}
	hard := filepath.Join(dir, "hard.md")
	if err := os.Link(good, hard); err != nil {
		t.Fatal(err)
	}
	exp := []string{"--experiment", "exp", "--metric", "purchase"}
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"--out is the input", []string{good, "--out", good}, "--out " + good + " is an input"},
		{"--json is the input", []string{good, "--json", good}, "--json " + good + " is an input"},
		{"--audit is the input", []string{good, "--audit", good}, "--audit " + good + " is an input"},
		{"--out links to the input", []string{good, "--out", link}, "is an input"},
		{"--out is a hard link of the input", []string{good, "--out", hard}, "is an input"},
		{"--out is the spec file", []string{"--spec", spec, good, "--out", spec}, "is an input"},
		{"--out in the input's folder by another name", []string{good, "--out", filepath.Join(dir, ".", "log.csv")}, "is an input"},
		{"--json and --out the same file", []string{bad, "--json", filepath.Join(dir, "r.out"), "--out", filepath.Join(dir, "r.out")}, "are the same file"},
		{"--json and --out the same file through a link", []string{bad, "--json", okJSON, "--out", filepath.Join(dir, "ok-link.json")}, "are the same file"},
		{"--out in a missing folder", []string{bad, "--json", okJSON, "--out", filepath.Join(dir, "missing-dir", "x.md")}, "does not exist"},
		{"--out a folder", []string{bad, "--json", okJSON, "--out", dir}, "is a folder"},
		{"--audit -", []string{bad, "--audit", "-"}, "--audit -"},
		{"--json - with the Markdown on stdout", []string{bad, "--json", "-"}, "--json -"},
		{"--json - and --out -", []string{bad, "--json", "-", "--out", "-"}, "--json -"},
		{"--spill-dir without --memory-limit", []string{bad, "--spill-dir", dir}, "--spill-dir"},
		{"--brief is the input", []string{good, "--brief", good}, "--brief " + good + " is an input"},
		{"--brief and --out the same file", []string{bad, "--brief", filepath.Join(dir, "r.out"), "--out", filepath.Join(dir, "r.out")}, "are the same file"},
		{"--brief -", []string{bad, "--brief", "-"}, "--brief -"},
		{"--state is the input", []string{good, "--state", good}, "--state " + good + " is an input"},
		{"--state and --out the same file", []string{bad, "--state", filepath.Join(dir, "r.out"), "--out", filepath.Join(dir, "r.out")}, "are the same file"},
		{"--state -", []string{bad, "--state", "-"}, "--state -"},
		{"--state read as input by the next run", []string{dir, "--state", filepath.Join(dir, "sub", "tally.parquet")}, "--state " + filepath.Join(dir, "sub", "tally.parquet") + " is inside the input folder " + dir},
		{"--audit read as input by the next run", []string{dir, "--audit", filepath.Join(dir, "units.csv.gz")}, "is inside the input folder"},
	}
	if err := os.Mkdir(filepath.Join(dir, "sub"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(okJSON, filepath.Join(dir, "ok-link.json")); err != nil {
		t.Fatal(err)
	}
	if os.Getuid() != 0 {
		ro := filepath.Join(dir, "read-only")
		if err := os.Mkdir(ro, 0o555); err != nil {
			t.Fatal(err)
		}
		tests = append(tests, struct {
			name string
			args []string
			want string
		}{"--out in a folder that cannot be written", []string{bad, "--json", okJSON, "--out", filepath.Join(ro, "x.md")}, "cannot write"})
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			args := append(append([]string{"analyze"}, tc.args...), exp...)
			code, stdout, stderr := runCmd(t, args...)
			if code != exitUsage || !strings.Contains(stderr, tc.want) {
				t.Errorf("exit %d, stderr %q; want %d and %q", code, stderr, exitUsage, tc.want)
			}
			if stdout != "" {
				t.Errorf("stdout %q, want nothing", stdout)
			}
			if got := fileContent(t, good); got != goodBefore {
				t.Errorf("the input was changed")
			}
			if got := fileContent(t, okJSON); got != "{\"old\": true}\n" {
				t.Errorf("ok.json holds %q, want its old content", got)
			}
			if got := fileContent(t, filepath.Join(dir, "r.out")); got != "<none>" {
				t.Errorf("r.out was written: %q", got)
			}
		})
	}
}

// An output below an input folder is refused only when a folder walk
// would read it: a known extension and no '.' or '_' on the way.
func TestOutsideInputFolders(t *testing.T) {
	dir := t.TempDir()
	for _, sub := range []string{"a", "_tmp", ".hidden"} {
		if err := os.Mkdir(filepath.Join(dir, sub), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	outside := t.TempDir()
	for _, tc := range []struct {
		path    string
		refused bool
	}{
		{filepath.Join(dir, "state.parquet"), true},
		{filepath.Join(dir, "a", "state.PARQ"), true},
		{filepath.Join(dir, "a", "units.csv"), true},
		{filepath.Join(dir, "state.bin"), false},
		{filepath.Join(dir, "_state.parquet"), false},
		{filepath.Join(dir, ".state.parquet"), false},
		{filepath.Join(dir, "_tmp", "state.parquet"), false},
		{filepath.Join(dir, ".hidden", "x.csv"), false},
		{filepath.Join(outside, "state.parquet"), false},
		{filepath.Join(dir + "-sibling.parquet"), false},
	} {
		err := checkOutsideInputFolders([]report.OutputPath{{From: "--state", Path: tc.path}}, []string{dir})
		if (err != nil) != tc.refused {
			t.Errorf("%s: error %v, want refused %v", tc.path, err, tc.refused)
		}
	}
	// A file argument is not a folder: outputs beside it are not read.
	log := filepath.Join(dir, "log.csv")
	if err := os.WriteFile(log, []byte("x\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := checkOutsideInputFolders([]report.OutputPath{{From: "--state", Path: filepath.Join(dir, "state.parquet")}}, []string{log}); err != nil {
		t.Errorf("output beside a file argument: %v", err)
	}
}

// A failed audit table (its experiments' files cannot be told apart)
// replaces neither readout: all outputs are checked before the run, and
// written together after it.
func TestOutputsTogether(t *testing.T) {
	dir := t.TempDir()
	in := spillLog(t, dir, 30)
	md := writeTestFile(t, dir, "r.md", "old md\n")
	js := writeTestFile(t, dir, "r.json", "old json\n")
	spec := writeTestFile(t, dir, "two.toml", "[[experiment]]\nkey = \"a/b\"\n[[experiment.metric]]\nname = \"purchase\"\nevents = [\"purchase\"]\n"+
		"[[experiment]]\nkey = \"a_b\"\n[[experiment.metric]]\nname = \"purchase\"\nevents = [\"purchase\"]\n")
	code, _, stderr := runCmd(t, "analyze", "--spec", spec, in, "--out", md, "--json", js, "--audit", filepath.Join(dir, "u.parquet"))
	if code != exitUsage || !strings.Contains(stderr, "are the same file") {
		t.Errorf("exit %d, stderr %q; want %d naming the audit files", code, stderr, exitUsage)
	}
	if fileContent(t, md) != "old md\n" || fileContent(t, js) != "old json\n" {
		t.Errorf("a readout was replaced")
	}
}

// An output that is a symbolic link stays a link, and the file it points
// to gets the readout; `-` is standard output.
func TestOutputSymlinkAndStdout(t *testing.T) {
	dir := t.TempDir()
	in := spillLog(t, dir, 30)
	exp := []string{"--experiment", "exp", "--metric", "purchase"}
	code, wantMD, stderr := runCmd(t, append([]string{"analyze", in}, exp...)...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	target := writeTestFile(t, dir, "target.md", "old\n")
	link := filepath.Join(dir, "link.md")
	if err := os.Symlink("target.md", link); err != nil {
		t.Fatal(err)
	}
	js := filepath.Join(dir, "r.json")
	if code, _, stderr := runCmd(t, append([]string{"analyze", in, "--out", link, "--json", js}, exp...)...); code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if fi, err := os.Lstat(link); err != nil || fi.Mode()&os.ModeSymlink == 0 {
		t.Errorf("link.md is no longer a symbolic link (%v)", err)
	}
	if got := fileContent(t, target); got != wantMD {
		t.Errorf("the link's target does not hold the readout: %q", got)
	}
	code, stdout, stderr := runCmd(t, append([]string{"analyze", in, "--out", "-"}, exp...)...)
	if code != exitOK || stdout != wantMD {
		t.Errorf("--out -: exit %d (%s), stdout differs from the default: %v", code, stderr, stdout != wantMD)
	}
	code, stdout, stderr = runCmd(t, append([]string{"analyze", in, "--json", "-", "--out", filepath.Join(dir, "x.md")}, exp...)...)
	if code != exitOK || stdout != fileContent(t, js) {
		t.Errorf("--json -: exit %d (%s), stdout %.60q is not the JSON readout", code, stderr, stdout)
	}
	if got := fileContent(t, filepath.Join(dir, "-")); got != "<none>" {
		t.Errorf("a file named - was written")
	}
}

// startCommand starts the test binary as armtally with args.
func startCommand(t *testing.T, args ...string) (*exec.Cmd, *bytes.Buffer) {
	t.Helper()
	cmd := exec.Command(os.Args[0], args...)
	cmd.Env = append(os.Environ(), commandEnv+"=1")
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	return cmd, &stderr
}

// waitForEntry waits until dir holds an entry, and says whether it did
// before the deadline.
func waitForEntry(dir string, deadline time.Time) bool {
	for time.Now().Before(deadline) {
		if entries, _ := os.ReadDir(dir); len(entries) > 0 {
			return true
		}
		time.Sleep(time.Millisecond)
	}
	return false
}

// SIGINT and SIGTERM during a --memory-limit run (a process of its own)
// stop it with 130 and 143 (128 plus the signal's number, the shell's
// convention): the spill folder is removed and no output or temporary
// file is left.
func TestSignalRemovesSpill(t *testing.T) {
	if _, err := os.Stat("/proc/self"); err != nil {
		t.Skip("signals to a child process: tested on Linux")
	}
	in := spillLog(t, t.TempDir(), 60000)
	for _, c := range []struct {
		sig  syscall.Signal
		code int
		name string
	}{{syscall.SIGINT, exitInterrupted, "SIGINT"}, {syscall.SIGTERM, exitTerminated, "SIGTERM"}} {
		t.Run(c.name, func(t *testing.T) {
			spillDir, outDir := t.TempDir(), t.TempDir()
			cmd, stderr := startCommand(t, "analyze", in, "--experiment", "exp", "--metric", "purchase=purchase:2d",
				"--memory-limit", "1MB", "--spill-dir", spillDir, "--json", filepath.Join(outDir, "r.json"), "--out", filepath.Join(outDir, "r.md"))
			if !waitForEntry(spillDir, time.Now().Add(10*time.Second)) {
				cmd.Process.Kill()
				cmd.Wait()
				t.Fatalf("no spill folder appeared; stderr %q", stderr)
			}
			if err := cmd.Process.Signal(c.sig); err != nil {
				t.Fatal(err)
			}
			cmd.Wait()
			if got := cmd.ProcessState.ExitCode(); got != c.code {
				t.Fatalf("exit %d, want %d; stderr %q", got, c.code, stderr)
			}
			if !strings.Contains(stderr.String(), "interrupted by "+c.name) {
				t.Errorf("stderr %q does not name the signal", stderr)
			}
			for _, d := range []string{spillDir, outDir} {
				if left, _ := os.ReadDir(d); len(left) != 0 {
					t.Errorf("%d entries left in %s: %v", len(left), d, left[0].Name())
				}
			}
		})
	}
}

// A spill folder whose marker names a process that no longer runs (a run
// killed outright) is removed by the next --memory-limit run in the same
// place, which says so; a live one is kept.
func TestStaleSpillRemoved(t *testing.T) {
	if _, err := os.Stat("/proc/self/stat"); err != nil {
		t.Skip("no /proc to tell which processes run")
	}
	dir := t.TempDir()
	in := spillLog(t, dir, 30)
	dead := exec.Command(os.Args[0], "-test.run=^$")
	if err := dead.Run(); err != nil {
		t.Fatal(err)
	}
	spillDir := t.TempDir()
	stale := filepath.Join(spillDir, "armtally-spill-1234")
	live := filepath.Join(spillDir, "armtally-spill-5678")
	for _, d := range []struct {
		path string
		pid  int
	}{{stale, dead.Process.Pid}, {live, os.Getpid()}} {
		if err := os.Mkdir(d.path, 0o755); err != nil {
			t.Fatal(err)
		}
		writeTestFile(t, d.path, "part-0000.rows", "rows")
		writeTestFile(t, d.path, "owner", fmt.Sprintf("pid %d\nstart \n", d.pid))
	}
	code, _, stderr := runCmd(t, "analyze", in, "--experiment", "exp", "--metric", "purchase",
		"--memory-limit", "1MB", "--spill-dir", spillDir, "--out", filepath.Join(dir, "r.md"))
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if _, err := os.Stat(stale); !os.IsNotExist(err) {
		t.Errorf("the stale spill folder is still there (%v)", err)
	}
	if !strings.Contains(stderr, "removed "+stale) {
		t.Errorf("stderr %q does not say the stale folder was removed", stderr)
	}
	if _, err := os.Stat(live); err != nil {
		t.Errorf("the live process's folder was removed: %v", err)
	}
}

// A signal that arrives after the analysis, while the outputs are
// written, replaces no output, leaves no temporary file and ends with
// the signal's exit code.
func TestSignalWhileWriting(t *testing.T) {
	dir := t.TempDir()
	in := spillLog(t, dir, 300)
	md := writeTestFile(t, dir, "r.md", "old md\n")
	js := filepath.Join(dir, "r.json")
	var stdout, stderr bytes.Buffer
	run, err := parseAnalyze([]string{in, "--experiment", "exp", "--metric", "purchase", "--out", md, "--json", js, "--audit", filepath.Join(dir, "u.parquet")}, &stdout, &stderr)
	if err != nil {
		t.Fatal(err)
	}
	res, err := analyze(context.Background(), run)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		sig  os.Signal
		code int
	}{{os.Interrupt, exitInterrupted}, {syscall.SIGTERM, exitTerminated}} {
		ctx, cancel := context.WithCancelCause(context.Background())
		cancel(&signalError{c.sig})
		err = writeOutputs(ctx, run, res, &stdout)
		if got := exitCode(err, &stderr); got != c.code {
			t.Errorf("%v: exit %d, want %d (%v)", c.sig, got, c.code, err)
		}
		if fileContent(t, md) != "old md\n" {
			t.Errorf("%v: the Markdown readout was replaced", c.sig)
		}
		entries, err := os.ReadDir(dir)
		if err != nil {
			t.Fatal(err)
		}
		if len(entries) != 2 {
			t.Errorf("%v: the folder holds %d entries, want the log and r.md only", c.sig, len(entries))
		}
	}
	if stdout.Len() != 0 {
		t.Errorf("stdout %q, want nothing", stdout.String())
	}
}
