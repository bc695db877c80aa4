package specfile

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// hostileSpec is an input made to strain the parser: large, deeply nested
// or with one very long value.
type hostileSpec struct {
	name string
	data []byte
	want string // the start of the error, after "fuzz.toml"
}

// hostileSpecs returns the hostile inputs, nested deep levels and with
// values of size bytes; smaller ones seed FuzzSpecFile.
func hostileSpecs(deep, size int) []hostileSpec {
	return []hostileSpec{
		{"deep table header", []byte("[" + strings.Repeat("a.", deep) + "a]\n"),
			":1: nested more than 16 deep"},
		{"deep array", []byte("[input]\npaths = " + strings.Repeat("[", deep) + `"x"` + strings.Repeat("]", deep) + "\n"),
			":2: nested more than 16 deep"},
		{"deep inline table", []byte("x = " + strings.Repeat("{a = ", deep) + "1" + strings.Repeat("}", deep) + "\n"),
			":1: nested more than 16 deep"},
		{"deep dotted key", []byte(strings.Repeat("a.", deep) + "a = 1\n"),
			":1: nested more than 16 deep"},
		{"a long window", []byte("[[experiment]]\nkey = \"k\"\n[[experiment.metric]]\nname = \"buy\"\nevents = [\"buy\"]\nwindow = \"" + strings.Repeat("9", size) + "\"\n"),
			":6: experiment[0].metric[0].window: \"99999"},
		{"a long key", []byte(strings.Repeat("k", size) + " = 1\n"),
			":1:1: kkkk"},
		{"many unknown keys", []byte("[input]\n" + manyKeys(deep)),
			":2:1: input.k0: unknown key"},
		{"empty", nil, ": the file is empty"},
		{"blank", []byte(" \n\t\n"), ": the file is empty"},
		{"comments only", []byte("# a spec, one day\n"), ": the file has only comments"},
	}
}

func manyKeys(n int) string {
	var b strings.Builder
	for i := range n {
		fmt.Fprintf(&b, "k%d = 1\n", i)
	}
	return b.String()
}

// TestHostileSpecs checks the errors of the hostile inputs (nested 10,000
// deep, values of 1 MB, 10,000 unknown keys): each names
// the file (and the line where there is one), says what is wrong and is
// under 1 KB; before, a table nested 10,000 deep gave a 20 KB line and an
// empty file a message that did not name it.
func TestHostileSpecs(t *testing.T) {
	for _, h := range hostileSpecs(10_000, 1<<20) {
		start := time.Now()
		_, err := Parse("fuzz.toml", h.data)
		t.Logf("%s: %v", h.name, time.Since(start))
		var se *Error
		var ses Errors
		switch {
		case err == nil:
			t.Errorf("%s: no error", h.name)
		case !errors.As(err, &se) && !errors.As(err, &ses):
			t.Errorf("%s: error of type %T: %v", h.name, err, err)
		case !strings.HasPrefix(err.Error(), "fuzz.toml"+h.want):
			t.Errorf("%s:\n got  %.300s\n want a start %q", h.name, err, "fuzz.toml"+h.want)
		case len(err.Error()) >= 1<<10:
			t.Errorf("%s: error of %d bytes, want under 1 KB", h.name, len(err.Error()))
		}
	}
}

// TestSpecByteOrderMark checks that a UTF-8 byte-order mark at the start
// of a spec file is skipped (the Unicode standard, section 23.8, allows
// one in UTF-8; CSV inputs accept it too) and that lines and columns are
// still counted as an editor shows them.
func TestSpecByteOrderMark(t *testing.T) {
	spec := "[[experiment]]\nkey = \"k\"\n[[experiment.metric]]\nname = \"buy\"\nevents = [\"buy\"]\n"
	sf, err := Parse("s.toml", append([]byte("\ufeff"), spec...))
	if err != nil {
		t.Fatalf("with a byte-order mark: %v", err)
	}
	if len(sf.Experiments) != 1 || sf.Experiments[0].Key() != "k" {
		t.Errorf("parsed %d experiments", len(sf.Experiments))
	}
	_, err = Parse("s.toml", []byte("\ufeffnope = 1\n"))
	if want := "s.toml:1:1: nope: unknown key"; err == nil || !strings.HasPrefix(err.Error(), want) {
		t.Errorf("got %v, want an error starting %q", err, want)
	}
}

// TestReadRefusesLargeFiles checks that Read refuses a file over
// MaxFileSize, a regular file from its size and a device after reading
// just past the limit, so that --spec /dev/zero fails at once.
func TestReadRefusesLargeFiles(t *testing.T) {
	big := filepath.Join(t.TempDir(), "big.toml")
	if err := os.WriteFile(big, bytes.Repeat([]byte("#\n"), MaxFileSize/2+1), 0o644); err != nil {
		t.Fatal(err)
	}
	paths := []string{big}
	if _, err := os.Stat("/dev/zero"); err == nil {
		paths = append(paths, "/dev/zero")
	}
	for _, p := range paths {
		start := time.Now()
		_, err := Read(p)
		var se *Error
		if want := p + ": the file is larger than 4 MiB"; !errors.As(err, &se) || !strings.HasPrefix(err.Error(), want) {
			t.Errorf("%s: got %v, want an *Error starting %q", p, err, want)
		}
		if d := time.Since(start); d > 10*time.Second {
			t.Errorf("%s: took %v", p, d)
		}
	}
}

// TestReadLimit checks that the size limit can be raised and lowered: the
// same file is refused under a limit below its size and read past it.
func TestReadLimit(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.toml")
	spec := "[[experiment]]\nkey = \"e\"\n[[experiment.metric]]\nname = \"buy\"\nevents = [\"buy\"]\n"
	if err := os.WriteFile(path, []byte(spec), 0o644); err != nil {
		t.Fatal(err)
	}
	var se *Error
	if _, err := ReadLimit(path, int64(len(spec))-1); !errors.As(err, &se) || !strings.Contains(err.Error(), fmt.Sprintf("larger than %d bytes", len(spec)-1)) {
		t.Errorf("limit below the size: %v, want an *Error naming the limit", err)
	}
	if f, err := ReadLimit(path, int64(len(spec))); err != nil || len(f.Experiments) != 1 {
		t.Errorf("limit at the size: %v", err)
	}
	if _, err := ReadLimit(path, 0); err == nil {
		t.Error("limit 0: no error")
	}
}

// TestManyExperimentsParseFast checks that a spec file of 5,000
// experiments parses in well under 10 s with the right line in its
// errors: locating the keys counted lines from the start of the file for
// every key, which took minutes at 20,000 experiments.
func TestManyExperimentsParseFast(t *testing.T) {
	var b strings.Builder
	const n = 5000
	for i := range n {
		fmt.Fprintf(&b, "[[experiment]]\nkey = \"e%d\"\n[[experiment.metric]]\nname = \"buy\"\nevents = [\"buy\"]\n", i)
	}
	b.WriteString("nope = 1\n")
	start := time.Now()
	_, err := Parse("s.toml", []byte(b.String()))
	if d := time.Since(start); d > 10*time.Second {
		t.Errorf("parsing %d experiments took %v", n, d)
	}
	// Five lines per experiment, then the unknown key.
	if want := fmt.Sprintf("s.toml:%d:1: experiment[%d].metric[0].nope: unknown key", 5*n+1, n-1); err == nil || !strings.HasPrefix(err.Error(), want) {
		t.Errorf("got %.300v, want an error starting %q", err, want)
	}
}
