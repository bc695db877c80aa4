package ingest

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// parquet-go v0.32.0 prints one line of its own, with the builtin println
// (straight to the process's standard error, not through the log package),
// when a BYTE_ARRAY page that is not dictionary-encoded decodes to another
// number of values than its header gives (page_byte_array.go,
// newByteArrayPage):
//
//	parquet: warning: column C byte array page has N offsets but numValues is M (expected M+1 offsets)
//
// armtally cannot capture it without redirecting the process's standard
// error, which a library must not do, so it documents it (DEVELOPERS.md):
// the line comes before armtally's own error about the page, or before a
// read that goes on. This test runs reads in a child process and checks
// what reaches its standard error: a file written by parquet-go (data page
// v2, user_id PLAIN) with each bit of the first 30 bytes of the user_id
// column chunk (its first page header) flipped in turn; some of those
// flips change the header's value or null count, and the warning is the
// only thing printed.
func TestParquetGoWarningLine(t *testing.T) {
	if os.Getenv("ARMTALLY_WARNING_CHILD") == "1" {
		rng := rand.New(rand.NewPCG(21, 23))
		data := writeParquet(t, randomBulkRows(rng, 60))
		pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
		if err != nil {
			t.Fatal(err)
		}
		md := pf.Metadata().RowGroups[0].Columns[0].MetaData
		start := chunkStart(&md)
		for pos := start; pos < start+30; pos++ {
			for bit := range 8 {
				bad := bytes.Clone(data)
				bad[pos] ^= 1 << bit
				fmt.Fprintf(os.Stderr, "flip %d %d\n", pos, bit)
				_, _, err = readAll(t, []Source{BytesSource("f.parquet", bad)}, Options{Mapping: Mapping{User: "user_id", TS: "ts", Event: "event"}, MaxBadRows: NoLimit})
				if err != nil && !strings.HasPrefix(err.Error(), "f.parquet: ") {
					t.Errorf("error does not name the file: %v", err)
				}
			}
		}
		return
	}
	cmd := exec.Command(os.Args[0], "-test.run=^TestParquetGoWarningLine$")
	cmd.Env = append(os.Environ(), "ARMTALLY_WARNING_CHILD=1")
	var stdout, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("child: %v\n%s%s", err, stdout.String(), stderr.String())
	}
	warnings := 0
	for _, line := range strings.Split(strings.TrimSuffix(stderr.String(), "\n"), "\n") {
		switch {
		case strings.HasPrefix(line, "flip "):
		case strings.HasPrefix(line, "parquet: warning: column 0 byte array page has ") && strings.Contains(line, " offsets but numValues is "):
			warnings++
		default:
			t.Errorf("child printed %q", line)
		}
	}
	if warnings == 0 {
		t.Errorf("no parquet-go warning line; its standard error:\n%s", stderr.String())
	}
	t.Logf("%d of 240 flips made parquet-go print its warning", warnings)
}
