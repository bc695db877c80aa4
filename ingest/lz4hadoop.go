package ingest

import (
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"math"

	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"
	"github.com/pierrec/lz4/v4"
)

// Parquet's deprecated LZ4 codec (thrift CompressionCodec 5) is read here:
// parquet-go has no decoder for it. Writers used it in two ways: with the
// framing of Hadoop's block compressor (parquet-mr) and as a bare LZ4 block
// (old Arrow C++ writers). A file with mapped column chunks in this codec
// is rewritten in memory before parquet-go opens it: each such chunk is
// decompressed page by page and appended, uncompressed, after the
// original bytes, and a new footer that points at the appended chunks
// ends the file. The original bytes stay where they are (and are read from
// the source as before); only the decompressed chunks and the footer are
// held in memory.

// maxTranscoded is the most bytes of decompressed column chunks that the
// rewriting of one file may hold in memory.
const maxTranscoded = 2 << 30

// lz4Ratio bounds the bytes an LZ4 block can decompress to per compressed
// byte: a match's length grows by at most 255 per byte of its encoding.
const lz4Ratio = 255

// hasLZ4 reports whether a column chunk of one of the leaf columns cols
// (leaf index to the column's name) is compressed with the deprecated LZ4
// codec.
func hasLZ4(md *format.FileMetaData, cols map[int]string) bool {
	for _, g := range md.RowGroups {
		for i, cc := range g.Columns {
			if _, ok := cols[i]; ok && cc.MetaData.Codec == format.Lz4 {
				return true
			}
		}
	}
	return false
}

// transcodeLZ4 returns the Parquet file r of size bytes, whose footer is md,
// with every column chunk of the leaf columns cols (leaf index to name, for
// errors) that is compressed with the deprecated LZ4 codec rewritten as
// UNCOMPRESSED (see decodeLZ4). Corrupt pages are ErrCorrupt; errors name
// the row group and column.
func transcodeLZ4(r io.ReaderAt, size int64, md *format.FileMetaData, cols map[int]string) (*appendedFile, error) {
	pick := func(rg, col int, cc *format.ColumnChunk) (string, bool) {
		name, ok := cols[col]
		return name, ok && cc.MetaData.Codec == format.Lz4 && len(cc.EncryptedColumnMetadata) == 0
	}
	return rewriteChunks(r, size, md, pick, chunkRewrite{
		codec: format.Uncompressed,
		page:  decodeLZ4,
		ratio: lz4Ratio,
		limit: maxTranscoded,
	})
}

// chunkRewrite says how rewriteChunks rewrites the pages of a column chunk.
type chunkRewrite struct {
	codec format.CompressionCodec // of the rewritten chunks
	// page returns the new form of the compressed part of a page (the
	// whole body, or a v2 data page's values after its levels), whose
	// uncompressed size is size.
	page func(src []byte, size int) ([]byte, error)
	// ratio, when not 0, bounds the uncompressed size of a compressed
	// part of n bytes to ratio*n+64; a page that claims more is
	// ErrCorrupt.
	ratio int64
	// limit bounds the bytes of the rewritten chunks (ErrCodec beyond).
	limit int64
}

// appendedFile is a Parquet file made of an original file's bytes followed
// by bytes held in memory (rewritten column chunks and a new footer).
type appendedFile struct {
	base     io.ReaderAt
	baseSize int64
	tail     []byte
	size     int64 // baseSize + len(tail)
}

// ReadAt reads from the original bytes and the appended ones.
func (a *appendedFile) ReadAt(p []byte, off int64) (int, error) {
	if off < 0 {
		return 0, errors.New("negative offset")
	}
	n := 0
	if off < a.baseSize {
		k := int(min(int64(len(p)), a.baseSize-off))
		m, err := a.base.ReadAt(p[:k], off)
		n += m
		if m < k {
			if err == nil || err == io.EOF {
				err = io.ErrUnexpectedEOF
			}
			return n, err
		}
		off += int64(k)
	}
	if n == len(p) {
		return n, nil
	}
	if t := off - a.baseSize; t < int64(len(a.tail)) {
		n += copy(p[n:], a.tail[t:])
	}
	if n < len(p) {
		return n, io.EOF
	}
	return n, nil
}

