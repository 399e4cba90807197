package pqio

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"math/bits"

	"github.com/andybalholm/brotli"
	"github.com/klauspost/compress/gzip"
	"github.com/klauspost/compress/s2"
	"github.com/klauspost/compress/zstd"
	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/encoding/delta"
	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"
	"github.com/pierrec/lz4/v4"

	"manyfold/io/table"
)

// Limits on what a page may declare, checked before anything is allocated
// from its header (see checkPage). A page's values cost memory in
// proportion to their count once decoded, while a run of the RLE /
// bit-packing hybrid encodes any count in a few bytes, so counts are bounded
// by the page's bytes, with a floor for the pages of nulls or of one
// repeated value that some writers make long.
const (
	// maxPageBytes bounds a page's uncompressed size.
	maxPageBytes = 1 << 28
	// maxPageRatio bounds a compressed page's uncompressed size as a
	// multiple of its compressed size (deflate's largest ratio is about
	// 1032), beyond pageRatioFloor bytes.
	maxPageRatio   = 1100
	pageRatioFloor = 16 << 20
	// sparseValues is the number of values a page may hold whatever its
	// size; past it a page needs a byte per 8 values (the densest
	// encoding without runs: one-bit levels or booleans, bit-packed).
	sparseValues = 1 << 24
	// runSlack is how many values the runs of a page's levels or indices
	// may declare beyond the page's value count (the padding of
	// bit-packed groups).
	runSlack = 1 << 10
)

// checkRowCounts checks that the footer's row count is the sum of its row
// groups', none negative: the reader counts rows by row group, a writer
// copying chunks by the file's count.
func checkRowCounts(m *format.FileMetaData) error {
	var sum int64
	for g := range m.RowGroups {
		n := m.RowGroups[g].NumRows
		if n < 0 || n > math.MaxInt64-sum {
			return fmt.Errorf("%w: row group %d has %d rows", table.ErrCorrupt, g+1, n)
		}
		sum += n
	}
	if sum != m.NumRows {
		return fmt.Errorf("%w: the footer records %d rows, its row groups %d", table.ErrCorrupt, m.NumRows, sum)
	}
	return nil
}

// readPageHeader decodes the page header at pos of ra (which ends at end),
// growing *buf as needed; it returns the header and its encoded length.
// The header is decoded from bytes in memory, so a length field inside it
// cannot make the decoder allocate more than the bytes it was given.
func readPageHeader(ra io.ReaderAt, pos, end int64, buf *[]byte) (*format.PageHeader, int, error) {
	if len(*buf) == 0 {
		*buf = make([]byte, 256)
	}
	for {
		n := min(int64(len(*buf)), end-pos)
		b := (*buf)[:n]
		if _, err := ra.ReadAt(b, pos); err != nil && !errors.Is(err, io.EOF) {
			return nil, 0, err
		}
		pr := compact.NewReaderFromBytes(b)
		h := new(format.PageHeader)
		err := thrift.NewDecoder(pr).Decode(h)
		if err == nil {
			return h, pr.BytesRead(), nil
		}
		if n == end-pos || len(*buf) >= maxHeader {
			return nil, 0, fmt.Errorf("page header at byte %d: %w: %v", pos, table.ErrCorrupt, err)
		}
		*buf = make([]byte, 4*len(*buf))
	}
}

// checkCRC checks a page's bytes (as stored, compressed) against the CRC
// its header records, if it records one: the CRC-32 (IEEE) of those bytes,
// as the Parquet format defines it.
func checkCRC(h *format.PageHeader, page []byte) error {
	if h.CRC == 0 {
		// The field is optional and absent here; a page whose bytes
		// happen to hash to 0 is not checked.
		return nil
	}
	if got := crc32.ChecksumIEEE(page); got != uint32(h.CRC) {
		return fmt.Errorf("%w: page checksum mismatch (header 0x%08x, bytes 0x%08x)", table.ErrCorrupt, uint32(h.CRC), got)
	}
	return nil
}

