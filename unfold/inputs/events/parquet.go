package events

import (
	"context"
	"encoding/binary"
	"fmt"
	"io"
	"maps"
	"os"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"
)

// Parquet is an event sample in a Parquet file.
type Parquet struct {
	path  string
	f     *os.File
	pf    *parquet.File
	cols  []string
	leaf  map[string]pqColumn
	bad   map[string]string
	nrows int64
}

type pqColumn struct {
	index    int // leaf column index in the row groups
	kind     parquet.Kind
	unsigned bool
	optional bool
}

// OpenParquet opens a Parquet file and reads its footer.
func OpenParquet(path string) (*Parquet, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("events: %w", err)
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("events: %w", err)
	}
	p, err := newParquet(path, f, st.Size())
	if err != nil {
		f.Close()
		return nil, err
	}
	p.f = f
	return p, nil
}

// newParquet reads the footer of the Parquet file of size bytes in r,
// named path in messages. The caller closes r.
func newParquet(path string, r io.ReaderAt, size int64) (*Parquet, error) {
	if err := checkParquetFooter(r, size); err != nil {
		return nil, fmt.Errorf("events: %s: not a readable Parquet file: %w", path, err)
	}
	pf, err := parquet.OpenFile(r, size, parquet.SkipBloomFilters(true), parquet.SkipPageIndex(true))
	if err != nil {
		return nil, fmt.Errorf("events: %s: not a readable Parquet file: %w", path, err)
	}
	p := &Parquet{path: path, pf: pf, leaf: map[string]pqColumn{}, bad: map[string]string{}, nrows: pf.NumRows()}
	for _, c := range pf.Root().Columns() {
		name := c.Name()
		switch {
		case !c.Leaf():
			p.bad[name] = "it is a group of columns; only flat columns are supported"
			continue
		case c.Repeated():
			p.bad[name] = "it is a repeated (list) column; only one value per event is supported"
			continue
		}
		pc := pqColumn{index: c.Index(), kind: c.Type().Kind(), optional: c.Optional()}
		switch pc.kind {
		case parquet.Boolean, parquet.Int32, parquet.Int64, parquet.Float, parquet.Double:
		default:
			p.bad[name] = fmt.Sprintf("its type %s is not numeric", c.Type())
			continue
		}
		if lt := c.Type().LogicalType(); lt != nil {
			switch v := lt.Value.(type) {
			case *format.IntType:
				pc.unsigned = !v.IsSigned
			case *format.DecimalType:
				p.bad[name] = "decimal columns are not supported"
				continue
			}
		}
		p.cols = append(p.cols, name)
		p.leaf[name] = pc
	}
	return p, nil
}

// Columns returns the names of the flat numeric columns, in schema order.
func (p *Parquet) Columns() []string { return p.cols }

// Unreadable implements Unreadable: the columns that are not one number
// per event, with the reason.
func (p *Parquet) Unreadable() map[string]string { return maps.Clone(p.bad) }

// Len returns the number of rows in the file.
func (p *Parquet) Len() int64 { return p.nrows }

// Close closes the file.
func (p *Parquet) Close() error {
	if p.f == nil {
		return nil
	}
	return p.f.Close()
}

// checkParquetFooter refuses a file whose last eight bytes (the footer's
// length, then the magic "PAR1") declare a footer longer than the file
// can hold between its leading and trailing magic: parquet-go v0.32.0
// allocates the declared length (up to 4 GB) before reading it.
func checkParquetFooter(r io.ReaderAt, size int64) error {
	if size < 12 {
		return fmt.Errorf("%d bytes, too short to hold the leading and trailing magic and a footer", size)
	}
	var tail [8]byte
	if _, err := r.ReadAt(tail[:], size-8); err != nil && err != io.EOF {
		return err
	}
	if n := int64(binary.LittleEndian.Uint32(tail[:4])); n > size-12 {
		return fmt.Errorf("the footer is said to be %d bytes long, but the file has %d bytes", n, size)
	}
	return nil
}

