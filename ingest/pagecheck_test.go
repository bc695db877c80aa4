package ingest

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"
	"github.com/pierrec/lz4/v4"
)

// page is one page of a synthetic column chunk: a header and its body.
type page struct {
	h    format.PageHeader
	body []byte
}

func chunkOf(t *testing.T, pages ...page) []byte {
	t.Helper()
	var b []byte
	for _, p := range pages {
		h, err := thrift.Marshal(new(thrift.CompactProtocol), p.h)
		if err != nil {
			t.Fatal(err)
		}
		b = append(append(b, h...), p.body...)
	}
	return b
}

func dataPage(values, comp, uncomp int32, body []byte) page {
	return page{h: format.PageHeader{Type: format.DataPage, CompressedPageSize: comp, UncompressedPageSize: uncomp,
		DataPageHeader: thrift.New(format.DataPageHeader{NumValues: values})}, body: body}
}

func TestCheckPages(t *testing.T) {
	lz4Text := bytes.Repeat([]byte("armtally "), 20) // 180 bytes
	lz4Block := make([]byte, lz4.CompressBlockBound(len(lz4Text)))
	n, err := lz4.CompressBlock(lz4Text, lz4Block, nil)
	if err != nil || n == 0 {
		t.Fatalf("lz4: %d, %v", n, err)
	}
	lz4Block = lz4Block[:n]
	body10 := make([]byte, 10)
	v2 := func(values, comp, uncomp, defLen int32, compressed bool, body []byte) page {
		return page{h: format.PageHeader{Type: format.DataPageV2, CompressedPageSize: comp, UncompressedPageSize: uncomp,
			DataPageHeaderV2: thrift.New(format.DataPageHeaderV2{NumValues: values, NumRows: values,
				DefinitionLevelsByteLength: defLen, IsCompressed: thrift.New(compressed)})}, body: body}
	}
	tests := []struct {
		name   string
		codec  format.CompressionCodec
		values int64 // the chunk's claim
		chunk  func() []byte
		msg    string // "" when the chunk is fine
	}{
		{"fine", format.Uncompressed, 10, func() []byte { return chunkOf(t, dataPage(10, 10, 10, body10)) }, ""},
		{"two pages", format.Uncompressed, 20, func() []byte {
			return chunkOf(t, dataPage(10, 10, 10, body10), dataPage(10, 10, 10, body10))
		}, ""},
		// 2^30 bytes from 10 without compression: parquet-go would
		// allocate the 2^30.
		{"uncompressed claims more", format.Uncompressed, 10, func() []byte { return chunkOf(t, dataPage(10, 10, 1<<30, body10)) },
			"corrupt parquet file: page 0: 10 compressed bytes cannot hold the 1073741824 the header claims"},
		// SNAPPY: at most 22*10+64 = 284 bytes from 10.
		{"snappy at the bound", format.Snappy, 10, func() []byte { return chunkOf(t, dataPage(10, 10, 284, body10)) }, ""},
		{"snappy above", format.Snappy, 10, func() []byte { return chunkOf(t, dataPage(10, 10, 285, body10)) },
			"corrupt parquet file: page 0: 10 compressed bytes cannot hold the 285 the header claims"},
		// GZIP: 1032*10+64 = 10384.
		{"gzip above", format.Gzip, 10, func() []byte { return chunkOf(t, dataPage(10, 10, 10385, body10)) },
			"corrupt parquet file: page 0: 10 compressed bytes cannot hold the 10385 the header claims"},
		{"zstd unchecked", format.Zstd, 10, func() []byte { return chunkOf(t, dataPage(10, 10, 1<<30, body10)) }, ""},
		{"body past the chunk", format.Uncompressed, 10, func() []byte {
			c := chunkOf(t, dataPage(10, 10, 10, body10))
			return c[:len(c)-5] // 5 of the body's 10 bytes
		}, "corrupt parquet file: page 0: header claims 10 bytes (10 uncompressed), 5 left in the chunk"},
		{"negative size", format.Uncompressed, 10, func() []byte { return chunkOf(t, dataPage(10, -1, 10, nil)) },
			"corrupt parquet file: page 0: header claims -1 bytes (10 uncompressed)"},
		{"more values than the chunk", format.Uncompressed, 15, func() []byte {
			return chunkOf(t, dataPage(10, 10, 10, body10), dataPage(10, 10, 10, body10))
		}, "corrupt parquet file: page 1: the pages hold more than the 15 values the chunk claims"},
		{"not a header", format.Uncompressed, 10, func() []byte { return []byte{0xff, 0xff, 0xff, 0xff} }, "corrupt parquet file: page 0: header"},
		{"lz4 fine", format.Lz4Raw, 10, func() []byte {
			return chunkOf(t, dataPage(10, int32(len(lz4Block)), int32(len(lz4Text)), lz4Block))
		}, ""},
		// The same block with one byte more claimed: it decompresses to 180.
		{"lz4 wrong size", format.Lz4Raw, 10, func() []byte {
			return chunkOf(t, dataPage(10, int32(len(lz4Block)), int32(len(lz4Text))+1, lz4Block))
		}, "corrupt parquet file: page 0: LZ4 data does not decompress to the 181 bytes its header gives"},
		// Levels (4 bytes) are not compressed; the rest is the LZ4 block.
		{"lz4 v2", format.Lz4Raw, 10, func() []byte {
			body := append([]byte{1, 2, 3, 4}, lz4Block...)
			return chunkOf(t, v2(10, int32(len(body)), int32(4+len(lz4Text)), 4, true, body))
		}, ""},
		{"v2 levels past the page", format.Uncompressed, 10, func() []byte { return chunkOf(t, v2(10, 10, 10, 11, false, body10)) },
			"corrupt parquet file: page 0: 11 bytes of levels in a page of 10"},
		// Not compressed, so bounded by its size whatever the codec.
		{"v2 not compressed", format.Zstd, 10, func() []byte { return chunkOf(t, v2(10, 10, 1<<20, 0, false, body10)) },
			"corrupt parquet file: page 0: 10 compressed bytes cannot hold the 1048576 the header claims"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			chunk := tc.chunk()
			err := checkPages(bytes.NewReader(chunk), 0, int64(len(chunk)), tc.codec, tc.values)
			if tc.msg == "" {
				if err != nil {
					t.Fatalf("error %v", err)
				}
				return
			}
			if err == nil || !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), tc.msg) {
				t.Fatalf("error %v, want ErrCorrupt with %q", err, tc.msg)
			}
		})
	}
}

// A footer length that exceeds the file is refused before parquet-go
// allocates it: the last 8 bytes of alltypes_dictionary.parquet are the
// footer length and "PAR1"; XOR-ing 0xa5 into the length's high byte (byte
// 1693 of 1698) makes it claim about 2.8 GB.
func TestParquetFooterLength(t *testing.T) {
	dir := parquetTesting(t)
	data, err := os.ReadFile(filepath.Join(dir, "data", "alltypes_dictionary.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	if len(data) != 1698 || string(data[1694:]) != "PAR1" {
		t.Fatalf("file of %d bytes ending %q; the test expects 1698 ending PAR1", len(data), data[len(data)-4:])
	}
	data[1693] ^= 0xa5
	_, _, err = readAll(t, []Source{BytesSource("f.parquet", data)}, Options{Mapping: Mapping{User: "id", TS: "timestamp_col", Event: "string_col"}})
	if !errors.Is(err, ErrCorrupt) || !strings.HasPrefix(err.Error(), "f.parquet: corrupt parquet file: the footer claims ") {
		t.Errorf("error %v, want ErrCorrupt about the footer length", err)
	}
}