// pageCRC returns the CRC field of a page whose stored bytes are page.
func pageCRC(page []byte) int32 { return int32(crc32.ChecksumIEEE(page)) }

// zstdPages decodes zstd pages with a bound on the memory a frame may
// claim.
var zstdPages, _ = zstd.NewReader(nil, zstd.WithDecoderConcurrency(1), zstd.WithDecoderMaxMemory(maxPageBytes),
	zstd.WithDecodeAllCapLimit(true))

// checkSizes checks a page header's sizes against the limits above and
// the bytes left in its chunk.
func checkSizes(h *format.PageHeader, codecID format.CompressionCodec, left int64) error {
	c, u := int64(h.CompressedPageSize), int64(h.UncompressedPageSize)
	switch {
	case c < 0 || u < 0:
		return fmt.Errorf("%w: negative page size", table.ErrCorrupt)
	case c > left:
		return fmt.Errorf("%w: page of %d bytes runs past its column chunk (%d bytes left)", table.ErrCorrupt, c, left)
	case codecID != format.Uncompressed && (u > maxPageBytes || u > max(pageRatio(codecID)*c, pageRatioFloor)):
		return fmt.Errorf("%w: page declares %d bytes uncompressed from %d compressed", table.ErrCorrupt, u, c)
	}
	return nil
}

// pageRatio returns the largest ratio of uncompressed to compressed size
// a page of the codec may declare past pageRatioFloor: maxPageRatio, or
// 2^15 for zstd and Brotli, whose run-length blocks compress a repeated
// value far beyond deflate's ratio (a 32 MiB text of one byte is a few KB
// of zstd).
func pageRatio(codecID format.CompressionCodec) int64 {
	if codecID == format.Zstd || codecID == format.Brotli {
		return 1 << 15
	}
	return maxPageRatio
}

// decompress decompresses a page body of the given codec into dst, and
// refuses one that would pass limit bytes (the size its header declares).
func decompress(codecID format.CompressionCodec, dst, src []byte, limit int) ([]byte, error) {
	var out []byte
	var err error
	switch codecID {
	case format.Uncompressed:
		return src, nil
	case format.Snappy:
		n, derr := s2.DecodedLen(src)
		if derr != nil {
			return nil, fmt.Errorf("%w: %v", table.ErrCorrupt, derr)
		}
		if n > limit {
			return nil, fmt.Errorf("%w: page decompresses to %d bytes, its header says %d", table.ErrCorrupt, n, limit)
		}
		out, err = s2.Decode(dst[:cap(dst)], src)
	case format.Zstd:
		// At most limit+1 bytes (the decoder stops at the buffer's
		// capacity), so a frame cannot make it allocate more than the
		// header declares.
		out, err = zstdPages.DecodeAll(src, grow(dst, limit+1)[:0])
	case format.Gzip:
		var zr io.Reader
		if zr, err = gzip.NewReader(bytes.NewReader(src)); err == nil {
			out, err = readLimited(dst, zr, limit)
		}
	case format.Brotli:
		out, err = readLimited(dst, brotli.NewReader(bytes.NewReader(src)), limit)
	case format.Lz4Raw:
		// One block into a buffer of the declared size: the decoder's
		// own loop doubles its buffer on any error, a corrupt block
		// included, until memory runs out.
		out = grow(dst, limit)
		var n int
		if n, err = lz4.UncompressBlock(src, out); err == nil {
			out = out[:n]
		}
	default:
		dec := parquet.LookupCompressionCodec(codecID)
		if dec == nil {
			return nil, fmt.Errorf("%w: unknown codec %v", table.ErrCorrupt, codecID)
		}
		out, err = dec.Decode(dst[:0], src)
	}
	if err != nil {
		return nil, fmt.Errorf("%w: decompressing a page: %v", table.ErrCorrupt, err)
	}
	if len(out) > limit {
		return nil, fmt.Errorf("%w: page decompresses to more than the %d bytes its header says", table.ErrCorrupt, limit)
	}
	return out, nil
}