// pqCursor reads the values of one column chunk page by page.
type pqCursor struct {
	name  string
	col   pqColumn
	pages parquet.Pages
	page  parquet.Page
	vr    parquet.ValueReader
	f32   []float32
	i32   []int32
	i64   []int64
	bools []bool
	vals  []parquet.Value

	// Dictionary-encoded page: values dictVals[idx[pos:]].
	dict     parquet.Dictionary
	dictVals []float64
	idx      []int32
	pos      int

	// Page decoded in place (no nulls): one of these holds its values,
	// read from position pos on.
	arrN int
	a64  []float64
	a32  []float32
	ai32 []int32
	ai64 []int64
}

func (c *pqCursor) close() {
	c.idx, c.arrN = nil, 0
	c.a64, c.a32, c.ai32, c.ai64 = nil, nil, nil, nil
	if c.page != nil {
		parquet.Release(c.page)
		c.page = nil
	}
	if c.pages != nil {
		c.pages.Close()
		c.pages = nil
	}
	c.vr = nil
}

// fill decodes exactly len(dst) values into dst.
func (c *pqCursor) fill(dst []float64) error {
	for got := 0; got < len(dst); {
		if c.vr == nil {
			if c.page != nil {
				parquet.Release(c.page)
				c.page = nil
			}
			pg, err := c.pages.ReadPage()
			if err == io.EOF {
				return fmt.Errorf("column %q ends %d values early", c.name, len(dst)-got)
			}
			if err != nil {
				return fmt.Errorf("column %q: %w", c.name, err)
			}
			if pg.NumNulls() > 0 {
				parquet.Release(pg)
				return fmt.Errorf("column %q has %d null values in a page; every event needs a value", c.name, pg.NumNulls())
			}
			c.page, c.vr = pg, pg.Values()
			c.idx, c.arrN = nil, 0
			if d := pg.Dictionary(); d != nil {
				c.useDictionary(d, pg)
			} else {
				c.useArray(pg)
			}
		}
		if c.arrN > 0 {
			got += c.readArray(dst[got:])
			if c.pos == c.arrN {
				c.vr, c.arrN = nil, 0
			}
			continue
		}
		if c.idx != nil {
			n, err := c.readIndexed(dst[got:])
			if err != nil {
				return err
			}
			got += n
			if c.pos == len(c.idx) {
				c.vr, c.idx = nil, nil
			}
			continue
		}
		n, err := c.read(dst[got:])
		got += n
		if err == io.EOF {
			c.vr = nil
			continue
		}
		if err != nil {
			return fmt.Errorf("column %q: %w", c.name, err)
		}
		if n == 0 {
			return fmt.Errorf("column %q: page reader made no progress", c.name)
		}
	}
	return nil
}

// useArray prepares the fast path for a page without nulls whose values
// are held decoded in an array: they are converted straight from it.
func (c *pqCursor) useArray(pg parquet.Page) {
	if pg.Type().Kind() != c.col.kind {
		return
	}
	data := pg.Data()
	n := int(pg.NumValues())
	ok := false
	switch c.col.kind {
	case parquet.Double:
		c.a64 = data.Double()
		ok = len(c.a64) == n
	case parquet.Float:
		c.a32 = data.Float()
		ok = len(c.a32) == n
	case parquet.Int32:
		c.ai32 = data.Int32()
		ok = len(c.ai32) == n
	case parquet.Int64:
		c.ai64 = data.Int64()
		ok = len(c.ai64) == n
	}
	if ok && n > 0 {
		c.arrN, c.pos = n, 0
	}
}

