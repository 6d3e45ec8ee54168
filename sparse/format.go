package sparse

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"hash"
	"hash/crc32"
	"io"
	"math"
	"os"
)

// The matrix file format, version 1. All numbers are little-endian.
//
//	offset  size        field
//	0       8           magic "\x89DSMCSC\n"
//	8       4           format version (1)
//	12      4           flags: bit 0 set if squared-weight sums follow the values
//	16      8           rows
//	24      8           columns
//	32      8           stored entries (nnz)
//	40      4           CRC-32C (Castagnoli) of bytes 0-39
//	44      4           zero
//	48      4·cols      entries of each column (uint32)
//	        4·nnz       row index of each entry, column by column (uint32)
//	        8·nnz       values (IEEE-754 float64)
//	        8·nnz       squared-weight sums (float64), if flag bit 0
//	        4           CRC-32C of every byte before it
//
// Rows and columns are at most 2^31-1. The row indices of a column are
// strictly increasing and the values finite, as in memory.
const (
	formatMagic   = "\x89DSMCSC\n"
	formatVersion = 1
	headerSize    = 48
	flagSumW2     = 1
)

// ErrFormat is wrapped by every error that reports a file that is not a
// valid matrix file (wrong magic, unsupported version, truncation,
// checksum mismatch, inconsistent content).
var ErrFormat = errors.New("invalid matrix file")

var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// formatErr returns an error wrapping ErrFormat.
func formatErr(format string, args ...any) error {
	return fmt.Errorf("%w: %s", ErrFormat, fmt.Sprintf(format, args...))
}

// EncodedSize returns the size in bytes of m in the file format.
func (m *Matrix) EncodedSize() int64 {
	per := int64(12)
	if m.sumw2 != nil {
		per += 8
	}
	return headerSize + 4*int64(m.cols) + per*int64(len(m.val)) + 4
}

// WriteTo writes m in the file format to w. It implements io.WriterTo.
func (m *Matrix) WriteTo(w io.Writer) (int64, error) {
	if m.rows > math.MaxInt32 || m.cols > math.MaxInt32 {
		return 0, fmt.Errorf("sparse: a %d×%d matrix is too large for the file format", m.rows, m.cols)
	}
	for j := 0; j < m.cols; j++ {
		if m.colPtr[j+1]-m.colPtr[j] > math.MaxUint32 {
			return 0, fmt.Errorf("sparse: column %d has too many entries for the file format", j)
		}
	}
	ew := &encWriter{w: w, crc: crc32.New(castagnoli), buf: make([]byte, 0, 1<<16)}
	var hdr [headerSize]byte
	copy(hdr[:8], formatMagic)
	binary.LittleEndian.PutUint32(hdr[8:], formatVersion)
	var flags uint32
	if m.sumw2 != nil {
		flags |= flagSumW2
	}
	binary.LittleEndian.PutUint32(hdr[12:], flags)
	binary.LittleEndian.PutUint64(hdr[16:], uint64(m.rows))
	binary.LittleEndian.PutUint64(hdr[24:], uint64(m.cols))
	binary.LittleEndian.PutUint64(hdr[32:], uint64(len(m.val)))
	binary.LittleEndian.PutUint32(hdr[40:], crc32.Checksum(hdr[:40], castagnoli))
	ew.put(hdr[:])
	for j := 0; j < m.cols; j++ {
		ew.u32(uint32(m.colPtr[j+1] - m.colPtr[j]))
	}
	for _, i := range m.rowIdx {
		ew.u32(uint32(i))
	}
	for _, v := range m.val {
		ew.u64(math.Float64bits(v))
	}
	for _, v := range m.sumw2 {
		ew.u64(math.Float64bits(v))
	}
	ew.flush()
	if ew.err == nil {
		var tail [4]byte
		binary.LittleEndian.PutUint32(tail[:], ew.crc.Sum32())
		var n int
		n, ew.err = w.Write(tail[:])
		ew.n += int64(n)
	}
	return ew.n, ew.err
}

// encWriter buffers encoded numbers, checksums and writes them.
type encWriter struct {
	w   io.Writer
	crc hash.Hash32
	buf []byte
	n   int64
	err error
}

