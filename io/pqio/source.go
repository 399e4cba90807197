package pqio

import (
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"os"
	"reflect"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/encoding/thrift"
	"github.com/parquet-go/parquet-go/format"

	"manyfold/io/table"
)

// Source is one Parquet file, or several with the same columns read one
// after the other (the parts of a dataset, OpenSources), whose column
// chunks a writer copies into its output as they are, still encoded and
// compressed, instead of decoding and encoding their values again. A writer
// given a Source writes row groups of the Source's row group sizes (every
// part's, in order), so that every copied chunk lands in a row group of the
// same rows. Pages are copied byte for byte when their codec is the
// output's, and otherwise decompressed and compressed again with the
// output's codec, page by page, their values untouched.
type Source struct {
	name   string // the first part's path, or "N files from PATH"
	parts  []*sourceFile
	groups []groupRef // every part's row groups, in order
	rows   int64
	cols   map[string]*topColumn // the first part's top-level columns, by name
	differ map[string]string     // a column whose layout differs in a later part: that part
}

// groupRef is row group g of part p.
type groupRef struct{ p, g int32 }

// sourceFile is one part of a Source. Its file is open only while it is
// read (open, close), so that a Source of thousands of parts does not hold
// thousands of files open.
type sourceFile struct {
	name string
	f    *os.File // nil while closed
	size int64    // of the file
	meta *format.FileMetaData
	cols map[string]*topColumn // the top-level columns, flat or nested, by name
}

// OpenSource opens the Parquet file at path as a Source.
func OpenSource(path string) (*Source, error) { return OpenSources([]string{path}) }

// OpenSources opens the Parquet files at paths as one Source, their rows
// one file after the other. A column is copied only when every file lays
// it out alike (the same schema subtree at the same leaf position);
// CanCopy refuses the others.
func OpenSources(paths []string) (*Source, error) {
	if len(paths) == 0 {
		return nil, errors.New("a Source of no files")
	}
	s := &Source{name: paths[0], differ: map[string]string{}}
	if len(paths) > 1 {
		s.name = fmt.Sprintf("%d files from %s", len(paths), paths[0])
	}
	for i, path := range paths {
		sf, err := openSourceFile(path)
		if err != nil {
			s.Close()
			return nil, err
		}
		s.parts = append(s.parts, sf)
		for g := range sf.meta.RowGroups {
			s.groups = append(s.groups, groupRef{int32(i), int32(g)})
		}
		s.rows += sf.meta.NumRows
		if i == 0 {
			s.cols = sf.cols
			continue
		}
		for name, t := range s.cols {
			if _, ok := s.differ[name]; !ok && !sameLayout(t, sf.cols[name]) {
				s.differ[name] = path
			}
		}
	}
	return s, nil
}

// sameLayout reports whether two files hold a top-level column alike.
func sameLayout(a, b *topColumn) bool {
	return b != nil && a.first == b.first && reflect.DeepEqual(a.elems, b.elems) && reflect.DeepEqual(a.paths, b.paths)
}

// openSourceFile opens one part of a Source.
func openSourceFile(path string) (*sourceFile, error) {
	f, size, err := openSized(path)
	if err != nil {
		return nil, err
	}
	if err := checkFooter(path, f, size); err != nil {
		f.Close()
		return nil, err
	}
	pf, err := openFooter(f, size)
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w: %v", path, table.ErrCorrupt, err)
	}
	s := &sourceFile{name: path, f: f, size: size, meta: pf.Metadata(), cols: map[string]*topColumn{}}
	if err := checkRowCounts(s.meta); err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	// Every top-level column can be copied, a nested one (a list, a map,
	// a struct) as all its leaf columns and its schema subtree.
	tops, err := topColumns(s.meta.Schema)
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	for i := range tops {
		s.cols[tops[i].name] = &tops[i]
	}
	return s, s.close()
}

// open opens the part's file again, unless it is open; a file whose size
// changed since its footer was read is refused.
func (s *sourceFile) open() error {
	if s.f != nil {
		return nil
	}
	f, size, err := openSized(s.name)
	if err != nil {
		return err
	}
	if size != s.size {
		f.Close()
		return fmt.Errorf("%s: %w: the file changed while it was copied (%d bytes, then %d)", s.name, table.ErrCorrupt, s.size, size)
	}
	s.f = f
	return nil
}

// close closes the part's file, if it is open.
func (s *sourceFile) close() error {
	if s.f == nil {
		return nil
	}
	err := s.f.Close()
	s.f = nil
	return err
}

// openFooter opens the Parquet file f of the given size, turning a panic
// of the decoder on a footer it does not expect into an error.
func openFooter(f *os.File, size int64) (pf *parquet.File, err error) {
	defer func() {
		if p := recover(); p != nil {
			pf, err = nil, fmt.Errorf("reading the footer: %v", p)
		}
	}()
	return parquet.OpenFile(f, size, parquet.SkipPageIndex(true), parquet.SkipBloomFilters(true), parquet.ReadBufferSize(4096))
}

