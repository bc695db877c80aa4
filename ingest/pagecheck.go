package ingest

import (
	"fmt"
	"io"

	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"
	"github.com/pierrec/lz4/v4"
)

// checkLZ4Chunk decompresses every page of an LZ4_RAW column chunk once,
// into a buffer of exactly the size its page header gives, before
// parquet-go reads the chunk. parquet-go v0.32.0 retries a block that fails
// to decompress with an output buffer twice as large, without end, so a
// single corrupt byte in an LZ4_RAW page makes it allocate until the
// process dies (measured on parquet-testing's lz4_raw_compressed.parquet).
// A page that does not decompress to its stated size is ErrCorrupt.
//
// The cost is one extra decompression of LZ4_RAW chunks only; other codecs
// are not touched. start and size are the chunk's bytes in the file, which
// checkChunk has already found inside it.
func checkLZ4Chunk(r io.ReaderAt, start, size int64) error {
	chunk := make([]byte, size)
	if _, err := r.ReadAt(chunk, start); err != nil {
		return fmt.Errorf("reading the column chunk: %w", err)
	}
	var proto thrift.CompactProtocol
	var dst []byte
	for page, pos := 0, 0; pos < len(chunk); page++ {
		pr := proto.NewReaderFromBytes(chunk[pos:])
		var h format.PageHeader
		if err := thrift.NewDecoder(pr).Decode(&h); err != nil {
			return fmt.Errorf("%w: page %d: header: %w", ErrCorrupt, page, err)
		}
		pos += pr.BytesRead()
		comp, uncomp := int(h.CompressedPageSize), int(h.UncompressedPageSize)
		if comp < 0 || uncomp < 0 || comp > len(chunk)-pos {
			return fmt.Errorf("%w: page %d: header claims %d bytes (%d uncompressed), %d left in the chunk",
				ErrCorrupt, page, comp, uncomp, len(chunk)-pos)
		}
		body := chunk[pos : pos+comp]
		pos += comp
		switch h.Type {
		case format.DataPage, format.DictionaryPage:
		case format.DataPageV2:
			v2, ok := h.DataPageHeaderV2.Get()
			if !ok {
				return fmt.Errorf("%w: page %d: a data page v2 without its header", ErrCorrupt, page)
			}
			if c, ok := v2.IsCompressed.Get(); ok && !c {
				continue
			}
			// The levels come first and are not compressed.
			levels := int(v2.DefinitionLevelsByteLength) + int(v2.RepetitionLevelsByteLength)
			if levels < 0 || levels > comp || levels > uncomp {
				return fmt.Errorf("%w: page %d: %d bytes of levels in a page of %d", ErrCorrupt, page, levels, comp)
			}
			body, uncomp = body[levels:], uncomp-levels
		default:
			continue // index pages and others carry no LZ4 data
		}
		// An LZ4 block expands at most about 255 times: a header that
		// claims more is corrupt, and is not allowed to allocate it.
		if uncomp > 255*len(body)+64 {
			return fmt.Errorf("%w: page %d: %d compressed bytes cannot hold %d", ErrCorrupt, page, len(body), uncomp)
		}
		if cap(dst) < uncomp {
			dst = make([]byte, uncomp)
		}
		n, err := lz4.UncompressBlock(body, dst[:uncomp])
		if err != nil || n != uncomp {
			return fmt.Errorf("%w: page %d: LZ4 data does not decompress to the %d bytes its header gives (%d, %v)",
				ErrCorrupt, page, uncomp, n, err)
		}
	}
	return nil
}