func (e *encWriter) flush() {
	if e.err != nil || len(e.buf) == 0 {
		e.buf = e.buf[:0]
		return
	}
	e.crc.Write(e.buf)
	var n int
	n, e.err = e.w.Write(e.buf)
	e.n += int64(n)
	e.buf = e.buf[:0]
}

func (e *encWriter) put(p []byte) {
	if len(e.buf)+len(p) > cap(e.buf) {
		e.flush()
	}
	e.buf = append(e.buf, p...)
}

func (e *encWriter) u32(v uint32) {
	if len(e.buf)+4 > cap(e.buf) {
		e.flush()
	}
	e.buf = binary.LittleEndian.AppendUint32(e.buf, v)
}

func (e *encWriter) u64(v uint64) {
	if len(e.buf)+8 > cap(e.buf) {
		e.flush()
	}
	e.buf = binary.LittleEndian.AppendUint64(e.buf, v)
}

// Load reads a matrix file written by WriteTo. A file that is not a valid matrix
// file gives an error wrapping ErrFormat that says what is wrong.
func Load(path string) (*Matrix, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("sparse: loading %s: %w", path, err)
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("sparse: loading %s: %w", path, err)
	}
	m, err := read(bufio.NewReaderSize(f, 1<<20), st.Size())
	if err != nil {
		return nil, fmt.Errorf("sparse: loading %s: %w", path, err)
	}
	return m, nil
}

// Read reads a matrix in the file format from r, up to the end of the
// matrix (it does not read beyond the trailing checksum). Errors about
// the content wrap ErrFormat.
func Read(r io.Reader) (*Matrix, error) {
	m, err := read(r, -1)
	if err != nil {
		return nil, fmt.Errorf("sparse: reading a matrix: %w", err)
	}
	return m, nil
}

// decReader reads and checksums the payload in pieces, so that a header
// announcing more data than there is fails on truncation before the
// announced sizes are allocated.
type decReader struct {
	r   io.Reader
	crc hash.Hash32
	buf []byte
}

// next returns the next n bytes (n ≤ cap of buf) or a truncation error
// naming what was being read.
func (d *decReader) next(n int, what string) ([]byte, error) {
	b := d.buf[:n]
	if k, err := io.ReadFull(d.r, b); err != nil {
		if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
			return nil, formatErr("truncated while reading %s (%d of %d bytes present); the file is incomplete, write it again", what, k, n)
		}
		return nil, err
	}
	d.crc.Write(b)
	return b, nil
}

const readPiece = 1 << 16 // bytes decoded at a time

func (d *decReader) u32s(n int, what string, fn func(i int, v uint32) error) error {
	for i := 0; i < n; {
		k := min(n-i, readPiece/4)
		b, err := d.next(4*k, what)
		if err != nil {
			return err
		}
		for q := 0; q < k; q++ {
			if err := fn(i+q, binary.LittleEndian.Uint32(b[4*q:])); err != nil {
				return err
			}
		}
		i += k
	}
	return nil
}

func (d *decReader) f64s(n int, what string, dst []float64) ([]float64, error) {
	for i := 0; i < n; {
		k := min(n-i, readPiece/8)
		b, err := d.next(8*k, what)
		if err != nil {
			return nil, err
		}
		for q := 0; q < k; q++ {
			dst = append(dst, math.Float64frombits(binary.LittleEndian.Uint64(b[8*q:])))
		}
		i += k
	}
	return dst, nil
}