// rewriteChunks returns the Parquet file r of size bytes, whose footer is
// md, with the column chunks for which pick returns true rewritten page by
// page as rw says. The rewritten chunks are appended after the original
// bytes, in the file's order, and followed by a new footer: a copy of md in
// which the rewritten chunks have the new codec, offsets and sizes, no
// page index (it would give the old pages' places) and their row groups
// new sizes. Page headers keep their fields but for the sizes and the
// checksum: a checksum is checked against the old page and computed for
// the new one. pick also returns the column's name for errors.
func rewriteChunks(r io.ReaderAt, size int64, md *format.FileMetaData,
	pick func(rg, col int, cc *format.ColumnChunk) (string, bool), rw chunkRewrite) (*appendedFile, error) {
	var proto thrift.CompactProtocol
	// Work on a copy: md belongs to the parquet.File it came from.
	b, err := thrift.Marshal(&proto, md)
	if err != nil {
		return nil, fmt.Errorf("encoding the footer: %w", err)
	}
	var meta format.FileMetaData
	if err := thrift.Unmarshal(&proto, b, &meta); err != nil {
		return nil, fmt.Errorf("decoding the footer: %w", err)
	}
	t := &chunkRewriter{r: r, size: size, rw: rw}
	for rg := range meta.RowGroups {
		g := &meta.RowGroups[rg]
		for col := range g.Columns {
			cc := &g.Columns[col]
			name, ok := pick(rg, col, cc)
			if !ok {
				continue
			}
			oldStart, oldComp, oldUncomp := chunkStart(&cc.MetaData), cc.MetaData.TotalCompressedSize, cc.MetaData.TotalUncompressedSize
			if err := t.chunk(cc); err != nil {
				return nil, fmt.Errorf("row group %d: column %q: %w", rg, name, err)
			}
			if g.TotalCompressedSize > 0 {
				g.TotalCompressedSize += cc.MetaData.TotalCompressedSize - oldComp
			}
			if g.TotalByteSize > 0 {
				g.TotalByteSize += cc.MetaData.TotalUncompressedSize - oldUncomp
			}
			if g.FileOffset == oldStart {
				g.FileOffset = chunkStart(&cc.MetaData)
			}
		}
	}
	footer, err := thrift.Marshal(&proto, &meta)
	if err != nil {
		return nil, fmt.Errorf("encoding the new footer: %w", err)
	}
	tail := binary.LittleEndian.AppendUint32(append(t.tail, footer...), uint32(len(footer)))
	tail = append(tail, "PAR1"...)
	return &appendedFile{base: r, baseSize: size, tail: tail, size: size + int64(len(tail))}, nil
}

// chunkStart returns where a column chunk's first page is: its data page
// offset, or its dictionary page offset when that is set and comes first.
func chunkStart(md *format.ColumnMetaData) int64 {
	start := md.DataPageOffset
	if md.DictionaryPageOffset > 0 && md.DictionaryPageOffset < start {
		start = md.DictionaryPageOffset
	}
	return start
}

// chunkRewriter holds the state of rewriteChunks.
type chunkRewriter struct {
	r     io.ReaderAt
	size  int64
	rw    chunkRewrite
	tail  []byte // rewritten chunks so far
	total int64  // bytes of new page bodies so far, against rw.limit
	buf   []byte // header scratch
	body  []byte // page scratch
}

