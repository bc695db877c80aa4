package ingest

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"
	"github.com/pierrec/lz4/v4"
)

// Two LZ4 blocks written by hand from the LZ4 block format (not by the lz4
// package): helloBlock is one sequence of 5 literals; abcBlock is "abc", a
// match at offset 3 of 9 bytes (token 0x35: 3 literals, match length 4+5),
// then 5 literals.
var (
	helloBlock = []byte{0x50, 'h', 'e', 'l', 'l', 'o'}
	abcBlock   = []byte{0x35, 'a', 'b', 'c', 0x03, 0x00, 0x50, 'X', 'Y', 'Z', 'W', 'V'}
	abcText    = "abcabcabcabcXYZWV"
)

// be32 is n as 4 bytes, big-endian.
func be32(n int) []byte { return binary.BigEndian.AppendUint32(nil, uint32(n)) }

// cat concatenates byte slices.
func cat(parts ...[]byte) []byte { return slices.Concat(parts...) }

// lz4Literals is a valid LZ4 block that holds b as literals only.
func lz4Literals(b []byte) []byte {
	if len(b) < 15 {
		return append([]byte{byte(len(b) << 4)}, b...)
	}
	out := []byte{0xf0}
	r := len(b) - 15
	for ; r >= 255; r -= 255 {
		out = append(out, 255)
	}
	return append(append(out, byte(r)), b...)
}

// hadoopLZ4 compresses data in Hadoop's framing, in blocks of at most block
// bytes, each with one chunk.
func hadoopLZ4(data []byte, block int) []byte {
	var out []byte
	for len(data) > 0 {
		b := data[:min(block, len(data))]
		data = data[len(b):]
		c := make([]byte, lz4.CompressBlockBound(len(b)))
		n, err := lz4.CompressBlock(b, c, nil)
		if err != nil || n == 0 {
			c, n = lz4Literals(b), len(lz4Literals(b)) // incompressible
		}
		out = append(append(append(out, be32(len(b))...), be32(n)...), c[:n]...)
	}
	return out
}

// Pages in Hadoop's framing built by hand, and the bare-block form some
// writers used under the same codec; and corrupt ones, which are errors.
func TestDecodeLZ4(t *testing.T) {
	hello := cat(be32(5), be32(len(helloBlock)), helloBlock)
	abc := cat(be32(len(abcText)), be32(len(abcBlock)), abcBlock)
	tests := []struct {
		name string
		src  []byte
		size int    // the header's uncompressed size
		want string // the bytes, or with msg set an error
		msg  string
	}{
		{"one block", hello, 5, "hello", ""},
		{"a block with a match", abc, 17, abcText, ""},
		// Three blocks, each [length][length][LZ4 block].
		{"three blocks", cat(hello, abc, hello), 27, "hello" + abcText + "hello", ""},
		// One block of 22 bytes in two chunks, as Hadoop writes a block
		// larger than its buffer.
		{"a block of two chunks", cat(be32(22), be32(len(helloBlock)), helloBlock, be32(len(abcBlock)), abcBlock), 22, "hello" + abcText, ""},
		{"empty", nil, 0, "", ""},
		// No framing: a bare LZ4 block (the fallback).
		{"bare block", abcBlock, 17, abcText, ""},
		{"bare literals", lz4Literals([]byte("0123456789abcdef0123")), 20, "0123456789abcdef0123", ""},

		{"truncated length", cat(hello, []byte{0, 0}), 5, "", "2 bytes left where a block's length should be"},
		{"chunk past the end", cat(be32(5), be32(7), helloBlock), 5, "", "a chunk of 7 bytes, 6 left"},
		{"block longer than the page", cat(be32(6), be32(len(helloBlock)), helloBlock), 5, "", "a block of 6 bytes after 0, in a page of 5"},
		// The match's offset is 9, before the start of the output.
		{"corrupt LZ4", cat(be32(17), be32(len(abcBlock)), abcBlock[:4], []byte{0x09, 0x00}, abcBlock[6:]), 17, "", "a chunk at byte 0"},
		{"a block missing", hello, 10, "", "5 bytes, the header gives 10"},
		{"a chunk missing", cat(be32(22), be32(len(helloBlock)), helloBlock), 22, "", "0 bytes left where a chunk's length should be"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := decodeLZ4(tc.src, tc.size)
			if tc.msg == "" {
				if err != nil || string(got) != tc.want {
					t.Fatalf("%q, %v; want %q", got, err, tc.want)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), tc.msg) || !strings.Contains(err.Error(), "nor a bare LZ4 block") {
				t.Fatalf("error %v, want one with %q", err, tc.msg)
			}
		})
	}
}

