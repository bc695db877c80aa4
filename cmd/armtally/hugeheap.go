package main

// Sizes of the heap advised for huge pages before a run (see
// hugepage.PrepareHeap): three times the input's bytes (a 10M-unit snappy
// Parquet log of 710 MB peaks at about 950 MB resident), at most 2 GiB
// and an eighth of the machine's memory, and nothing for inputs under
// 16 MiB, where the run is short and the advice not worth the collection
// it costs. An advised page costs nothing until the run touches it; a
// larger reservation cost more in the runtime's own bookkeeping than it
// saved (cmd/bench/BENCHMARKS.md).
const (
	hugeHeapMinInput = 16 << 20
	hugeHeapMax      = 2 << 30
)

// hugeHeapSize returns how much of the heap to advise for an input of
// inputBytes on a machine with physical bytes of memory (0: unknown),
// 0 for none.
func hugeHeapSize(inputBytes, physical int64) int64 {
	if inputBytes < hugeHeapMinInput {
		return 0
	}
	n := int64(hugeHeapMax)
	if inputBytes < n/3 {
		n = 3 * inputBytes
	}
	if physical > 0 {
		n = min(n, physical/8)
	}
	return n
}
