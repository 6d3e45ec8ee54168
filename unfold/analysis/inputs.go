package analysis

import (
	"context"
	"errors"
	"fmt"
	"maps"
	"slices"
	"strconv"
	"strings"

	"github.com/desmear/desmear/unfold/inputs/events"
	"github.com/desmear/desmear/unfold/inputs/observable"
	"github.com/desmear/desmear/unfold/response"
)

// compiler compiles the expressions of one events file: first against
// every column of the file (so that an unknown column is reported with
// the file's columns), then, once all are known, against the columns
// they use, which are the only ones read.
type compiler struct {
	a          *Analysis
	file       string            // events file, for messages
	available  []string          // the file's readable columns
	unreadable map[string]string // the file's other columns, with the reason
	names      []string          // both, the names an expression may use
	used       []string          // columns used, in order of first use
	pending    []*compiled
}

type compiled struct {
	e     Expression
	final *observable.Expr
}

func newCompiler(a *Analysis, file string, src events.Source) *compiler {
	c := &compiler{a: a, file: file, available: src.Columns()}
	c.names = c.available
	if u, ok := src.(events.Unreadable); ok {
		c.unreadable = u.Unreadable()
		c.names = append(slices.Clone(c.available), slices.Sorted(maps.Keys(c.unreadable))...)
	}
	return c
}

// add compiles e; it returns nil for an empty expression.
func (c *compiler) add(e Expression) (response.Expr, error) {
	if e.Text == "" {
		return nil, nil
	}
	x, err := observable.Compile(e.Text, c.names)
	if err != nil {
		return nil, c.exprError(e, err)
	}
	for _, name := range x.ColumnNames() {
		if why, bad := c.unreadable[name]; bad {
			return nil, &Error{File: c.a.File, Line: e.Line, Field: e.Field, Msg: fmt.Sprintf("in %q: %s: column %q cannot be read: %s", e.Text, c.file, name, why)}
		}
	}
	for _, name := range x.ColumnNames() {
		if !slices.Contains(c.used, name) {
			c.used = append(c.used, name)
		}
	}
	p := &compiled{e: e}
	c.pending = append(c.pending, p)
	return func() response.Evaluator {
		if p.final == nil {
			panic("analysis: expression used before its columns were fixed")
		}
		return p.final.Clone().Eval
	}, nil
}

func (c *compiler) addAll(es []Expression) ([]response.Expr, error) {
	out := make([]response.Expr, len(es))
	for i, e := range es {
		x, err := c.add(e)
		if err != nil {
			return nil, err
		}
		out[i] = x
	}
	return out, nil
}

// finish recompiles every expression against the used columns and
// returns them, in the order the reader must deliver them.
func (c *compiler) finish() ([]string, error) {
	if len(c.used) == 0 {
		// Read needs at least one column to count the events.
		if len(c.available) == 0 {
			return nil, fmt.Errorf("%s: the file has no numeric columns", c.file)
		}
		c.used = []string{c.available[0]}
	}
	for _, p := range c.pending {
		x, err := observable.Compile(p.e.Text, c.used)
		if err != nil {
			return nil, c.exprError(p.e, err)
		}
		p.final = x
	}
	return c.used, nil
}

func (c *compiler) exprError(e Expression, err error) error {
	msg := fmt.Sprintf("in %q: %v", e.Text, err)
	var oe *observable.Error
	if errors.As(err, &oe) {
		msg = fmt.Sprintf("%s (at column %d of %q)", withoutColumnList(oe.Msg), oe.Column(), e.Text)
		if strings.Contains(oe.Msg, "column") || strings.Contains(oe.Msg, "unknown") {
			cols := c.available
			more := ""
			if len(cols) > 20 {
				cols, more = cols[:20], ", ..."
			}
			msg += fmt.Sprintf("; %s has the columns %s%s", c.file, strings.Join(cols, ", "), more)
		}
	}
	return &Error{File: c.a.File, Line: e.Line, Field: e.Field, Msg: msg, Err: err}
}

// withoutColumnList drops the list of columns that the expression compiler
// appends to an unknown-column message when it has no close suggestion:
// exprError lists the file's columns itself, with the file name. A "did you
// mean" suggestion is kept.
func withoutColumnList(msg string) string {
	const prefix = "unknown column "
	if !strings.HasPrefix(msg, prefix) {
		return msg
	}
	q, err := strconv.QuotedPrefix(msg[len(prefix):])
	if err != nil {
		return msg
	}
	head := msg[:len(prefix)+len(q)]
	if rest := msg[len(head):]; strings.HasPrefix(rest, "; did you mean") {
		return msg
	}
	return head
}

// openEvents opens an events file named in field at line.
func (a *Analysis) openEvents(path, tree, field string, line int) (events.Source, error) {
	src, err := events.Open(path, events.Options{Tree: tree})
	if err != nil {
		return nil, &Error{File: a.File, Line: line, Field: field, Msg: fmt.Sprintf("cannot open the events file: %v", err), Err: err}
	}
	return src, nil
}

func readFunc(src events.Source, cols []string, batch int) response.ReadFunc {
	return func(ctx context.Context, fn func(int64, int, [][]float64) error) error {
		return src.Read(ctx, cols, batch, func(b *events.Batch) error {
			return fn(b.Start, b.Len, b.Cols)
		})
	}
}

func readRangeFunc(src events.Source, cols []string, batch int) func(context.Context, int64, int64, func(int64, int, [][]float64) error) error {
	return func(ctx context.Context, lo, hi int64, fn func(int64, int, [][]float64) error) error {
		return src.ReadRange(ctx, cols, lo, hi, batch, func(b *events.Batch) error {
			return fn(b.Start, b.Len, b.Cols)
		})
	}
}