// A column chunk of a dictionary page, a v1 data page in three blocks and a
// v2 data page (levels, then an LZ4 block) is rewritten uncompressed: the
// new chunk follows the file, its pages have the decompressed bodies, the
// sizes and checksums of the new bodies, and the footer points at it.
func TestRewriteChunksLZ4(t *testing.T) {
	levels := []byte{9, 8, 7}
	dictBody := cat(be32(5), be32(len(helloBlock)), helloBlock)
	v1Body := cat(dictBody, dictBody, cat(be32(len(abcText)), be32(len(abcBlock)), abcBlock))
	v2Body := cat(levels, be32(5), be32(len(helloBlock)), helloBlock)
	pages := []page{
		{h: format.PageHeader{Type: format.DictionaryPage, CompressedPageSize: int32(len(dictBody)), UncompressedPageSize: 5,
			CRC: int32(crc32.ChecksumIEEE(dictBody)), DictionaryPageHeader: thrift.New(format.DictionaryPageHeader{NumValues: 1})}, body: dictBody},
		dataPage(3, int32(len(v1Body)), int32(10+len(abcText)), v1Body),
		{h: format.PageHeader{Type: format.DataPageV2, CompressedPageSize: int32(len(v2Body)), UncompressedPageSize: 3 + 5,
			DataPageHeaderV2: thrift.New(format.DataPageHeaderV2{NumValues: 2, NumRows: 2, DefinitionLevelsByteLength: 3})}, body: v2Body},
	}
	chunk := chunkOf(t, pages...)
	file := cat([]byte("PAR1"), chunk, []byte("old footer"))
	md := &format.FileMetaData{RowGroups: []format.RowGroup{{NumRows: 5, TotalByteSize: 100, TotalCompressedSize: int64(len(chunk)), FileOffset: 4,
		Columns: []format.ColumnChunk{{FileOffset: 4, OffsetIndexOffset: 99, OffsetIndexLength: 9, MetaData: format.ColumnMetaData{
			PathInSchema: []string{"c"}, Codec: format.Lz4, NumValues: 5, DataPageOffset: 4,
			TotalCompressedSize: int64(len(chunk)), TotalUncompressedSize: 100}}}}}}
	a, err := transcodeLZ4(bytes.NewReader(file), int64(len(file)), md, map[int]string{0: "c"})
	if err != nil {
		t.Fatal(err)
	}
	out := make([]byte, a.size)
	if n, err := a.ReadAt(out, 0); n != len(out) || err != nil {
		t.Fatalf("read %d of %d: %v", n, len(out), err)
	}
	if !bytes.HasPrefix(out, file) || string(out[len(out)-4:]) != "PAR1" {
		t.Fatal("the original bytes are not kept, or the magic does not end the file")
	}
	flen := int64(binary.LittleEndian.Uint32(out[len(out)-8:]))
	var meta format.FileMetaData
	if err := thrift.Unmarshal(new(thrift.CompactProtocol), out[int64(len(out))-8-flen:len(out)-8], &meta); err != nil {
		t.Fatal(err)
	}
	cc := meta.RowGroups[0].Columns[0]
	m := cc.MetaData
	start := int64(len(file))
	if m.Codec != format.Uncompressed || m.DataPageOffset != start || cc.FileOffset != start || cc.OffsetIndexOffset != 0 ||
		m.DictionaryPageOffset != 0 || m.TotalCompressedSize != m.TotalUncompressedSize || m.NumValues != 5 {
		t.Errorf("column chunk %+v", cc)
	}
	if g := meta.RowGroups[0]; g.FileOffset != start || g.TotalCompressedSize != m.TotalCompressedSize || g.TotalByteSize != m.TotalUncompressedSize {
		t.Errorf("row group: offset %d, %d bytes (%d uncompressed); want %d, %d (%d)", g.FileOffset, g.TotalCompressedSize, g.TotalByteSize,
			start, m.TotalCompressedSize, m.TotalUncompressedSize)
	}
	// The new pages, header by header.
	wantBodies := []string{"hello", "hellohello" + abcText, string(levels) + "hello"}
	var buf []byte
	pos, end := start, start+m.TotalCompressedSize
	r := bytes.NewReader(out)
	for i, want := range wantBodies {
		h, hlen, err := readPageHeader(r, pos, end, i, &buf)
		if err != nil {
			t.Fatal(err)
		}
		body := out[pos+hlen : pos+hlen+int64(h.CompressedPageSize)]
		if string(body) != want || h.UncompressedPageSize != int32(len(want)) || h.Type != pages[i].h.Type {
			t.Errorf("page %d: %v %q (%d uncompressed), want %v %q", i, h.Type, body, h.UncompressedPageSize, pages[i].h.Type, want)
		}
		if wantCRC := pages[i].h.CRC != 0; wantCRC != (h.CRC != 0) || (wantCRC && uint32(h.CRC) != crc32.ChecksumIEEE(body)) {
			t.Errorf("page %d: checksum %d", i, h.CRC)
		}
		if v2, ok := h.DataPageHeaderV2.Get(); ok && (v2.IsCompressed.V || !v2.IsCompressed.Valid) {
			t.Errorf("page %d: a v2 page still marked compressed", i)
		}
		pos += hlen + int64(h.CompressedPageSize)
	}
	if pos != end {
		t.Errorf("pages end at %d, the chunk at %d", pos, end)
	}
	// checkPages finds the new chunk consistent.
	if err := checkPages(r, start, m.TotalCompressedSize, m.Codec, 5); err != nil {
		t.Errorf("checkPages: %v", err)
	}

	// Corrupt pages: the errors name the row group, column and page.
	corrupt := []struct {
		name string
		edit func(b []byte) // of the file
		msg  string
	}{
		{"bad LZ4 in the v1 page", func(b []byte) { b[bytes.Index(b, abcBlock)+4] = 0x40 },
			`row group 0: column "c": corrupt parquet file: page 1: LZ4 data is neither in Hadoop's framing (a chunk at byte 10 of the page's output: `},
		{"checksum", func(b []byte) { b[bytes.Index(b, helloBlock)+1] = 'j' },
			`row group 0: column "c": corrupt parquet file: page 0: the page's checksum does not match its bytes`},
		{"truncated framing", func(b []byte) { copy(b[bytes.Index(b, levels)+3:], be32(1<<20)) },
			`row group 0: column "c": corrupt parquet file: page 2: LZ4 data is neither in Hadoop's framing (a block of 1048576 bytes after 0, in a page of 5)`},
	}
	for _, tc := range corrupt {
		bad := bytes.Clone(file)
		tc.edit(bad)
		_, err := transcodeLZ4(bytes.NewReader(bad), int64(len(bad)), md, map[int]string{0: "c"})
		if !errors.Is(err, ErrCorrupt) || !strings.HasPrefix(err.Error(), tc.msg) {
			t.Errorf("%s: error %v, want ErrCorrupt starting %q", tc.name, err, tc.msg)
		}
	}
	// A page claiming more than LZ4 can make of its bytes is refused
	// before anything is allocated; so is a chunk outside the file.
	bigPage := chunkOf(t, dataPage(1, int32(len(dictBody)), 1<<30, dictBody))
	bigFile := cat([]byte("PAR1"), bigPage)
	bigMD := &format.FileMetaData{RowGroups: []format.RowGroup{{Columns: []format.ColumnChunk{{MetaData: format.ColumnMetaData{
		Codec: format.Lz4, DataPageOffset: 4, TotalCompressedSize: int64(len(bigPage))}}}}}}
	_, err = transcodeLZ4(bytes.NewReader(bigFile), int64(len(bigFile)), bigMD, map[int]string{0: "c"})
	if want := fmt.Sprintf(`row group 0: column "c": corrupt parquet file: page 0: %d compressed bytes cannot hold the 1073741824 the header claims`, len(dictBody)); err == nil || err.Error() != want {
		t.Errorf("error %v, want %s", err, want)
	}
	bigMD.RowGroups[0].Columns[0].MetaData.TotalCompressedSize = 1 << 40
	_, err = transcodeLZ4(bytes.NewReader(bigFile), int64(len(bigFile)), bigMD, map[int]string{0: "c"})
	if !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), "lie outside the file") {
		t.Errorf("error %v, want ErrCorrupt: outside the file", err)
	}
	// Beyond the in-memory limit: ErrCodec.
	_, err = rewriteChunks(bytes.NewReader(file), int64(len(file)), md, func(int, int, *format.ColumnChunk) (string, bool) { return "c", true },
		chunkRewrite{codec: format.Uncompressed, page: decodeLZ4, ratio: lz4Ratio, limit: 12})
	if !errors.Is(err, ErrCodec) || !strings.Contains(err.Error(), "page 1") {
		t.Errorf("error %v, want ErrCodec at page 1", err)
	}
}