func (c *pqCursor) readArray(dst []float64) int {
	n := min(len(dst), c.arrN-c.pos)
	lo, hi := c.pos, c.pos+n
	dst = dst[:n]
	switch c.col.kind {
	case parquet.Double:
		copy(dst, c.a64[lo:hi])
	case parquet.Float:
		for i, v := range c.a32[lo:hi] {
			dst[i] = float64(v)
		}
	case parquet.Int32:
		if c.col.unsigned {
			for i, v := range c.ai32[lo:hi] {
				dst[i] = float64(uint32(v))
			}
		} else {
			for i, v := range c.ai32[lo:hi] {
				dst[i] = float64(v)
			}
		}
	case parquet.Int64:
		if c.col.unsigned {
			for i, v := range c.ai64[lo:hi] {
				dst[i] = float64(uint64(v))
			}
		} else {
			for i, v := range c.ai64[lo:hi] {
				dst[i] = float64(v)
			}
		}
	}
	c.pos = hi
	return n
}

// useDictionary prepares the fast path for a dictionary-encoded page: the
// dictionary is converted to float64 once, then each value is a lookup.
func (c *pqCursor) useDictionary(d parquet.Dictionary, pg parquet.Page) {
	data := pg.Data()
	idx := data.Int32()
	if int64(len(idx)) != pg.NumValues() {
		return // not the layout expected: leave it to the generic path
	}
	if d != c.dict {
		c.dict = d
		c.dictVals = c.dictVals[:0]
		for i := range d.Len() {
			c.dictVals = append(c.dictVals, valueFloat(d.Index(int32(i)), c.col))
		}
	}
	c.idx, c.pos = idx, 0
}

func (c *pqCursor) readIndexed(dst []float64) (int, error) {
	idx := c.idx[c.pos:]
	n := min(len(dst), len(idx))
	vals := c.dictVals
	for i, j := range idx[:n] {
		if uint32(j) >= uint32(len(vals)) {
			return 0, fmt.Errorf("column %q: dictionary index %d out of range [0,%d)", c.name, j, len(vals))
		}
		dst[i] = vals[j]
	}
	c.pos += n
	return n, nil
}

// read decodes up to len(dst) values of the current page.
func (c *pqCursor) read(dst []float64) (int, error) {
	switch c.col.kind {
	case parquet.Double:
		if r, ok := c.vr.(parquet.DoubleReader); ok {
			return r.ReadDoubles(dst)
		}
	case parquet.Float:
		if r, ok := c.vr.(parquet.FloatReader); ok {
			buf := grow(&c.f32, len(dst))
			n, err := r.ReadFloats(buf)
			for i, v := range buf[:n] {
				dst[i] = float64(v)
			}
			return n, err
		}
	case parquet.Int32:
		if r, ok := c.vr.(parquet.Int32Reader); ok {
			buf := grow(&c.i32, len(dst))
			n, err := r.ReadInt32s(buf)
			if c.col.unsigned {
				for i, v := range buf[:n] {
					dst[i] = float64(uint32(v))
				}
			} else {
				for i, v := range buf[:n] {
					dst[i] = float64(v)
				}
			}
			return n, err
		}
	case parquet.Int64:
		if r, ok := c.vr.(parquet.Int64Reader); ok {
			buf := grow(&c.i64, len(dst))
			n, err := r.ReadInt64s(buf)
			if c.col.unsigned {
				for i, v := range buf[:n] {
					dst[i] = float64(uint64(v))
				}
			} else {
				for i, v := range buf[:n] {
					dst[i] = float64(v)
				}
			}
			return n, err
		}
	case parquet.Boolean:
		if r, ok := c.vr.(parquet.BooleanReader); ok {
			buf := grow(&c.bools, len(dst))
			n, err := r.ReadBooleans(buf)
			for i, v := range buf[:n] {
				dst[i] = b2f(v)
			}
			return n, err
		}
	}
	// Generic path: dictionary-encoded pages and other readers.
	buf := grow(&c.vals, len(dst))
	n, err := c.vr.ReadValues(buf)
	for i, v := range buf[:n] {
		dst[i] = valueFloat(v, c.col)
	}
	return n, err
}

