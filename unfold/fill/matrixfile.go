package fill

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"os"

	"github.com/desmear/desmear/sparse"
)

// The matrix file of a bundle, little-endian:
//
//	magic "DSMRMIG1" | rows, cols, nnz (uint64 each) |
//	colPtr (cols+1 × uint64) | rowIdx (nnz × uint64) |
//	values (nnz × float64) | sumw2 (nnz × float64) | CRC-32 (IEEE) of
//	everything before it (uint32)
var matrixMagic = [8]byte{'D', 'S', 'M', 'R', 'M', 'I', 'G', '1'}

func writeMatrix(w io.Writer, m *sparse.Matrix) error {
	crc := crc32.NewIEEE()
	bw := bufio.NewWriter(io.MultiWriter(w, crc))
	rows, cols := m.Dims()
	sumw2 := m.SumW2()
	if sumw2 == nil {
		sumw2 = make([]float64, m.NNZ())
	}
	var buf [8]byte
	put := func(v uint64) {
		binary.LittleEndian.PutUint64(buf[:], v)
		bw.Write(buf[:])
	}
	bw.Write(matrixMagic[:])
	put(uint64(rows))
	put(uint64(cols))
	put(uint64(m.NNZ()))
	for _, p := range m.ColPtr() {
		put(uint64(p))
	}
	for _, r := range m.RowIdx() {
		put(uint64(r))
	}
	for _, v := range m.Values() {
		put(math.Float64bits(v))
	}
	for _, v := range sumw2 {
		put(math.Float64bits(v))
	}
	if err := bw.Flush(); err != nil {
		return err
	}
	binary.LittleEndian.PutUint32(buf[:4], crc.Sum32())
	_, err := w.Write(buf[:4])
	return err
}

func readMatrix(path string) (*sparse.Matrix, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	bad := func(what string) error {
		return fmt.Errorf("%s: %s (the file is damaged; rebuild the response)", path, what)
	}
	if len(b) < 8+24+4 || [8]byte(b[:8]) != matrixMagic {
		return nil, bad("not a migration-matrix file")
	}
	body, sum := b[:len(b)-4], binary.LittleEndian.Uint32(b[len(b)-4:])
	if crc32.ChecksumIEEE(body) != sum {
		return nil, bad("checksum mismatch")
	}
	p := body[8:]
	get := func() uint64 {
		v := binary.LittleEndian.Uint64(p)
		p = p[8:]
		return v
	}
	rows, cols, nnz := get(), get(), get()
	if rows > math.MaxInt32 || cols > math.MaxInt32 || nnz > uint64(len(p))/8 {
		return nil, bad("impossible dimensions")
	}
	if uint64(len(p)) != 8*(cols+1+3*nnz) {
		return nil, bad("wrong length")
	}
	colPtr := make([]int, cols+1)
	for i := range colPtr {
		colPtr[i] = int(get())
	}
	rowIdx := make([]int, nnz)
	for i := range rowIdx {
		rowIdx[i] = int(get())
	}
	val := make([]float64, nnz)
	for i := range val {
		val[i] = math.Float64frombits(get())
	}
	sumw2 := make([]float64, nnz)
	for i := range sumw2 {
		sumw2[i] = math.Float64frombits(get())
	}
	m, err := sparse.NewMatrix(int(rows), int(cols), colPtr, rowIdx, val, sumw2)
	if err != nil {
		return nil, errors.Join(bad("inconsistent matrix"), err)
	}
	return m, nil
}