// lz4Event is a row of the files written by the round-trip tests.
type lz4Event struct {
	User  string  `parquet:"user_id,dict"`
	TS    int64   `parquet:"ts,timestamp(millisecond)"`
	Event string  `parquet:"event"`
	Arm   *string `parquet:"arm,optional,dict"`
	Note  string  `parquet:"note"`
}

func lz4Events(n int) []lz4Event {
	arms := []string{"control", "treatment"}
	var rows []lz4Event
	for i := 0; i < n; i++ {
		e := lz4Event{User: fmt.Sprintf("user-%d", i%97), TS: 1767225600000 + int64(i)*1000,
			Event: []string{"view", "click", "exposure", "purchase"}[i%4], Note: strings.Repeat("n", i%50)}
		if e.Event == "exposure" {
			e.Arm = &arms[i%2]
		}
		rows = append(rows, e)
	}
	return rows
}

// toHadoopLZ4 recompresses the SNAPPY column chunks of a Parquet file for
// which pick is true as LZ4 in Hadoop's framing, in blocks of at most
// block bytes.
func toHadoopLZ4(t *testing.T, data []byte, block int, pick func(rg, col int) bool) []byte {
	t.Helper()
	pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	a, err := rewriteChunks(bytes.NewReader(data), int64(len(data)), pf.Metadata(),
		func(rg, col int, cc *format.ColumnChunk) (string, bool) {
			return "", cc.MetaData.Codec == format.Snappy && pick(rg, col)
		},
		chunkRewrite{codec: format.Lz4, limit: 1 << 30, page: func(src []byte, size int) ([]byte, error) {
			raw, err := parquet.Snappy.Decode(nil, src)
			if err != nil || len(raw) != size {
				return nil, fmt.Errorf("snappy: %d bytes of %d: %v", len(raw), size, err)
			}
			return hadoopLZ4(raw, block), nil
		}})
	if err != nil {
		t.Fatal(err)
	}
	out := make([]byte, a.size)
	if _, err := a.ReadAt(out, 0); err != nil {
		t.Fatal(err)
	}
	return out
}

