package ingest

import (
	"fmt"
	"io"

	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"
	"github.com/pierrec/lz4/v4"
)

// checkPages reads the page headers of a column chunk (the chunk's bytes
// are start to start+size, which checkChunk has found inside the file) and
// checks what they claim before parquet-go acts on it. parquet-go v0.32.0
// allocates a page's stated uncompressed size before decompressing it, and
// retries a failed LZ4 block with a buffer twice as large without end, so a
// corrupt header or LZ4 page would make it allocate until the process dies
// (both measured by flipping single bytes of parquet-testing files). Each
// page must
//
//   - fit in the chunk;
//   - claim no more uncompressed bytes than its codec can produce from its
//     compressed bytes: as many without compression, 22 times as many for
//     SNAPPY (a 3-byte copy makes at most 64 bytes), 255 for LZ4_RAW, 1032
//     for GZIP (deflate's limit); ZSTD and BROTLI have no useful limit and
//     are not checked;
//   - for LZ4_RAW, decompress to exactly its stated size (the one page
//     check that reads the page's data).
//
// and the data pages together may hold no more values than the chunk
// claims. A failed check is ErrCorrupt.
func checkPages(r io.ReaderAt, start, size int64, codec format.CompressionCodec, chunkValues int64) error {
	var buf, body, dst []byte
	var values int64
	end := start + size
	for page, pos := 0, start; pos < end; page++ {
		h, hlen, err := readPageHeader(r, pos, end, page, &buf)
		if err != nil {
			return err
		}
		pos += hlen
		comp, uncomp := int64(h.CompressedPageSize), int64(h.UncompressedPageSize)
		if comp < 0 || uncomp < 0 || comp > end-pos {
			return fmt.Errorf("%w: page %d: header claims %d bytes (%d uncompressed), %d left in the chunk",
				ErrCorrupt, page, comp, uncomp, end-pos)
		}
		bodyStart, compressed := pos, true
		pos += comp
		switch h.Type {
		case format.DataPage:
			v1, ok := h.DataPageHeader.Get()
			if !ok || v1.NumValues < 0 {
				return fmt.Errorf("%w: page %d: a data page without a valid header", ErrCorrupt, page)
			}
			values += int64(v1.NumValues)
		case format.DataPageV2:
			v2, ok := h.DataPageHeaderV2.Get()
			if !ok || v2.NumValues < 0 {
				return fmt.Errorf("%w: page %d: a data page v2 without a valid header", ErrCorrupt, page)
			}
			values += int64(v2.NumValues)
			// The levels come first and are not compressed.
			levels := int64(v2.DefinitionLevelsByteLength) + int64(v2.RepetitionLevelsByteLength)
			if v2.DefinitionLevelsByteLength < 0 || v2.RepetitionLevelsByteLength < 0 || levels > comp || levels > uncomp {
				return fmt.Errorf("%w: page %d: %d bytes of levels in a page of %d", ErrCorrupt, page, levels, comp)
			}
			bodyStart, comp, uncomp = bodyStart+levels, comp-levels, uncomp-levels
			if c, ok := v2.IsCompressed.Get(); ok && !c {
				compressed = false
			}
		case format.DictionaryPage:
		default:
			continue // index pages and others: parquet-go skips them
		}
		if values > chunkValues {
			return fmt.Errorf("%w: page %d: the pages hold more than the %d values the chunk claims", ErrCorrupt, page, chunkValues)
		}
		ratio := int64(0) // no limit
		switch {
		case !compressed || codec == format.Uncompressed:
			ratio = 1
		case codec == format.Snappy:
			ratio = 22
		case codec == format.Lz4Raw:
			ratio = 255
		case codec == format.Gzip:
			ratio = 1032
		}
		if ratio > 0 && uncomp > ratio*comp+64 {
			return fmt.Errorf("%w: page %d: %d compressed bytes cannot hold the %d the header claims", ErrCorrupt, page, comp, uncomp)
		}
		if codec != format.Lz4Raw || !compressed {
			continue
		}
		if int64(cap(body)) < comp {
			body = make([]byte, comp)
		}
		if int64(cap(dst)) < uncomp {
			dst = make([]byte, uncomp)
		}
		if _, err := r.ReadAt(body[:comp], bodyStart); err != nil {
			return fmt.Errorf("reading page %d: %w", page, err)
		}
		n, err := lz4.UncompressBlock(body[:comp], dst[:uncomp])
		if err != nil || int64(n) != uncomp {
			return fmt.Errorf("%w: page %d: LZ4 data does not decompress to the %d bytes its header gives (%d, %v)",
				ErrCorrupt, page, uncomp, n, err)
		}
	}
	return nil
}

// readPageHeader decodes the header of page number page, at pos of a
// column chunk that ends at end, and returns it with its length in bytes.
// Headers are small, unless they carry statistics of long values: it reads
// more until the header decodes, up to the chunk's end or 64 MiB. buf is
// scratch space, grown as needed. A header that does not decode is
// ErrCorrupt.
func readPageHeader(r io.ReaderAt, pos, end int64, page int, buf *[]byte) (format.PageHeader, int64, error) {
	var proto thrift.CompactProtocol
	for n := int64(256); ; n *= 4 {
		n = min(n, end-pos)
		if int64(cap(*buf)) < n {
			*buf = make([]byte, n)
		}
		b := (*buf)[:n]
		if _, err := r.ReadAt(b, pos); err != nil {
			return format.PageHeader{}, 0, fmt.Errorf("reading page %d's header: %w", page, err)
		}
		pr := proto.NewReaderFromBytes(b)
		var h format.PageHeader
		err := thrift.NewDecoder(pr).Decode(&h)
		if err == nil {
			return h, int64(pr.BytesRead()), nil
		}
		if n == end-pos || n >= 64<<20 {
			return format.PageHeader{}, 0, fmt.Errorf("%w: page %d: header: %w", ErrCorrupt, page, err)
		}
	}
}