// chunk rewrites one column chunk, appends it to the tail and updates its
// metadata.
func (t *chunkRewriter) chunk(cc *format.ColumnChunk) error {
	md := &cc.MetaData
	start, size := chunkStart(md), md.TotalCompressedSize
	if start < 4 || size < 0 || start > t.size-size {
		return fmt.Errorf("%w: the column chunk's bytes (offset %d, %d bytes) lie outside the file of %d bytes",
			ErrCorrupt, start, size, t.size)
	}
	end := start + size
	newStart := t.size + int64(len(t.tail))
	moved := map[int64]int64{} // page offsets, old to new
	var uncompTotal int64
	var proto thrift.CompactProtocol
	for page, pos := 0, start; pos < end; page++ {
		h, hlen, err := readPageHeader(t.r, pos, end, page, &t.buf)
		if err != nil {
			return err
		}
		moved[pos] = t.size + int64(len(t.tail))
		comp, uncomp := int64(h.CompressedPageSize), int64(h.UncompressedPageSize)
		if comp < 0 || uncomp < 0 || comp > end-pos-hlen {
			return fmt.Errorf("%w: page %d: header claims %d bytes (%d uncompressed), %d left in the chunk",
				ErrCorrupt, page, comp, uncomp, end-pos-hlen)
		}
		bodyStart := pos + hlen
		pos = bodyStart + comp
		newBody, err := t.pageBody(&h, page, bodyStart, comp, uncomp)
		if err != nil {
			return err
		}
		if int64(len(newBody)) > math.MaxInt32 {
			return fmt.Errorf("%w: page %d: %d bytes, more than a page can have", ErrCorrupt, page, len(newBody))
		}
		t.total += int64(len(newBody))
		if t.total > t.rw.limit {
			return fmt.Errorf("%w: page %d: the file's rewritten pages take more than %d bytes, the most armtally holds in memory", ErrCodec, page, t.rw.limit)
		}
		h.CompressedPageSize = int32(len(newBody))
		if h.CRC != 0 {
			h.CRC = int32(crc32.ChecksumIEEE(newBody))
		}
		hb, err := thrift.Marshal(&proto, &h)
		if err != nil {
			return fmt.Errorf("page %d: encoding the new header: %w", page, err)
		}
		t.tail = append(append(t.tail, hb...), newBody...)
		uncompTotal += int64(len(hb)) + uncomp
	}
	return t.relocate(cc, start, newStart, moved, uncompTotal)
}

// relocate points the metadata of a rewritten column chunk, which started
// at start, at its new bytes from newStart; moved maps its pages' old
// offsets to the new ones and uncompTotal is its new uncompressed size.
func (t *chunkRewriter) relocate(cc *format.ColumnChunk, start, newStart int64, moved map[int64]int64, uncompTotal int64) error {
	md := &cc.MetaData
	newOffset := func(what string, old int64) (int64, error) {
		n, ok := moved[old]
		if !ok && len(moved) == 0 && old == start {
			return newStart, nil // a chunk without pages
		}
		if !ok {
			return 0, fmt.Errorf("%w: the column chunk's %s offset %d is not where one of its pages starts", ErrCorrupt, what, old)
		}
		return n, nil
	}
	var err error
	if md.DataPageOffset, err = newOffset("data page", md.DataPageOffset); err != nil {
		return err
	}
	if md.DictionaryPageOffset > 0 {
		if md.DictionaryPageOffset, err = newOffset("dictionary page", md.DictionaryPageOffset); err != nil {
			return err
		}
	}
	if md.IndexPageOffset > 0 {
		md.IndexPageOffset = moved[md.IndexPageOffset] // 0 (none) if not a page of the chunk
	}
	md.Codec = t.rw.codec
	md.TotalCompressedSize = t.size + int64(len(t.tail)) - newStart
	md.TotalUncompressedSize = uncompTotal
	cc.FileOffset = newStart
	cc.OffsetIndexOffset, cc.OffsetIndexLength = 0, 0
	cc.ColumnIndexOffset, cc.ColumnIndexLength = 0, 0
	return nil
}