// Files written here with parquet-go (SNAPPY, three row groups, small
// pages, v1 and v2 pages, dictionary and plain encodings), recompressed as
// Hadoop-framed LZ4 with blocks smaller than the pages, read back the rows
// of the SNAPPY file. Only the mapped columns are rewritten: a corrupt
// unmapped LZ4 column does not matter.
func TestParquetHadoopLZ4RoundTrip(t *testing.T) {
	rows := lz4Events(3000)
	m := Mapping{User: "user_id", TS: "ts", Event: "event", Arm: "arm"}
	opts := Options{Mapping: m, ExposureEvent: "exposure", BatchSize: 500}
	for _, version := range []int{1, 2} {
		t.Run(fmt.Sprintf("v%d", version), func(t *testing.T) {
			snappy := writeParquet(t, rows, parquet.Compression(&parquet.Snappy), parquet.MaxRowsPerRowGroup(1000),
				parquet.PageBufferSize(2048), parquet.DataPageVersion(version))
			want, _, err := readAll(t, []Source{BytesSource("snappy.parquet", snappy)}, opts)
			if err != nil {
				t.Fatal(err)
			}
			if len(want) != 3000 || want[2] != "user-2 | 2026-01-01T00:00:02Z | exposure | control" {
				t.Fatalf("the SNAPPY file reads %d rows, the third %q", len(want), want[2])
			}
			data := toHadoopLZ4(t, snappy, 300, func(int, int) bool { return true })
			pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
			if err != nil {
				t.Fatal(err)
			}
			for _, g := range pf.Metadata().RowGroups {
				for _, cc := range g.Columns {
					if cc.MetaData.Codec != format.Lz4 {
						t.Fatalf("column %v: codec %v", cc.MetaData.PathInSchema, cc.MetaData.Codec)
					}
				}
			}
			got, st, err := readAll(t, []Source{BytesSource("lz4.parquet", data)}, opts)
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(got, want) || st.Rows != 3000 {
				t.Fatalf("%d rows, want %d; first %q", len(got), len(want), got[:min(1, len(got))])
			}

			// Corrupt every page body of the unmapped note column: the
			// mapped columns still read.
			bad := bytes.Clone(data)
			for _, g := range pf.Metadata().RowGroups {
				md := g.Columns[4].MetaData
				for i := md.DataPageOffset; i < md.DataPageOffset+md.TotalCompressedSize; i += 7 {
					bad[i] ^= 0xff
				}
			}
			if got, _, err := readAll(t, []Source{BytesSource("lz4.parquet", bad)}, opts); err != nil || !slices.Equal(got, want) {
				t.Fatalf("with a corrupt unmapped column: %d rows, %v", len(got), err)
			}
			opts := opts
			opts.Mapping.Segments = []string{"note"}
			_, _, err = readAll(t, []Source{BytesSource("lz4.parquet", bad)}, opts)
			if !errors.Is(err, ErrCorrupt) || !strings.HasPrefix(err.Error(), `lz4.parquet: row group 0: column "note": corrupt parquet file: page `) {
				t.Fatalf("mapping the corrupt column: %v", err)
			}
		})
	}
}

