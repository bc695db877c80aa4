package pipeline

import (
	"bytes"
	"testing"
)

// The recycler's sizes and reuse; the sizes are powers of two from 64
// bytes (common practice for size-class allocators).
func TestRecycler(t *testing.T) {
	a := new(recycler)
	for _, tc := range []struct{ size, cap int }{{0, 64}, {1, 64}, {64, 64}, {65, 128}, {4096, 4096}, {4097, 8192}, {1 << 20, 1 << 20}} {
		b := a.Allocate(tc.size)
		if len(b) != tc.size || cap(b) != tc.cap {
			t.Errorf("Allocate(%d): len %d cap %d, want %d and %d", tc.size, len(b), cap(b), tc.size, tc.cap)
		}
		a.Free(b)
	}
	b := a.Allocate(100)
	for i := range b {
		b[i] = byte(i)
	}
	want := bytes.Clone(b)
	c := a.Reallocate(1000, b)
	if len(c) != 1000 || cap(c) != 1024 || !bytes.Equal(c[:100], want) {
		t.Fatalf("Reallocate(1000): len %d cap %d, first bytes kept %v", len(c), cap(c), bytes.Equal(c[:100], want))
	}
	if d := a.Reallocate(10, c); len(d) != 10 || cap(d) != 1024 || !bytes.Equal(d, want[:10]) {
		t.Fatalf("Reallocate(10) of a 1024-byte block: len %d cap %d", len(d), cap(d))
	}
	// A buffer that is not one of its blocks is left alone.
	a.Free(make([]byte, 100))
	a.Free(nil)
}
