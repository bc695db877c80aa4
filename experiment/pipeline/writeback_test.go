package pipeline

import (
	"bytes"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
)

// TestCountWriterWriteback checks that a countWriter hands every byte it
// writes to its writeback, in order, in steps of at least writebackStep
// (the last, partial step is left to the final sync), and counts them
// all; and that a real file written through startWriteback reads back
// whole (common practice: the data must not change for a head start).
func TestCountWriterWriteback(t *testing.T) {
	var buf bytes.Buffer
	var steps [][2]int64
	c := &countWriter{w: &buf, writeback: func(off, n int64) { steps = append(steps, [2]int64{off, n}) }}
	rng := rand.New(rand.NewPCG(3, 4))
	chunk := make([]byte, 1<<20+17)
	total := int64(0)
	for range 40 {
		p := chunk[:rng.IntN(len(chunk))]
		if _, err := c.Write(p); err != nil {
			t.Fatal(err)
		}
		total += int64(len(p))
	}
	if c.n != total || int64(buf.Len()) != total {
		t.Fatalf("counted %d, wrote %d, want %d", c.n, buf.Len(), total)
	}
	if len(steps) == 0 {
		t.Fatalf("no writeback over %d bytes", total)
	}
	next := int64(0)
	for _, s := range steps {
		if s[0] != next || s[1] < writebackStep {
			t.Fatalf("writeback steps %v: step %v does not follow %d or is short", steps, s, next)
		}
		next += s[1]
	}
	if total-next >= writebackStep {
		t.Errorf("writeback stopped at %d of %d bytes", next, total)
	}

	f, err := os.Create(filepath.Join(t.TempDir(), "state"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	want := make([]byte, 3*writebackStep+5)
	for i := range want {
		want[i] = byte(rng.Uint32())
	}
	fc := &countWriter{w: f, writeback: func(off, n int64) { startWriteback(f, off, n) }}
	for p := want; len(p) > 0; {
		k := min(len(p), 1<<20)
		if _, err := fc.Write(p[:k]); err != nil {
			t.Fatal(err)
		}
		p = p[k:]
	}
	if err := f.Sync(); err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(f.Name())
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		t.Error("the file written with writeback differs from what was written")
	}
}