func valueFloat(v parquet.Value, col pqColumn) float64 {
	switch v.Kind() {
	case parquet.Double:
		return v.Double()
	case parquet.Float:
		return float64(v.Float())
	case parquet.Int32:
		if col.unsigned {
			return float64(v.Uint32())
		}
		return float64(v.Int32())
	case parquet.Int64:
		if col.unsigned {
			return float64(v.Uint64())
		}
		return float64(v.Int64())
	case parquet.Boolean:
		return b2f(v.Boolean())
	}
	return 0
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

func grow[T any](buf *[]T, n int) []T {
	if cap(*buf) < n {
		*buf = make([]T, n)
	}
	return (*buf)[:n]
}

// Read implements Source.
func (p *Parquet) Read(ctx context.Context, columns []string, batchSize int, fn func(b *Batch) error) error {
	return p.ReadRange(ctx, columns, 0, -1, batchSize, fn)
}

// ReadRange implements Source: the row groups before the one holding lo
// are skipped, the rows of that group before lo are decoded and dropped.
func (p *Parquet) ReadRange(ctx context.Context, columns []string, lo, hi int64, batchSize int, fn func(b *Batch) error) (err error) {
	checkBatchSize(batchSize)
	lo, hi = clipRange(lo, hi, p.nrows)
	for _, name := range columns {
		if _, ok := p.leaf[name]; !ok {
			if why, isBad := p.bad[name]; isBad {
				return fmt.Errorf("events: %s: column %q cannot be read: %s", p.path, name, why)
			}
			return fmt.Errorf("events: %s: no column %q%s", p.path, name, listHint(p.cols))
		}
	}
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("events: %s: damaged Parquet file: %v", p.path, r)
		}
	}()
	b := newBatch(len(columns), batchSize)
	full := b.Cols
	curs := make([]pqCursor, len(columns))
	for i, name := range columns {
		curs[i] = pqCursor{name: name, col: p.leaf[name]}
	}
	defer func() {
		for i := range curs {
			curs[i].close()
		}
	}()
	var start int64
	meta := p.pf.Metadata()
	for g, rg := range p.pf.RowGroups() {
		nrg := rg.NumRows()
		if start >= hi {
			break
		}
		if start+nrg <= lo {
			start += nrg
			continue
		}
		if g < len(meta.RowGroups) {
			mcols := meta.RowGroups[g].Columns
			for i := range curs {
				if j := curs[i].col.index; j < len(mcols) {
					if c := mcols[j].MetaData.Codec; c == format.Lz4Raw || c == format.Lz4 {
						return fmt.Errorf("events: %s: row group %d: column %q is %s-compressed, which parquet-go v0.32.0 does not decode reliably; rewrite the file with Snappy or Zstd compression",
							p.path, g, curs[i].name, c)
					}
				}
			}
		}
		chunks := rg.ColumnChunks()
		for i := range curs {
			curs[i].close()
			curs[i].pages = chunks[curs[i].col.index].Pages()
		}
		// Rows of the group before lo: decoded and dropped.
		off := int64(0)
		for off < lo-start {
			m := int(min(int64(batchSize), lo-start-off))
			for i := range curs {
				if err := curs[i].fill(full[i][:m]); err != nil {
					return fmt.Errorf("events: %s: row group %d, row %d: %w", p.path, g, start+off, err)
				}
			}
			off += int64(m)
		}
		start += off
		end := min(nrg, hi-(start-off))
		for off < end {
			if err := ctx.Err(); err != nil {
				return err
			}
			m := int(min(int64(batchSize), end-off))
			for i := range curs {
				if err := curs[i].fill(full[i][:m]); err != nil {
					return fmt.Errorf("events: %s: row group %d, row %d: %w", p.path, g, start, err)
				}
				b.Cols[i] = full[i][:m]
			}
			b.Start, b.Len = start, m
			if err := fn(b); err != nil {
				return err
			}
			start += int64(m)
			off += int64(m)
		}
	}
	return nil
}