// Close closes the files still open.
func (s *Source) Close() error {
	var first error
	for _, p := range s.parts {
		if err := p.close(); err != nil && first == nil {
			first = err
		}
	}
	return first
}

// Name returns the file's path (the first file's, with their number, for
// several).
func (s *Source) Name() string { return s.name }

// NumRows returns the row count of every file.
func (s *Source) NumRows() int64 { return s.rows }

// numGroups returns the number of row groups of every file.
func (s *Source) numGroups() int { return len(s.groups) }

// groupRows returns the rows of row group g (counted across the files).
func (s *Source) groupRows(g int) int64 {
	r := s.groups[g]
	return s.parts[r.p].meta.RowGroups[r.g].NumRows
}

// ordered reports whether the file of row group g declares its columns'
// orders (without them, chunk statistics' min and max have no defined
// meaning).
func (s *Source) ordered(g int) bool { return len(s.parts[s.groups[g].p].meta.ColumnOrders) > 0 }

// copyChunk writes the chunk of leaf column col of row group g (counted
// across the files); see sourceFile.copyChunk.
func (s *Source) copyChunk(w io.Writer, off int64, col int, path []string, g int, out codec) (format.ColumnChunk, int64, error) {
	r := s.groups[g]
	for i, p := range s.parts {
		if i != int(r.p) {
			p.close() // one part open at a time: the row groups come in order
		}
	}
	return s.parts[r.p].copyChunk(w, off, col, path, int(r.g), out)
}

// CanCopy reports whether the top-level column of that name can be
// copied: every chunk of its leaf columns (one for a flat column, one per
// leaf of a nested one), in every file, whole and unencrypted, and laid out
// alike in every file. It reads the page headers of every chunk and checks
// that they fill the chunk and hold its values.
func (s *Source) CanCopy(name string) error {
	t, ok := s.cols[name]
	if !ok {
		return fmt.Errorf("%s: no top-level column %q", s.name, name)
	}
	if p, ok := s.differ[name]; ok {
		return fmt.Errorf("%s: column %q is laid out otherwise than in %s", p, name, s.parts[0].name)
	}
	for _, p := range s.parts {
		for l := range t.paths {
			if err := p.canCopyLeaf(name, t.first+l); err != nil {
				p.close()
				return err
			}
		}
		if len(s.parts) > 1 {
			p.close()
		}
	}
	return nil
}

// canCopyLeaf checks the chunks of leaf column col, part of the top-level
// column name.
func (s *sourceFile) canCopyLeaf(name string, col int) error {
	for g := range s.meta.RowGroups {
		rg := &s.meta.RowGroups[g]
		if col >= len(rg.Columns) {
			return fmt.Errorf("%s: row group %d has %d columns", s.name, g+1, len(rg.Columns))
		}
		cc := &rg.Columns[col]
		if cc.FilePath != "" || cc.CryptoMetadata.Value != nil || len(cc.EncryptedColumnMetadata) > 0 {
			return fmt.Errorf("%s: column %q: chunks in other files or encrypted are not copied", s.name, name)
		}
		start, size := chunkRange(&cc.MetaData)
		var values int64
		err := s.walk(start, size, cc.MetaData.Codec, func(h *format.PageHeader, hlen int, pos int64) error {
			if dp, ok := h.DataPageHeader.Get(); ok {
				values += int64(dp.NumValues)
			} else if dp, ok := h.DataPageHeaderV2.Get(); ok {
				values += int64(dp.NumValues)
			}
			return nil
		})
		if err != nil {
			return fmt.Errorf("%s: column %q, row group %d: %w", s.name, name, g+1, err)
		}
		if values != cc.MetaData.NumValues {
			return fmt.Errorf("%s: column %q, row group %d: %w: pages hold %d values, the metadata says %d", s.name, name, g+1, table.ErrCorrupt, values, cc.MetaData.NumValues)
		}
	}
	return nil
}

// chunkRange returns where a column chunk's pages start (its dictionary
// page, if it has one) and how many bytes they take.
func chunkRange(md *format.ColumnMetaData) (int64, int64) {
	start := md.DataPageOffset
	if md.DictionaryPageOffset > 0 && md.DictionaryPageOffset < start {
		start = md.DictionaryPageOffset
	}
	return start, md.TotalCompressedSize
}

// maxHeader bounds a page header's size (statistics included).
const maxHeader = 16 << 20

// walk calls f with each page header of the byte range [start,
// start+size) of a chunk of codec cid, its encoded length and position,
// and checks that the pages fill the range exactly and that their sizes
// are within the limits of checkSizes. Errors name the page (1-based).
func (s *sourceFile) walk(start, size int64, cid format.CompressionCodec, f func(h *format.PageHeader, hlen int, pos int64) error) error {
	if err := s.open(); err != nil {
		return err
	}
	end := start + size
	if start < 4 || size < 0 || start > s.size || size > s.size-start {
		return fmt.Errorf("%w: column chunk of %d bytes at byte %d, in a file of %d", table.ErrCorrupt, size, start, s.size)
	}
	var buf []byte
	for pos, page := start, 1; pos < end; page++ {
		h, hlen, err := readPageHeader(s.f, pos, end, &buf)
		if err == nil {
			err = checkSizes(h, cid, end-pos-int64(hlen))
		}
		if err == nil {
			err = f(h, hlen, pos)
		}
		if err != nil {
			return fmt.Errorf("page %d (byte %d): %w", page, pos, err)
		}
		pos += int64(hlen) + int64(h.CompressedPageSize)
	}
	return nil
}

