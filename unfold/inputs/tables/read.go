package tables

import (
	"bufio"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
)

// MaxIndex is the largest bin index accepted in a table. It guards
// against a mistyped index making the sizes (1 + the largest index) and
// hence every dense vector absurdly large.
const MaxIndex = 1<<30 - 1

// Error is a problem in the content of a table, located by file, line
// and column.
type Error struct {
	File  string // the file name as given by the caller
	Line  int    // 1-based line number; 0 when the problem concerns the whole file
	Field string // the column concerned; empty when not one column
	Msg   string // what is wrong and, where possible, what to do
}

func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
	}
	if e.Field != "" {
		fmt.Fprintf(&b, ": field %q", e.Field)
	}
	b.WriteString(": ")
	b.WriteString(e.Msg)
	return b.String()
}

func errorf(file string, line int, field, format string, a ...any) *Error {
	return &Error{File: file, Line: line, Field: field, Msg: fmt.Sprintf(format, a...)}
}

// Kind identifies a one-index table.
type Kind int

const (
	// Generated is the table truth,value[,sumw2].
	Generated Kind = iota
	// Data is the table reco,value[,variance].
	Data
	// Background is the table reco,value[,variance].
	Background
	// Prior is the table truth,value.
	Prior
)

// String returns the name of the kind: "generated", "data", "background"
// or "prior".
func (k Kind) String() string {
	switch k {
	case Generated:
		return "generated"
	case Data:
		return "data"
	case Background:
		return "background"
	case Prior:
		return "prior"
	}
	return "Kind(" + strconv.Itoa(int(k)) + ")"
}

// IndexColumn returns the name of the kind's index column, "truth" or
// "reco".
func (k Kind) IndexColumn() string {
	if k == Data || k == Background {
		return "reco"
	}
	return "truth"
}

// ErrorColumn returns the name of the kind's optional second column,
// "sumw2" or "variance", or "" for the prior, which has none.
func (k Kind) ErrorColumn() string {
	switch k {
	case Generated:
		return "sumw2"
	case Data, Background:
		return "variance"
	}
	return ""
}

func (k Kind) valid() bool { return k >= Generated && k <= Prior }

// Response is a response table as read: one entry per row, in file order.
type Response struct {
	File  string    // the file name used in messages
	Reco  []int     // reco index of each entry
	Truth []int     // truth index of each entry
	Value []float64 // A_ij of each entry
	SumW2 []float64 // sum of squared weights of each entry; nil when the file has no sumw2 column
	Line  []int     // line of each entry in the file
}

// Len returns the number of entries.
func (r *Response) Len() int { return len(r.Value) }

// Dims returns 1 + the largest reco and truth index seen (0 for an empty
// table).
func (r *Response) Dims() (reco, truth int) {
	for k := range r.Reco {
		reco = max(reco, r.Reco[k]+1)
		truth = max(truth, r.Truth[k]+1)
	}
	return reco, truth
}

// Vector is a one-index table as read: one entry per row, in file order.
type Vector struct {
	File  string // the file name used in messages
	Kind  Kind
	Index []int     // bin index of each entry
	Value []float64 // value of each entry
	// Err2 holds the sumw2 (generated) or variance (data, background) of
	// each entry; nil when the file has no such column.
	Err2 []float64
	Line []int // line of each entry in the file
}

// Len returns 1 + the largest index seen (0 for an empty table).
func (v *Vector) Len() int {
	n := 0
	for _, i := range v.Index {
		n = max(n, i+1)
	}
	return n
}

// Dense returns the table as dense vectors of length n: value[i] is the
// value of the row for bin i (0 where there is none), err2 likewise for
// the second column (nil when the table has none). It returns an *Error
// for an index ≥ n or a bin given twice; size names the origin of n in
// the message (for example "the reco binning R.yaml"; empty for the
// sizes found in the tables).
func (v *Vector) Dense(n int, size string) (value, err2 []float64, err error) {
	value = make([]float64, n)
	if v.Err2 != nil {
		err2 = make([]float64, n)
	}
	line := make([]int, n) // line that set each bin, 0 if none
	col := v.Kind.IndexColumn()
	for k, i := range v.Index {
		if i >= n {
			return nil, nil, beyond(v.File, v.Line[k], col, i, n, size)
		}
		if line[i] != 0 {
			return nil, nil, errorf(v.File, v.Line[k], col,
				"%s bin %d is given twice (first on line %d); give one row per bin (rows are not summed)", col, i, line[i])
		}
		line[i] = v.Line[k]
		value[i] = v.Value[k]
		if err2 != nil {
			err2[i] = v.Err2[k]
		}
	}
	return value, err2, nil
}

