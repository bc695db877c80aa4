package main

import (
	"fmt"
	"io"
	"runtime/debug"
	"strings"
)

// versionLine returns the line that --version and 'armtally version'
// print, from the build information of the binary (ok false when it has
// none):
//
//	armtally VERSION revision REVISION GOVERSION
//
// VERSION is the main module's version ("(devel)" for a build from a
// working tree without a version, "unknown" without build information);
// REVISION is the commit the binary was built from (vcs.revision), with
// "-modified" appended when the working tree had uncommitted changes
// (vcs.modified), or "unknown"; GOVERSION is the Go toolchain that built
// it ("unknown" without build information). The five fields are
// separated by single spaces and none holds a space.
func versionLine(info *debug.BuildInfo, ok bool) string {
	version, revision, goVersion := "unknown", "unknown", "unknown"
	if ok && info != nil {
		if v := strings.TrimSpace(info.Main.Version); v != "" {
			version = v
		}
		if info.GoVersion != "" {
			goVersion = info.GoVersion
		}
		modified := false
		for _, s := range info.Settings {
			switch s.Key {
			case "vcs.revision":
				if s.Value != "" {
					revision = s.Value
				}
			case "vcs.modified":
				modified = s.Value == "true"
			}
		}
		if modified && revision != "unknown" {
			revision += "-modified"
		}
	}
	field := func(s string) string { return strings.Join(strings.Fields(s), "_") }
	return fmt.Sprintf("armtally %s revision %s %s", field(version), field(revision), field(goVersion))
}

// runVersion prints the version line of the running binary.
func runVersion(args []string, stdout io.Writer) error {
	if len(args) > 0 {
		return usagef("version: unexpected arguments %s", strings.Join(args, " "))
	}
	info, ok := debug.ReadBuildInfo()
	_, err := fmt.Fprintln(stdout, versionLine(info, ok))
	return err
}