// readLimited reads a decompressing reader into dst, stopping past limit
// bytes.
func readLimited(dst []byte, zr io.Reader, limit int) ([]byte, error) {
	w := bytes.NewBuffer(dst[:0])
	if _, err := io.Copy(w, io.LimitReader(zr, int64(limit)+1)); err != nil {
		return nil, err
	}
	return w.Bytes(), nil
}

// hybridRuns returns the number of values that the runs of the RLE /
// bit-packing hybrid in b declare (a bit-packed run counts its groups of
// 8), for values of the given bit width, and fails as soon as they pass
// limit or run past b.
func hybridRuns(b []byte, width int, limit int64) (int64, error) {
	var total int64
	for i := 0; i < len(b); {
		h, n := binary.Uvarint(b[i:])
		if n <= 0 {
			return 0, fmt.Errorf("%w: bad run header", table.ErrCorrupt)
		}
		i += n
		var count, size uint64
		if h&1 != 0 {
			count, size = (h>>1)*8, (h>>1)*uint64(width)
		} else {
			count, size = h>>1, uint64(width+7)/8
		}
		if count > uint64(limit-total) {
			return 0, fmt.Errorf("%w: runs declare more than the page's %d values", table.ErrCorrupt, limit-runSlack)
		}
		total += int64(count)
		if size > uint64(len(b)-i) {
			if h&1 == 0 {
				return 0, fmt.Errorf("%w: run past the end of its section", table.ErrCorrupt)
			}
			size = uint64(len(b) - i) // a last bit-packed group may be cut short
		}
		i += int(size)
	}
	return total, nil
}

// pageGuard checks each page of a column chunk before the decoder reads
// it: the header's sizes and counts against the limits above, the CRC,
// and the runs of the RLE / bit-packing hybrid in its definition levels,
// dictionary indices and booleans, so that no page makes the decoder
// allocate more than its bytes can hold.
type pageGuard struct {
	ra       io.ReaderAt
	pos, end int64
	page     int // 1-based number of the last page checked
	codec    format.CompressionCodec
	maxDef   byte
	phys     parquet.Kind
	rows     int64 // rows in the row group
	hbuf     []byte
	raw      []byte
	plain    []byte
}

// start begins a chunk: ra holds the file of size fileSize, md is the
// chunk's metadata, first the codec of the column's first chunk and rows
// the row group's row count. The pages are found where the decoder will
// look for them, and decompressed as it will: with the codec of the
// column's first chunk, which it applies to every chunk of the column, so
// a chunk of another codec is refused rather than decoded as garbage.
func (g *pageGuard) start(ra io.ReaderAt, fileSize int64, md *format.ColumnMetaData, first format.CompressionCodec, rows int64, l *leaf) error {
	if md.Codec != first {
		return fmt.Errorf("%w: column chunk compressed with %v where the column's first is %v (a column's chunks are read with one codec)", table.ErrCorrupt, md.Codec, first)
	}
	g.ra, g.codec, g.maxDef, g.phys, g.rows, g.page = ra, md.Codec, l.maxDef, l.phys, rows, 0
	g.pos = md.DataPageOffset
	if md.DictionaryPageOffset != 0 {
		g.pos = md.DictionaryPageOffset
	}
	size := md.TotalCompressedSize
	if g.pos < 4 || size < 0 || g.pos > fileSize || size > fileSize-g.pos {
		return fmt.Errorf("%w: column chunk of %d bytes at byte %d, in a file of %d", table.ErrCorrupt, size, g.pos, fileSize)
	}
	g.end = g.pos + size
	return nil
}

