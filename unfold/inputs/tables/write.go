package tables

import (
	"bufio"
	"fmt"
	"io"
	"strconv"

	"github.com/desmear/desmear/sparse"
)

// WriteResponse writes m (reco × truth) as a response table: a header
// reco,truth,value (plus sumw2 when m carries sums of squared weights)
// and one row per stored entry, column by column. Values are written in
// the shortest form that reads back to the same float64.
func WriteResponse(w io.Writer, m *sparse.Matrix) error {
	bw := bufio.NewWriter(w)
	sumw2 := m.SumW2()
	rows, cols := m.Dims()
	fmt.Fprintf(bw, "# response: %d reco × %d truth bins, %d entries\n", rows, cols, m.NNZ())
	if sumw2 != nil {
		bw.WriteString("reco,truth,value,sumw2\n")
	} else {
		bw.WriteString("reco,truth,value\n")
	}
	colPtr, rowIdx, val := m.ColPtr(), m.RowIdx(), m.Values()
	buf := make([]byte, 0, 64)
	for j := 0; j < cols; j++ {
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			buf = strconv.AppendInt(buf[:0], int64(rowIdx[k]), 10)
			buf = append(buf, ',')
			buf = strconv.AppendInt(buf, int64(j), 10)
			buf = append(buf, ',')
			buf = strconv.AppendFloat(buf, val[k], 'g', -1, 64)
			if sumw2 != nil {
				buf = append(buf, ',')
				buf = strconv.AppendFloat(buf, sumw2[k], 'g', -1, 64)
			}
			buf = append(buf, '\n')
			if _, err := bw.Write(buf); err != nil {
				return err
			}
		}
	}
	return bw.Flush()
}

// WriteVector writes a one-index table of the given kind with one row per
// bin, zeros included (so the table fixes its size): a header such as
// truth,value[,sumw2] and the rows. err2 is the sumw2 or variance column;
// nil leaves it out. It panics if err2 is not nil and its length differs
// from value's, or if err2 is given for the prior, which has no such
// column.
func WriteVector(w io.Writer, kind Kind, value, err2 []float64) error {
	if !kind.valid() {
		panic("tables: invalid Kind")
	}
	if err2 != nil && (len(err2) != len(value) || kind.ErrorColumn() == "") {
		panic("tables: WriteVector: bad second column")
	}
	bw := bufio.NewWriter(w)
	fmt.Fprintf(bw, "# %s: %d bins\n", kind, len(value))
	bw.WriteString(kind.IndexColumn() + ",value")
	if err2 != nil {
		bw.WriteString("," + kind.ErrorColumn())
	}
	bw.WriteByte('\n')
	buf := make([]byte, 0, 48)
	for i, v := range value {
		buf = strconv.AppendInt(buf[:0], int64(i), 10)
		buf = append(buf, ',')
		buf = strconv.AppendFloat(buf, v, 'g', -1, 64)
		if err2 != nil {
			buf = append(buf, ',')
			buf = strconv.AppendFloat(buf, err2[i], 'g', -1, 64)
		}
		buf = append(buf, '\n')
		if _, err := bw.Write(buf); err != nil {
			return err
		}
	}
	return bw.Flush()
}
