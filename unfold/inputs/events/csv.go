package events

import (
	"bufio"
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
	"unsafe"
)

// CSV is an event sample in a CSV file with a header line.
type CSV struct {
	path   string
	header []string
}

// OpenCSV opens a CSV file and reads its header line. Fields are separated by
// commas; surrounding spaces in the header are ignored. Lines starting with #
// are comments.
func OpenCSV(path string) (*CSV, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("events: %w", err)
	}
	defer f.Close()
	r := newCSVReader(f)
	rec, err := r.Read()
	if err == io.EOF {
		return nil, fmt.Errorf("events: %s: empty file; expected a header line with the column names", path)
	}
	if err != nil {
		return nil, csvError(path, err)
	}
	h := make([]string, len(rec))
	seen := map[string]int{}
	for i, s := range rec {
		h[i] = strings.TrimSpace(s)
		if i == 0 {
			h[i] = strings.TrimPrefix(h[i], "\ufeff")
		}
		if h[i] == "" {
			return nil, fmt.Errorf("events: %s:1: header field %d is empty", path, i+1)
		}
		if j, dup := seen[h[i]]; dup {
			return nil, fmt.Errorf("events: %s:1: column %q appears twice in the header (fields %d and %d)", path, h[i], j+1, i+1)
		}
		seen[h[i]] = i
	}
	return &CSV{path: path, header: h}, nil
}

func newCSVReader(f io.Reader) *csv.Reader {
	r := csv.NewReader(bufio.NewReaderSize(f, 1<<20))
	r.ReuseRecord = true
	r.Comment = '#'
	return r
}

func csvError(path string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return fmt.Errorf("events: %s:%d:%d: %w", path, pe.Line, pe.Column, pe.Err)
	}
	return fmt.Errorf("events: %s: %w", path, err)
}

// Columns returns the header's names.
func (c *CSV) Columns() []string { return c.header }

// Len returns -1: the number of lines is not known before reading.
func (c *CSV) Len() int64 { return -1 }

// Close does nothing; the file is opened by each Read.
func (c *CSV) Close() error { return nil }

// Read implements Source.
func (c *CSV) Read(ctx context.Context, columns []string, batchSize int, fn func(b *Batch) error) error {
	return c.ReadRange(ctx, columns, 0, -1, batchSize, fn)
}

// ReadRange implements Source: the lines before lo are scanned (their
// number of fields checked) but not converted.
func (c *CSV) ReadRange(ctx context.Context, columns []string, lo, hi int64, batchSize int, fn func(b *Batch) error) error {
	checkBatchSize(batchSize)
	if hi < 0 {
		hi = math.MaxInt64
	}
	lo = min(max(lo, 0), hi)
	idx, err := checkRequest(c.path, c.header, columns)
	if err != nil {
		return err
	}
	f, err := os.Open(c.path)
	if err != nil {
		return fmt.Errorf("events: %w", err)
	}
	defer f.Close()
	lines := &csvLines{br: bufio.NewReaderSize(f, 1<<20)}
	if _, err := lines.next(); err != nil { // the header, read by OpenCSV
		return c.lineError(lines, err)
	}
	b := newBatch(len(columns), batchSize)
	full := b.Cols
	start := lo
	k := 0
	flush := func() error {
		if k == 0 {
			return nil
		}
		for i := range b.Cols {
			b.Cols[i] = full[i][:k]
		}
		b.Start, b.Len = start, k
		if err := fn(b); err != nil {
			return err
		}
		start += int64(k)
		k = 0
		return nil
	}
	for n := int64(0); n < hi; n++ {
		ok, err := lines.next()
		if err != nil {
			return c.lineError(lines, err)
		}
		if !ok {
			break
		}
		if len(lines.fields) != len(c.header) {
			return fmt.Errorf("events: %s:%d:1: wrong number of fields: %d, the header has %d", c.path, lines.line, len(lines.fields), len(c.header))
		}
		if n < lo {
			if n%(1<<16) == 0 {
				if err := ctx.Err(); err != nil {
					return err
				}
			}
			continue
		}
		for i, j := range idx {
			fb := lines.fields[j]
			v, err := parseCSVFloat(unsafe.String(unsafe.SliceData(fb), len(fb)))
			if errors.Is(err, strconv.ErrRange) {
				// Written as a number, it would become ±Inf.
				return fmt.Errorf("events: %s:%d:%d: column %q: %q is too large for a 64-bit float; give a finite number", c.path, lines.line, lines.starts[j]+1, c.header[j], string(fb))
			}
			if err != nil {
				return fmt.Errorf("events: %s:%d:%d: column %q: %q is not a number", c.path, lines.line, lines.starts[j]+1, c.header[j], string(fb))
			}
			full[i][k] = v
		}
		k++
		if k == batchSize {
			if err := ctx.Err(); err != nil {
				return err
			}
			if err := flush(); err != nil {
				return err
			}
		}
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	return flush()
}

func (c *CSV) lineError(l *csvLines, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return fmt.Errorf("events: %s:%d:%d: %w", c.path, l.line, pe.Column, pe.Err)
	}
	return fmt.Errorf("events: %s:%d: %w", c.path, l.line, err)
}