// next checks the chunk's pages up to and including its next data page
// (what the decoder reads next).
func (g *pageGuard) next() error {
	for g.pos < g.end {
		g.page++
		data, err := g.check()
		if err != nil {
			return fmt.Errorf("page %d: %w", g.page, err)
		}
		if data {
			return nil
		}
	}
	return nil
}

// check checks the page at g.pos, moves past it and reports whether it is
// a data page.
func (g *pageGuard) check() (bool, error) {
	h, hlen, err := readPageHeader(g.ra, g.pos, g.end, &g.hbuf)
	if err != nil {
		return false, err
	}
	body := g.pos + int64(hlen)
	if err := checkSizes(h, g.codec, g.end-body); err != nil {
		return false, err
	}
	g.raw = grow(g.raw, int(h.CompressedPageSize))
	if _, err := g.ra.ReadAt(g.raw, body); err != nil {
		return false, err
	}
	g.pos = body + int64(h.CompressedPageSize)
	if err := checkCRC(h, g.raw); err != nil {
		return false, err
	}
	switch h.Type {
	case format.DictionaryPage:
		dp, ok := h.DictionaryPageHeader.Get()
		if !ok {
			return false, fmt.Errorf("%w: dictionary page without its header", table.ErrCorrupt)
		}
		return false, g.checkDict(h, dp)
	case format.DataPage:
		dp, ok := h.DataPageHeader.Get()
		if !ok {
			return false, fmt.Errorf("%w: data page without its header", table.ErrCorrupt)
		}
		return true, g.checkV1(h, dp)
	case format.DataPageV2:
		dp, ok := h.DataPageHeaderV2.Get()
		if !ok {
			return false, fmt.Errorf("%w: data page without its header", table.ErrCorrupt)
		}
		return true, g.checkV2(h, dp)
	}
	return false, fmt.Errorf("%w: page of type %v in a column chunk", table.ErrCorrupt, h.Type)
}

// checkDict checks a dictionary page: its values (PLAIN, in a valid file)
// each take at least a bit (a boolean).
func (g *pageGuard) checkDict(h *format.PageHeader, dp format.DictionaryPageHeader) error {
	body, err := decompress(g.codec, g.plain, g.raw, int(h.UncompressedPageSize))
	if err != nil {
		return err
	}
	g.keep(body)
	n := int64(dp.NumValues)
	if n < 0 || n > 8*int64(len(body))+8 {
		return fmt.Errorf("%w: dictionary page declares %d values in %d bytes", table.ErrCorrupt, n, len(body))
	}
	// The decoder takes the dictionary's encoding from its header.
	return g.checkValues(dp.Encoding, body, n)
}

// keep remembers body's buffer for the next page, unless it is the raw
// page itself.
func (g *pageGuard) keep(body []byte) {
	if len(body) > 0 && len(g.raw) > 0 && &body[0] == &g.raw[0] {
		return
	}
	g.plain = body
}

// checkCount checks a data page's value count against the row group and
// the page's size as stored (compressed): bounding it by the decompressed
// size would let a few hundred bytes of zstd that decompress to 16 MiB
// claim 2^27 values, for which the decoder sizes its arrays.
func (g *pageGuard) checkCount(n int64, size int) error {
	if n < 0 || n > g.rows {
		return fmt.Errorf("%w: page declares %d values in a row group of %d rows", table.ErrCorrupt, n, g.rows)
	}
	if n > max(8*int64(size), sparseValues) {
		return fmt.Errorf("%w: page declares %d values in %d bytes", table.ErrCorrupt, n, size)
	}
	return nil
}