// pageBody reads the body of one page (comp bytes at bodyStart, uncomp
// once decompressed) and returns it as the rewritten chunk holds it: a data
// or dictionary page decompressed (a v2 page's levels, which are not
// compressed, kept in front; h marked uncompressed when the new codec is),
// any other page as it is.
func (t *chunkRewriter) pageBody(h *format.PageHeader, page int, bodyStart, comp, uncomp int64) ([]byte, error) {
	// levels: the bytes at the start of the body that are not
	// compressed; compressed: whether the rest is.
	levels, compressed := int64(0), true
	switch h.Type {
	case format.DataPage, format.DictionaryPage:
	case format.DataPageV2:
		v2, ok := h.DataPageHeaderV2.Get()
		if !ok {
			return nil, fmt.Errorf("%w: page %d: a data page v2 without a valid header", ErrCorrupt, page)
		}
		levels = int64(v2.DefinitionLevelsByteLength) + int64(v2.RepetitionLevelsByteLength)
		if v2.DefinitionLevelsByteLength < 0 || v2.RepetitionLevelsByteLength < 0 || levels > comp || levels > uncomp {
			return nil, fmt.Errorf("%w: page %d: %d bytes of levels in a page of %d", ErrCorrupt, page, levels, comp)
		}
		if c, ok := v2.IsCompressed.Get(); ok && !c {
			compressed = false
		} else if t.rw.codec == format.Uncompressed {
			v2.IsCompressed = thrift.New(false)
			h.DataPageHeaderV2 = thrift.New(v2)
		}
	default:
		compressed = false // index pages and others: kept as they are
	}
	if int64(cap(t.body)) < comp {
		t.body = make([]byte, comp)
	}
	body := t.body[:comp]
	if _, err := t.r.ReadAt(body, bodyStart); err != nil {
		return nil, fmt.Errorf("reading page %d: %w", page, err)
	}
	if h.CRC != 0 && uint32(h.CRC) != crc32.ChecksumIEEE(body) {
		return nil, fmt.Errorf("%w: page %d: the page's checksum does not match its bytes", ErrCorrupt, page)
	}
	newBody := body
	if compressed {
		src, want := body[levels:], uncomp-levels
		if t.rw.ratio > 0 && want > t.rw.ratio*int64(len(src))+64 {
			return nil, fmt.Errorf("%w: page %d: %d compressed bytes cannot hold the %d the header claims",
				ErrCorrupt, page, len(src), want)
		}
		if t.total+want > t.rw.limit {
			return nil, fmt.Errorf("%w: page %d: the file's LZ4 pages decompress to more than %d bytes, the most armtally rewrites in memory (rewrite the file with SNAPPY, ZSTD, GZIP or LZ4_RAW)",
				ErrCodec, page, t.rw.limit)
		}
		values, err := t.rw.page(src, int(want))
		if err != nil {
			return nil, fmt.Errorf("%w: page %d: %w", ErrCorrupt, page, err)
		}
		if levels == 0 {
			newBody = values
		} else {
			newBody = append(append(make([]byte, 0, levels+int64(len(values))), body[:levels]...), values...)
		}
	}
	return newBody, nil
}

// decodeLZ4 decompresses the compressed part of a page written with the
// deprecated LZ4 codec into exactly size bytes. It tries the framing of
// Hadoop's block compressor first (decodeHadoopLZ4), then a single bare
// LZ4 block, as some writers wrote under the same codec.
func decodeLZ4(src []byte, size int) ([]byte, error) {
	dst := make([]byte, size)
	herr := decodeHadoopLZ4(src, dst)
	if herr == nil {
		return dst, nil
	}
	if n, err := lz4.UncompressBlock(src, dst); err == nil && n == size {
		return dst, nil
	}
	return nil, fmt.Errorf("LZ4 data is neither in Hadoop's framing (%w) nor a bare LZ4 block of %d bytes", herr, size)
}

// decodeHadoopLZ4 decompresses data in the framing of Hadoop's block
// compressor into dst, which it must fill exactly. The data is a sequence
// of blocks, each a 4-byte big-endian uncompressed length followed by
// compressed chunks, each a 4-byte big-endian compressed length and a raw
// LZ4 block, until the block's uncompressed length is reached (writers
// usually put one chunk in each block).
func decodeHadoopLZ4(src, dst []byte) error {
	out := 0
	for len(src) > 0 {
		if len(src) < 4 {
			return fmt.Errorf("%d bytes left where a block's length should be", len(src))
		}
		ulen := binary.BigEndian.Uint32(src)
		src = src[4:]
		if int64(ulen) > int64(len(dst)-out) {
			return fmt.Errorf("a block of %d bytes after %d, in a page of %d", ulen, out, len(dst))
		}
		blockEnd := out + int(ulen)
		for out < blockEnd {
			if len(src) < 4 {
				return fmt.Errorf("%d bytes left where a chunk's length should be", len(src))
			}
			clen := binary.BigEndian.Uint32(src)
			src = src[4:]
			if int64(clen) > int64(len(src)) {
				return fmt.Errorf("a chunk of %d bytes, %d left", clen, len(src))
			}
			n, err := lz4.UncompressBlock(src[:clen], dst[out:blockEnd])
			if err != nil {
				return fmt.Errorf("a chunk at byte %d of the page's output: %w", out, err)
			}
			if n == 0 {
				return fmt.Errorf("an empty chunk at byte %d of the page's output", out)
			}
			out += n
			src = src[clen:]
		}
	}
	if out != len(dst) {
		return fmt.Errorf("%d bytes, the header gives %d", out, len(dst))
	}
	return nil
}