// copyChunk writes the chunk of leaf column col of the file (at path in the schema, its
// first element the top-level column's name) in row group g to w at offset
// off, with codec out, and returns its metadata for the output's footer.
func (s *sourceFile) copyChunk(w io.Writer, off int64, col int, path []string, g int, out codec) (format.ColumnChunk, int64, error) {
	name := path[0]
	cc := s.meta.RowGroups[g].Columns[col]
	md := cc.MetaData
	start, size := chunkRange(&md)
	res := format.ColumnChunk{FileOffset: off, MetaData: md}
	rmd := &res.MetaData
	rmd.IndexPageOffset, rmd.BloomFilterOffset, rmd.BloomFilterLength = 0, 0, 0
	rmd.PathInSchema = path
	if md.Codec == out.id {
		if err := s.copyPages(w, start, size, md.Codec); err != nil {
			return res, 0, fmt.Errorf("%s: column %q, row group %d: %w", s.name, name, g+1, err)
		}
		shift := off - start
		rmd.DataPageOffset += shift
		if md.DictionaryPageOffset > 0 {
			rmd.DictionaryPageOffset += shift
		}
		return res, size, nil
	}
	// Transcode: page by page, decompress and compress again.
	dec := parquet.LookupCompressionCodec(md.Codec)
	if dec == nil {
		return res, 0, fmt.Errorf("%s: column %q: unknown codec %v", s.name, name, md.Codec)
	}
	var raw, plain, comp []byte
	written := int64(0)
	var uncomp int64
	dataOff, dictOff := int64(-1), int64(0)
	err := s.walk(start, size, md.Codec, func(h *format.PageHeader, hlen int, pos int64) error {
		raw = grow(raw, int(h.CompressedPageSize))
		if _, err := s.f.ReadAt(raw, pos+int64(hlen)); err != nil {
			return err
		}
		if err := checkCRC(h, raw); err != nil {
			return err
		}
		keep := 0 // leading bytes that are not compressed (v2 levels)
		compressed := true
		if v2, ok := h.DataPageHeaderV2.Get(); ok {
			keep = int(v2.DefinitionLevelsByteLength + v2.RepetitionLevelsByteLength)
			if keep > len(raw) || keep < 0 {
				return fmt.Errorf("%w: level lengths past the page", table.ErrCorrupt)
			}
			if c, ok := v2.IsCompressed.Get(); ok && !c {
				compressed = false
			}
		}
		var err error
		body := raw[keep:]
		if compressed && md.Codec != format.Uncompressed {
			if body, err = decompress(md.Codec, plain, body, int(h.UncompressedPageSize)); err != nil {
				return err
			}
			plain = body
		}
		if compressed {
			if comp, err = out.enc(comp[:0], body); err != nil {
				return err
			}
			body = comp
		}
		nh := *h
		nh.CRC = int32(crc32.Update(crc32.ChecksumIEEE(raw[:keep]), crc32.IEEETable, body))
		nh.CompressedPageSize = int32(keep + len(body))
		hb, err := thrift.Marshal(&compact, &nh)
		if err != nil {
			return err
		}
		switch {
		case h.Type == format.DictionaryPage:
			dictOff = off + written
		case dataOff < 0:
			dataOff = off + written
		}
		for _, part := range [][]byte{hb, raw[:keep], body} {
			if _, err := w.Write(part); err != nil {
				return err
			}
			written += int64(len(part))
		}
		uncomp += int64(len(hb)) + int64(h.UncompressedPageSize)
		return nil
	})
	if err != nil {
		return res, 0, fmt.Errorf("%s: column %q, row group %d: %w", s.name, name, g+1, err)
	}
	rmd.Codec = out.id
	rmd.TotalCompressedSize, rmd.TotalUncompressedSize = written, uncomp
	rmd.DataPageOffset, rmd.DictionaryPageOffset = dataOff, dictOff
	return res, written, nil
}

// copyPages copies the pages of the byte range [start, start+size) to w as
// they are, after checking each page's CRC.
func (s *sourceFile) copyPages(w io.Writer, start, size int64, cid format.CompressionCodec) error {
	var page []byte
	return s.walk(start, size, cid, func(h *format.PageHeader, hlen int, pos int64) error {
		// The header and the body in one read.
		page = grow(page, hlen+int(h.CompressedPageSize))
		if _, err := s.f.ReadAt(page, pos); err != nil {
			return err
		}
		if err := checkCRC(h, page[hlen:]); err != nil {
			return err
		}
		_, err := w.Write(page)
		return err
	})
}