func beyond(file string, line int, col string, i, n int, size string) *Error {
	if size == "" {
		size = "the tables"
	}
	return errorf(file, line, col, "index %d is beyond the %d %s bins of %s (indices are 0-based: 0 to %d)", i, n, col, size, n-1)
}

// ReadResponse reads a response table (reco,truth,value[,sumw2]) from r.
// name is the file name used in messages.
func ReadResponse(r io.Reader, name string) (*Response, error) {
	resp := &Response{File: name}
	sc, err := newScanner(r, name, []string{"reco", "truth"}, "sumw2")
	if err != nil {
		return nil, err
	}
	sc.signed = true
	if err := sc.readAll([]*[]int{&resp.Reco, &resp.Truth}, &resp.Value, &resp.SumW2, &resp.Line); err != nil {
		return nil, err
	}
	return resp, nil
}

// ReadVector reads a one-index table of the given kind from r. name is
// the file name used in messages.
func ReadVector(r io.Reader, name string, kind Kind) (*Vector, error) {
	if !kind.valid() {
		panic("tables: invalid Kind")
	}
	v := &Vector{File: name, Kind: kind}
	sc, err := newScanner(r, name, []string{kind.IndexColumn()}, kind.ErrorColumn())
	if err != nil {
		return nil, err
	}
	if err := sc.readAll([]*[]int{&v.Index}, &v.Value, &v.Err2, &v.Line); err != nil {
		return nil, err
	}
	return v, nil
}

// LoadResponse reads the response table in the file at path.
func LoadResponse(path string) (*Response, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ReadResponse(f, path)
}

// LoadVector reads the one-index table of the given kind in the file at
// path.
func LoadVector(path string, kind Kind) (*Vector, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ReadVector(f, path, kind)
}

// scanner reads the rows of one table.
type scanner struct {
	name    string
	cr      *csv.Reader
	index   []string // index column names
	errName string   // optional column name, "" if none
	// position of each column in the record: index columns, value, err2 (-1 if absent)
	pos     []int
	nfields int
	hasErr2 bool
	// signed lets the value column be negative (the response's cells:
	// negative event weights, left to the negative-cell remedy).
	signed bool

	// the current row
	line int
	idx  [2]int
	val  float64
	err2 float64
}

func newScanner(r io.Reader, name string, index []string, errName string) (*scanner, error) {
	br := bufio.NewReaderSize(r, 1<<16)
	if b, err := br.Peek(3); err == nil && string(b) == "\ufeff" {
		br.Discard(3) // a UTF-8 byte-order mark, as some spreadsheets write
	}
	cr := csv.NewReader(br)
	cr.Comment = '#'
	cr.FieldsPerRecord = -1
	cr.ReuseRecord = true
	sc := &scanner{name: name, cr: cr, index: index, errName: errName}

	want := append(append([]string{}, index...), "value")
	if errName != "" {
		want = append(want, errName)
	}
	header, err := cr.Read()
	if err == io.EOF {
		return nil, errorf(name, 0, "", "the file is empty; the first line must be the header %s", headerHint(index, errName))
	}
	if err != nil {
		return nil, sc.readErr(err)
	}
	hline, _ := cr.FieldPos(0)
	sc.pos = make([]int, len(want))
	for i := range sc.pos {
		sc.pos[i] = -1
	}
	for c, h := range header {
		h = strings.ToLower(strings.TrimSpace(h))
		k := indexOf(want, h)
		if k < 0 {
			if isNumber(h) {
				return nil, errorf(name, hline, "", "the first line must be the header %s, not data", headerHint(index, errName))
			}
			return nil, errorf(name, hline, h, "unknown column; the columns of this table are %s", headerHint(index, errName))
		}
		if sc.pos[k] >= 0 {
			return nil, errorf(name, hline, h, "column given twice in the header")
		}
		sc.pos[k] = c
	}
	for k, p := range sc.pos {
		if p < 0 && (errName == "" || k < len(want)-1) {
			return nil, errorf(name, hline, want[k], "required column missing from the header; the columns of this table are %s", headerHint(index, errName))
		}
	}
	sc.nfields = len(header)
	sc.hasErr2 = errName != "" && sc.pos[len(want)-1] >= 0
	return sc, nil
}

