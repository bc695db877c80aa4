package report

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestCheckOutputPaths(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "events.csv")
	if err := os.WriteFile(in, []byte("user_id\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	link := filepath.Join(dir, "link.md")
	if err := os.Symlink(in, link); err != nil {
		t.Fatal(err)
	}
	md, js := filepath.Join(dir, "r.md"), filepath.Join(dir, "r.json")
	for _, tc := range []struct {
		name string
		outs []OutputPath
		want string // "" for no error
	}{
		{"two new files", []OutputPath{{"--out", md}, {"--json", js}}, ""},
		{"the device twice", []OutputPath{{"--out", os.DevNull}, {"--json", os.DevNull}}, ""},
		{"an input", []OutputPath{{"--out", in}}, "is an input of the run"},
		{"a link to an input", []OutputPath{{"--out", link}}, "is an input of the run"},
		{"one file twice", []OutputPath{{"--out", md}, {"--json", md}}, "are the same file"},
		{"a folder", []OutputPath{{"--out", dir}}, "is a folder"},
		{"a missing folder", []OutputPath{{"--out", filepath.Join(dir, "no", "r.md")}}, "does not exist"},
	} {
		err := CheckOutputPaths(tc.outs, []string{in})
		if tc.want == "" && err != nil || tc.want != "" && (err == nil || !strings.Contains(err.Error(), tc.want)) {
			t.Errorf("%s: error %v, want %q", tc.name, err, tc.want)
		}
	}
	if b, err := os.ReadFile(in); err != nil || string(b) != "user_id\n" {
		t.Errorf("the input changed: %q, %v", b, err)
	}
}