// csvLines splits a CSV file into fields line by line without copying:
// lines without a double quote are cut at commas, the rare others are
// parsed by encoding/csv. Empty lines and lines starting with # are
// skipped, as encoding/csv does with Comment = '#'.
type csvLines struct {
	br     *bufio.Reader
	line   int      // number of the current line, from 1
	fields [][]byte // fields of the current line; valid until the next call
	starts []int    // byte offset of each field in the line
	long   []byte   // a line longer than the read buffer
	quoted []string
}

// next moves to the next record; it returns false at the end of the file.
func (s *csvLines) next() (bool, error) {
	for {
		raw, err := s.br.ReadSlice('\n')
		if err == bufio.ErrBufferFull {
			s.long = append(s.long[:0], raw...)
			for err == bufio.ErrBufferFull {
				raw, err = s.br.ReadSlice('\n')
				s.long = append(s.long, raw...)
			}
			raw = s.long
		}
		if err != nil && err != io.EOF {
			return false, err
		}
		if len(raw) == 0 && err == io.EOF {
			return false, nil
		}
		s.line++
		line := raw
		if n := len(line); n > 0 && line[n-1] == '\n' {
			line = line[:n-1]
		}
		if n := len(line); n > 0 && line[n-1] == '\r' {
			line = line[:n-1]
		}
		if len(line) == 0 || line[0] == '#' {
			if err == io.EOF {
				return false, nil
			}
			continue
		}
		s.fields, s.starts = s.fields[:0], s.starts[:0]
		if bytes.IndexByte(line, '"') >= 0 {
			return true, s.splitQuoted(line)
		}
		off := 0
		for {
			i := bytes.IndexByte(line[off:], ',')
			if i < 0 {
				s.fields = append(s.fields, line[off:])
				s.starts = append(s.starts, off)
				break
			}
			s.fields = append(s.fields, line[off:off+i])
			s.starts = append(s.starts, off)
			off += i + 1
		}
		return true, nil
	}
}

// splitQuoted parses one line with quoted fields. A quoted field must not
// span lines.
func (s *csvLines) splitQuoted(line []byte) error {
	r := csv.NewReader(bytes.NewReader(line))
	r.FieldsPerRecord = -1
	rec, err := r.Read()
	if err != nil {
		return err
	}
	s.quoted = append(s.quoted[:0], rec...)
	for i, f := range s.quoted {
		_, col := r.FieldPos(i)
		s.fields = append(s.fields, []byte(f))
		s.starts = append(s.starts, col-1)
	}
	if _, err := r.Read(); err != io.EOF {
		return errors.New("a quoted field spans lines")
	}
	return nil
}

func parseCSVFloat(s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err == nil {
		return v, nil
	}
	t := strings.TrimSpace(s)
	if t != s {
		if v, err2 := strconv.ParseFloat(t, 64); err2 == nil {
			return v, nil
		}
	}
	switch strings.ToLower(t) {
	case "true":
		return 1, nil
	case "false":
		return 0, nil
	}
	return 0, err
}