// parquet-go decodes every chunk of a column with the codec of its chunk in
// row group 0: a column whose row groups differ (here SNAPPY and LZ4,
// rewritten uncompressed) is refused with ErrCodec naming the row group,
// instead of being misread.
func TestParquetMixedCodecs(t *testing.T) {
	rows := lz4Events(40)
	snappy := writeParquet(t, rows, parquet.Compression(&parquet.Snappy), parquet.MaxRowsPerRowGroup(20))
	m := Mapping{User: "user_id", TS: "ts", Event: "event"}
	for _, rg := range []int{0, 1} {
		data := toHadoopLZ4(t, snappy, 1000, func(g, _ int) bool { return g == rg })
		_, _, err := readAll(t, []Source{BytesSource("mixed.parquet", data)}, Options{Mapping: m})
		want := `mixed.parquet: row group 1: column "user_id": unsupported compression codec: compressed with `
		if !errors.Is(err, ErrCodec) || !strings.HasPrefix(err.Error(), want) {
			t.Errorf("LZ4 in row group %d: error %v, want ErrCodec starting %q", rg, err, want)
		}
	}
	// LZ4 in both: rewritten alike, read.
	data := toHadoopLZ4(t, snappy, 1000, func(int, int) bool { return true })
	if got, _, err := readAll(t, []Source{BytesSource("lz4.parquet", data)}, Options{Mapping: m}); err != nil || len(got) != 40 {
		t.Errorf("%d rows, %v", len(got), err)
	}
}

