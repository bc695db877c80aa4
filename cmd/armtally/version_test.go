package main

import (
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"runtime/debug"
	"strings"
	"testing"
)

// versionFormat is the documented form of the version line (common
// practice: one line, fields without spaces).
var versionFormat = regexp.MustCompile(`^armtally \S+ revision \S+ \S+\n$`)

// TestVersionLine checks the version line for the build informations a
// binary may carry (hand-written cases; the fields are those of
// runtime/debug.BuildInfo).
func TestVersionLine(t *testing.T) {
	rev := "442733553fec031ccffb3ce7a2f51579ecde376a"
	cases := []struct {
		name string
		info *debug.BuildInfo
		ok   bool
		want string
	}{
		{"no build information", nil, false, "armtally unknown revision unknown unknown"},
		{"tagged, clean tree", &debug.BuildInfo{GoVersion: "go1.26.8", Main: debug.Module{Version: "v1.4.0"},
			Settings: []debug.BuildSetting{{Key: "vcs", Value: "git"}, {Key: "vcs.revision", Value: rev}, {Key: "vcs.modified", Value: "false"}}},
			true, "armtally v1.4.0 revision " + rev + " go1.26.8"},
		{"modified tree", &debug.BuildInfo{GoVersion: "go1.26.8", Main: debug.Module{Version: "v0.0.0-20261205060028-442733553fec+dirty"},
			Settings: []debug.BuildSetting{{Key: "vcs.revision", Value: rev}, {Key: "vcs.modified", Value: "true"}}},
			true, "armtally v0.0.0-20261205060028-442733553fec+dirty revision " + rev + "-modified go1.26.8"},
		{"go run, no VCS stamp", &debug.BuildInfo{GoVersion: "go1.26.8", Main: debug.Module{Version: "(devel)"}},
			true, "armtally (devel) revision unknown go1.26.8"},
		{"modified without a revision", &debug.BuildInfo{GoVersion: "go1.26.8 X:nocoverageredesign", Main: debug.Module{Version: ""},
			Settings: []debug.BuildSetting{{Key: "vcs.modified", Value: "true"}}},
			true, "armtally unknown revision unknown go1.26.8_X:nocoverageredesign"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			got := versionLine(tc.info, tc.ok)
			if got != tc.want {
				t.Errorf("versionLine = %q, want %q", got, tc.want)
			}
			if !versionFormat.MatchString(got + "\n") {
				t.Errorf("%q does not have the documented form", got)
			}
		})
	}
}

// TestVersionCommand checks that --version and 'armtally version' print
// the same line, of the documented form, naming the Go version the
// runtime reports, and that an argument is a usage error.
func TestVersionCommand(t *testing.T) {
	code, long, stderr := runCmd(t, "--version")
	if code != exitOK || stderr != "" || !versionFormat.MatchString(long) {
		t.Fatalf("--version: exit %d, stdout %q, stderr %q", code, long, stderr)
	}
	if !strings.HasSuffix(long, " "+strings.Join(strings.Fields(runtime.Version()), "_")+"\n") {
		t.Errorf("--version %q does not end with the Go version %q", long, runtime.Version())
	}
	if code, short, _ := runCmd(t, "version"); code != exitOK || short != long {
		t.Errorf("version: exit %d, %q; want the --version line %q", code, short, long)
	}
	if code, _, stderr := runCmd(t, "version", "extra"); code != exitUsage || !strings.Contains(stderr, "unexpected arguments extra") {
		t.Errorf("version extra: exit %d, stderr %q", code, stderr)
	}
}

// TestVersionBuilt builds the command and checks its version line
// against what the Go toolchain's own reader of build information, 'go
// version -m', says of the same binary: the module version, the VCS
// revision and whether the tree was modified (when the build stamped
// them), and the Go version.
func TestVersionBuilt(t *testing.T) {
	bin := filepath.Join(t.TempDir(), "armtally")
	build := exec.Command("go", "build", "-buildvcs=auto", "-o", bin, ".")
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	out, err := exec.Command(bin, "--version").Output()
	if err != nil {
		t.Fatalf("%s --version: %v", bin, err)
	}
	meta, err := exec.Command("go", "version", "-m", bin).Output()
	if err != nil {
		t.Fatalf("go version -m: %v", err)
	}
	// go version -m prints "BIN: GOVERSION", then tab-separated lines
	// such as "mod PATH VERSION" and "build vcs.revision=REV".
	lines := strings.Split(string(meta), "\n")
	_, goVersion, _ := strings.Cut(lines[0], ": ")
	version, revision, modified := "unknown", "unknown", false
	for _, l := range lines[1:] {
		f := strings.Split(strings.TrimSpace(l), "\t")
		switch {
		case len(f) >= 3 && f[0] == "mod":
			version = f[2]
		case len(f) == 2 && f[0] == "build" && strings.HasPrefix(f[1], "vcs.revision="):
			revision = strings.TrimPrefix(f[1], "vcs.revision=")
		case len(f) == 2 && f[0] == "build" && f[1] == "vcs.modified=true":
			modified = true
		}
	}
	if modified && revision != "unknown" {
		revision += "-modified"
	}
	want := "armtally " + version + " revision " + revision + " " + strings.Join(strings.Fields(goVersion), "_") + "\n"
	if string(out) != want {
		t.Errorf("--version of the built binary: %q, want %q (from go version -m:\n%s)", out, want, meta)
	}
}