// checkV1 checks a format version 1 data page: definition levels (with a
// 4-byte length) then values, all compressed together.
func (g *pageGuard) checkV1(h *format.PageHeader, dp format.DataPageHeader) error {
	body, err := decompress(g.codec, g.plain, g.raw, int(h.UncompressedPageSize))
	if err != nil {
		return err
	}
	g.keep(body)
	n := int64(dp.NumValues)
	if err := g.checkCount(n, len(g.raw)); err != nil {
		return err
	}
	vals := body
	if g.maxDef > 0 {
		if len(body) < 4 {
			return fmt.Errorf("%w: page too short for its definition levels", table.ErrCorrupt)
		}
		// Whatever their encoding, the decoder takes the levels' length
		// from a 4-byte prefix; bit-packed levels (the deprecated
		// encoding) are as many as their bytes hold, so only the hybrid's
		// runs are walked.
		l := binary.LittleEndian.Uint32(body)
		if uint64(l) > uint64(len(body)-4) {
			return fmt.Errorf("%w: definition levels of %d bytes in a page of %d", table.ErrCorrupt, l, len(body))
		}
		if dp.DefinitionLevelEncoding != format.BitPacked {
			if _, err := hybridRuns(body[4:4+l], bits.Len8(g.maxDef), n+runSlack); err != nil {
				return fmt.Errorf("definition levels: %w", err)
			}
		}
		vals = body[4+l:]
	}
	return g.checkValues(dp.Encoding, vals, n)
}

// checkV2 checks a format version 2 data page: levels uncompressed ahead
// of the values, which may be compressed.
func (g *pageGuard) checkV2(h *format.PageHeader, dp format.DataPageHeaderV2) error {
	rl, dl := int64(dp.RepetitionLevelsByteLength), int64(dp.DefinitionLevelsByteLength)
	if rl < 0 || dl < 0 || rl+dl > int64(len(g.raw)) {
		return fmt.Errorf("%w: level lengths past the page", table.ErrCorrupt)
	}
	levels := g.raw[rl : rl+dl]
	vals := g.raw[rl+dl:]
	if c, ok := dp.IsCompressed.Get(); !ok || c {
		var err error
		if vals, err = decompress(g.codec, g.plain, vals, int(h.UncompressedPageSize)); err != nil {
			return err
		}
		g.keep(vals)
	}
	n := int64(dp.NumValues)
	if err := g.checkCount(n, len(g.raw)); err != nil {
		return err
	}
	if nn := int64(dp.NumNulls); nn < 0 || nn > n {
		return fmt.Errorf("%w: page declares %d nulls in %d values", table.ErrCorrupt, nn, n)
	}
	if g.maxDef > 0 && dl > 0 {
		if _, err := hybridRuns(levels, bits.Len8(g.maxDef), n+runSlack); err != nil {
			return fmt.Errorf("definition levels: %w", err)
		}
	}
	return g.checkValues(dp.Encoding, vals, n)
}

// checkValues checks the runs of a page's values where they are runs:
// dictionary indices (a bit width byte, then the hybrid), RLE booleans (a
// 4-byte length, then the hybrid) and delta encodings (value counts in
// their headers, and the length of the byte arrays that prefixes rebuild).
func (g *pageGuard) checkValues(enc format.Encoding, vals []byte, n int64) error {
	switch {
	case enc == format.RLEDictionary || enc == format.PlainDictionary:
		if len(vals) == 0 {
			return nil
		}
		if w := int(vals[0]); w <= 32 {
			if _, err := hybridRuns(vals[1:], w, n+runSlack); err != nil {
				return fmt.Errorf("dictionary indices: %w", err)
			}
		}
	case enc == format.DeltaBinaryPacked || enc == format.DeltaLengthByteArray:
		// The values, or the lengths of the byte arrays that follow them.
		if _, err := deltaRun(vals, n+runSlack); err != nil {
			return fmt.Errorf("delta values: %w", err)
		}
	case enc == format.DeltaByteArray:
		return checkDeltaByteArray(vals, n+runSlack)
	case enc == format.RLE && g.phys == parquet.Boolean:
		if len(vals) < 4 {
			return nil
		}
		l := uint64(binary.LittleEndian.Uint32(vals))
		if l > uint64(len(vals)-4) {
			return fmt.Errorf("%w: boolean runs of %d bytes in %d", table.ErrCorrupt, l, len(vals)-4)
		}
		if _, err := hybridRuns(vals[4:4+l], 1, n+runSlack); err != nil {
			return fmt.Errorf("booleans: %w", err)
		}
	}
	return nil
}