func headerHint(index []string, errName string) string {
	h := strings.Join(index, ",") + ",value"
	if errName != "" {
		h += "[," + errName + "]"
	}
	return h
}

func indexOf(list []string, s string) int {
	for i, x := range list {
		if x == s {
			return i
		}
	}
	return -1
}

func isNumber(s string) bool {
	_, err := strconv.ParseFloat(s, 64)
	return err == nil
}

func (sc *scanner) readErr(err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return errorf(sc.name, pe.Line, "", "malformed CSV: %v", pe.Err)
	}
	return fmt.Errorf("%s: %w", sc.name, err)
}

// next reads the next data row. It returns false at the end of the file.
func (sc *scanner) next() (bool, error) {
	rec, err := sc.cr.Read()
	if err == io.EOF {
		return false, nil
	}
	if err != nil {
		return false, sc.readErr(err)
	}
	sc.line, _ = sc.cr.FieldPos(0)
	if len(rec) != sc.nfields {
		return false, errorf(sc.name, sc.line, "", "malformed row: %d fields, but the header has %d", len(rec), sc.nfields)
	}
	for k, col := range sc.index {
		i, err := sc.parseIndex(rec[sc.pos[k]], col)
		if err != nil {
			return false, err
		}
		sc.idx[k] = i
	}
	vp := len(sc.index)
	if sc.val, err = sc.parseNumber(rec[sc.pos[vp]], "value", sc.signed); err != nil {
		return false, err
	}
	if sc.hasErr2 {
		if sc.err2, err = sc.parseCount(rec[sc.pos[vp+1]], sc.errName); err != nil {
			return false, err
		}
	}
	return true, nil
}

// readAll reads the remaining data rows, appending to idx (one slice per
// index column, in the scanner's order), value, err2 and line. err2 is
// set to an empty slice when the table has the optional column and left
// nil otherwise.
func (sc *scanner) readAll(idx []*[]int, value, err2 *[]float64, line *[]int) error {
	if sc.hasErr2 {
		*err2 = []float64{}
	}
	for {
		ok, err := sc.next()
		if err != nil || !ok {
			return err
		}
		for k, col := range idx {
			*col = append(*col, sc.idx[k])
		}
		*value = append(*value, sc.val)
		if sc.hasErr2 {
			*err2 = append(*err2, sc.err2)
		}
		*line = append(*line, sc.line)
	}
}

func (sc *scanner) parseIndex(s, col string) (int, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, errorf(sc.name, sc.line, col, "empty; give a 0-based bin index")
	}
	i, err := strconv.Atoi(s)
	if err != nil {
		var ne *strconv.NumError
		if errors.As(err, &ne) && ne.Err == strconv.ErrRange {
			return 0, errorf(sc.name, sc.line, col, "index %s is too large (at most %d)", s, MaxIndex)
		}
		return 0, errorf(sc.name, sc.line, col, "%q is not a bin index (a non-negative integer)", s)
	}
	if i < 0 {
		return 0, errorf(sc.name, sc.line, col, "index %d is negative; indices are 0-based global bin indices", i)
	}
	if i > MaxIndex {
		return 0, errorf(sc.name, sc.line, col, "index %d is too large (at most %d)", i, MaxIndex)
	}
	return i, nil
}

func (sc *scanner) parseCount(s, col string) (float64, error) {
	return sc.parseNumber(s, col, false)
}

// parseNumber parses a finite number of column col; a negative one only
// when signed.
func (sc *scanner) parseNumber(s, col string, signed bool) (float64, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, errorf(sc.name, sc.line, col, "empty; give a number")
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		var ne *strconv.NumError
		if !errors.As(err, &ne) || ne.Err != strconv.ErrRange {
			return 0, errorf(sc.name, sc.line, col, "%q is not a number", s)
		}
		// Out of range: ParseFloat returned ±Inf; reported below.
	}
	switch {
	case math.IsNaN(v):
		return 0, errorf(sc.name, sc.line, col, "NaN is not allowed; give a finite number")
	case math.IsInf(v, 0):
		return 0, errorf(sc.name, sc.line, col, "%s is infinite or too large; give a finite number", s)
	case v < 0 && !signed:
		return 0, errorf(sc.name, sc.line, col, "%s is negative; counts, sums of squared weights and variances must be ≥ 0", s)
	case v == 0:
		v = 0 // no negative zero
	}
	return v, nil
}