// A file without LZ4 chunks is not rewritten: the reader keeps the source.
func TestParquetNoLZ4NoRewrite(t *testing.T) {
	data := writeParquet(t, lz4Events(10), parquet.Compression(&parquet.Snappy))
	p, err := newPlan(Options{Mapping: Mapping{User: "user_id", TS: "ts", Event: "event"}})
	if err != nil {
		t.Fatal(err)
	}
	src := BytesSource("f.parquet", data)
	o, _ := src.open()
	r, err := newParquetReader(src, o, p)
	if err != nil {
		t.Fatal(err)
	}
	defer r.close()
	if r.src != o {
		t.Error("the source was replaced")
	}
}

// Every single-byte corruption of hadoop_lz4_compressed.parquet ends in
// rows or an error naming the file, never a panic, a hang (within) or a
// large allocation: the transcoder bounds what it allocates by the file.
func TestParquetHadoopLZ4Corruption(t *testing.T) {
	dir := parquetTesting(t)
	data, err := os.ReadFile(filepath.Join(dir, "data", "hadoop_lz4_compressed.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	detected := 0
	var ms runtime.MemStats
	var maxAlloc uint64
	for pos := range data {
		bad := bytes.Clone(data)
		bad[pos] ^= 0xa5
		for _, col := range []string{"c0", "c1"} {
			runtime.ReadMemStats(&ms)
			before := ms.TotalAlloc
			got := readParquetColumn(t, "h.parquet", bad, col, false)
			runtime.ReadMemStats(&ms)
			maxAlloc = max(maxAlloc, ms.TotalAlloc-before)
			if got.err == nil {
				continue
			}
			if errors.Is(got.err, errPanicked) {
				t.Errorf("byte %d, column %s: parquet-go panicked: %v", pos, col, got.err)
			}
			if !strings.HasPrefix(got.err.Error(), "h.parquet: ") {
				t.Errorf("byte %d, column %s: error does not name the file: %v", pos, col, got.err)
			}
			if errors.Is(got.err, ErrCorrupt) {
				detected++
			}
		}
	}
	if maxAlloc > 64<<20 {
		t.Errorf("a read allocated %d MiB", maxAlloc>>20)
	}
	if detected == 0 {
		t.Error("no corruption detected as ErrCorrupt")
	}
	t.Logf("%d of %d corrupt reads detected as ErrCorrupt; at most %d KiB allocated by one read", detected, 2*len(data), maxAlloc>>10)
}

// FuzzDecodeLZ4 decodes arbitrary page bytes as the deprecated LZ4 codec
// with a size of up to 64 KiB: it never panics, and it either fills
// exactly the size or returns an error.
func FuzzDecodeLZ4(f *testing.F) {
	f.Add(cat(be32(5), be32(len(helloBlock)), helloBlock), uint16(5))
	f.Add(cat(be32(22), be32(len(helloBlock)), helloBlock, be32(len(abcBlock)), abcBlock), uint16(22))
	f.Add(abcBlock, uint16(17))
	f.Add(hadoopLZ4(bytes.Repeat([]byte("armtally "), 500), 1000), uint16(4500))
	f.Fuzz(func(t *testing.T, src []byte, size uint16) {
		got, err := decodeLZ4(src, int(size))
		if err == nil && len(got) != int(size) {
			t.Fatalf("%d bytes, want %d", len(got), size)
		}
	})
}