// read decodes a matrix; size is the total input size if known, else -1.
func read(r io.Reader, size int64) (*Matrix, error) {
	d := &decReader{r: r, crc: crc32.New(castagnoli), buf: make([]byte, readPiece)}
	hdr, err := d.next(headerSize, "the header")
	if err != nil {
		return nil, err
	}
	if string(hdr[:8]) != formatMagic {
		return nil, formatErr("not a desmear matrix file (wrong magic bytes %q)", hdr[:8])
	}
	if got := binary.LittleEndian.Uint32(hdr[40:]); got != crc32.Checksum(hdr[:40], castagnoli) {
		return nil, formatErr("header checksum mismatch; the file is corrupted")
	}
	if v := binary.LittleEndian.Uint32(hdr[8:]); v != formatVersion {
		return nil, formatErr("format version %d, this program reads version %d; use a matching desmear version", v, formatVersion)
	}
	flags := binary.LittleEndian.Uint32(hdr[12:])
	if flags&^flagSumW2 != 0 {
		return nil, formatErr("unknown flags %#x in the header", flags)
	}
	if binary.LittleEndian.Uint32(hdr[44:]) != 0 {
		return nil, formatErr("reserved header bytes 44-47 are not zero")
	}
	rows64, cols64, nnz64 := binary.LittleEndian.Uint64(hdr[16:]), binary.LittleEndian.Uint64(hdr[24:]), binary.LittleEndian.Uint64(hdr[32:])
	if rows64 > math.MaxInt32 || cols64 > math.MaxInt32 {
		return nil, formatErr("dimensions %d×%d out of range", rows64, cols64)
	}
	rows, cols := int(rows64), int(cols64)
	if nnz64 > rows64*cols64 || nnz64 > 1<<40 {
		return nil, formatErr("%d stored entries for a %d×%d matrix", nnz64, rows, cols)
	}
	nnz := int(nnz64)
	hasW2 := flags&flagSumW2 != 0
	per := int64(12)
	if hasW2 {
		per += 8
	}
	want := headerSize + 4*int64(cols) + per*int64(nnz) + 4
	if size >= 0 && size != want {
		if size < want {
			return nil, formatErr("truncated: %d bytes, the header announces %d; the file is incomplete, write it again", size, want)
		}
		return nil, formatErr("%d bytes, the header announces %d; trailing data", size, want)
	}
	// Below, slices grow as data arrives unless the size was checked.
	grow := func(n int) int {
		if size >= 0 {
			return n
		}
		return min(n, 1<<16)
	}

	colPtr := make([]int, 1, grow(cols+1))
	err = d.u32s(cols, "the column counts", func(j int, v uint32) error {
		next := colPtr[j] + int(v)
		if next > nnz {
			return formatErr("column %d ends at entry %d, beyond the %d stored entries", j, next, nnz)
		}
		colPtr = append(colPtr, next)
		return nil
	})
	if err != nil {
		return nil, err
	}
	if colPtr[cols] != nnz {
		return nil, formatErr("the columns hold %d entries, the header announces %d", colPtr[cols], nnz)
	}
	rowIdx := make([]int, 0, grow(nnz))
	col := 0
	err = d.u32s(nnz, "the row indices", func(k int, v uint32) error {
		for colPtr[col+1] <= k {
			col++
		}
		i := int(v)
		if i >= rows {
			return formatErr("row index %d out of range [0,%d) in column %d", i, rows, col)
		}
		if k > colPtr[col] && i <= rowIdx[k-1] {
			return formatErr("row indices of column %d are not strictly increasing (%d after %d)", col, i, rowIdx[k-1])
		}
		rowIdx = append(rowIdx, i)
		return nil
	})
	if err != nil {
		return nil, err
	}
	val, err := d.f64s(nnz, "the values", make([]float64, 0, grow(nnz)))
	if err != nil {
		return nil, err
	}
	var sumw2 []float64
	if hasW2 {
		if sumw2, err = d.f64s(nnz, "the squared-weight sums", make([]float64, 0, grow(nnz))); err != nil {
			return nil, err
		}
	}
	sum := d.crc.Sum32()
	tail := d.buf[:4]
	if k, err := io.ReadFull(d.r, tail); err != nil {
		if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
			return nil, formatErr("truncated in the trailing checksum (%d of 4 bytes present); the file is incomplete, write it again", k)
		}
		return nil, err
	}
	if binary.LittleEndian.Uint32(tail) != sum {
		return nil, formatErr("checksum mismatch; the file is corrupted")
	}
	m, err := NewMatrix(rows, cols, colPtr, rowIdx, val, sumw2)
	if err != nil {
		return nil, fmt.Errorf("%w: %v", ErrFormat, err)
	}
	return m, nil
}