// deltaRun reads the header of a DELTA_BINARY_PACKED run at the start of
// b and walks its blocks without unpacking them: it returns the bytes the
// run takes, and fails if its value count passes limit or its blocks pass
// the end of b (layout from the Parquet format's Encodings.md).
func deltaRun(b []byte, limit int64) (int, error) {
	var h [3]uint64
	i := 0
	for k := range h {
		v, n := binary.Uvarint(b[i:])
		if n <= 0 {
			return 0, fmt.Errorf("%w: bad delta header", table.ErrCorrupt)
		}
		h[k], i = v, i+n
	}
	if _, n := binary.Varint(b[i:]); n <= 0 {
		return 0, fmt.Errorf("%w: bad delta header", table.ErrCorrupt)
	} else {
		i += n
	}
	block, minis, total := h[0], h[1], h[2]
	if block == 0 || block%128 != 0 || block > 1<<20 || minis == 0 || block%minis != 0 || (block/minis)%32 != 0 {
		return 0, fmt.Errorf("%w: bad delta block layout (%d values in %d miniblocks)", table.ErrCorrupt, block, minis)
	}
	if total > uint64(limit) {
		return 0, fmt.Errorf("%w: delta run declares %d values, more than the page's %d", table.ErrCorrupt, total, limit-runSlack)
	}
	mini := block / minis
	for left := int64(total) - 1; left > 0; {
		if _, n := binary.Varint(b[i:]); n <= 0 {
			return 0, fmt.Errorf("%w: delta run cut short", table.ErrCorrupt)
		} else {
			i += n
		}
		if uint64(len(b)-i) < minis {
			return 0, fmt.Errorf("%w: delta run cut short", table.ErrCorrupt)
		}
		widths := b[i : i+int(minis)]
		i += int(minis)
		for _, w := range widths {
			if left <= 0 {
				break
			}
			if w > 64 {
				return 0, fmt.Errorf("%w: delta bit width %d", table.ErrCorrupt, w)
			}
			// A last miniblock may be cut short (the decoder pads it).
			i += int(min(mini*uint64(w)/8, uint64(len(b)-i)))
			left -= int64(min(mini, uint64(left)))
		}
	}
	return i, nil
}

// checkDeltaByteArray checks a DELTA_BYTE_ARRAY section: prefix lengths
// and suffix lengths (two delta runs of at most limit values), then the
// suffixes. Each value repeats a prefix of the one before, so a few bytes
// of lengths can rebuild values far longer than the page: their total is
// bounded as a decompressed page's size is.
func checkDeltaByteArray(b []byte, limit int64) error {
	np, err := deltaRun(b, limit)
	if err != nil {
		return fmt.Errorf("prefix lengths: %w", err)
	}
	ns, err := deltaRun(b[np:], limit)
	if err != nil {
		return fmt.Errorf("suffix lengths: %w", err)
	}
	var dec delta.BinaryPackedEncoding
	var total int64
	for _, sec := range [][]byte{b[:np], b[np : np+ns]} {
		lengths, err := dec.DecodeInt32(nil, sec)
		if err != nil {
			return fmt.Errorf("%w: byte array lengths: %v", table.ErrCorrupt, err)
		}
		for _, l := range lengths {
			total += int64(max(l, 0))
		}
	}
	if bound := max(maxPageRatio*int64(len(b)), pageRatioFloor); total > bound || total > maxPageBytes {
		return fmt.Errorf("%w: delta byte arrays of %d bytes in a page of %d bytes", table.ErrCorrupt, total, len(b))
	}
	return nil
}
