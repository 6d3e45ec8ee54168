package events

import (
	"context"
	"errors"
	"fmt"
	"reflect"
	"strings"

	"go-hep.org/x/hep/groot"
	"go-hep.org/x/hep/groot/riofs"
	"go-hep.org/x/hep/groot/root"
	"go-hep.org/x/hep/groot/rtree"
)

// ROOT is an event sample in a TTree of a ROOT file.
type ROOT struct {
	path   string
	name   string // tree path in the file
	f      *riofs.File
	tree   rtree.Tree
	cols   []string          // supported scalar branches, in tree order
	bad    map[string]string // unsupported branch -> reason
	byName map[string]rtree.Leaf
}

// OpenROOT opens the TTree at treePath (empty: the only TTree at the top
// level) of a ROOT file.
func OpenROOT(path, treePath string) (src *ROOT, err error) {
	f, err := groot.Open(path)
	if err != nil {
		return nil, fmt.Errorf("events: %s: cannot open as a ROOT file: %w", path, err)
	}
	defer func() {
		if err != nil {
			f.Close()
		}
		if p := recover(); p != nil {
			f.Close()
			src, err = nil, fmt.Errorf("events: %s: damaged ROOT file: %v", path, p)
		}
	}()
	if treePath == "" {
		var trees []string
		for _, k := range f.Keys() {
			if k.ClassName() == "TTree" && !contains(trees, k.Name()) {
				trees = append(trees, k.Name())
			}
		}
		switch len(trees) {
		case 0:
			return nil, fmt.Errorf("events: %s: no TTree at the top level of the file; give the tree's path", path)
		case 1:
			treePath = trees[0]
		default:
			return nil, fmt.Errorf("events: %s: %d trees (%s); say which one to read", path, len(trees), strings.Join(trees, ", "))
		}
	}
	obj, err := riofs.Dir(f).Get(treePath)
	if err != nil {
		return nil, fmt.Errorf("events: %s: no tree %q: %w", path, treePath, err)
	}
	t, ok := obj.(rtree.Tree)
	if !ok {
		return nil, fmt.Errorf("events: %s: %q is a %s, not a TTree", path, treePath, obj.Class())
	}
	r := &ROOT{path: path, name: treePath, f: f, tree: t, bad: map[string]string{}, byName: map[string]rtree.Leaf{}}
	for _, b := range t.Branches() {
		leaves := b.Leaves()
		if len(leaves) != 1 {
			r.bad[b.Name()] = fmt.Sprintf("it has %d leaves; only branches with one scalar leaf are supported", len(leaves))
			continue
		}
		leaf := leaves[0]
		if why := leafProblem(leaf); why != "" {
			r.bad[b.Name()] = why
			continue
		}
		r.cols = append(r.cols, b.Name())
		r.byName[b.Name()] = leaf
	}
	return r, nil
}

func contains(s []string, x string) bool {
	for _, v := range s {
		if v == x {
			return true
		}
	}
	return false
}

// leafProblem says why a leaf cannot be read as one number per event, or
// returns "".
func leafProblem(leaf rtree.Leaf) string {
	if leaf.Kind() == reflect.String {
		return fmt.Sprintf("its type %s (a string) is not numeric", leaf.TypeName())
	}
	if leaf.LeafCount() != nil {
		return fmt.Sprintf("it is a variable-length array (%s[%s])", leaf.TypeName(), leaf.LeafCount().Name())
	}
	if leaf.Len() != 1 {
		return fmt.Sprintf("it is a fixed-size array of %d values", leaf.Len())
	}
	switch leaf.Type().Kind() {
	case reflect.Bool, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64,
		reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64,
		reflect.Float32, reflect.Float64:
		return ""
	}
	return fmt.Sprintf("its type %s is not numeric", leaf.TypeName())
}

// Columns returns the names of the scalar numeric branches, in tree order.
func (r *ROOT) Columns() []string { return r.cols }

// Len returns the number of entries of the tree.
func (r *ROOT) Len() int64 { return r.tree.Entries() }

// Close closes the file.
func (r *ROOT) Close() error { return r.f.Close() }

// rootConv converts one bound branch value to float64.
type rootConv struct {
	dst  int
	kind reflect.Kind
	ptr  any
}

// Read implements Source.
func (r *ROOT) Read(ctx context.Context, columns []string, batchSize int, fn func(b *Batch) error) (err error) {
	checkBatchSize(batchSize)
	where := fmt.Sprintf("%s: tree %q", r.path, r.name)
	rvars := make([]rtree.ReadVar, 0, len(columns))
	convs := make([]rootConv, 0, len(columns))
	bound := map[string]int{}
	// Columns asked twice are read once and copied.
	dupOf := make([]int, len(columns))
	for i, name := range columns {
		dupOf[i] = -1
		if j, ok := bound[name]; ok {
			dupOf[i] = j
			continue
		}
		leaf, ok := r.byName[name]
		if !ok {
			if why, isBad := r.bad[name]; isBad {
				return fmt.Errorf("events: %s: branch %q cannot be read: %s", where, name, why)
			}
			return fmt.Errorf("events: %s: no branch %q%s", where, name, listHint(r.cols))
		}
		ptr, kind := newScalar(leaf)
		rvars = append(rvars, rtree.ReadVar{Name: name, Leaf: leaf.Name(), Value: ptr})
		convs = append(convs, rootConv{dst: i, kind: kind, ptr: ptr})
		bound[name] = i
	}
	defer func() {
		if p := recover(); p != nil {
			err = fmt.Errorf("events: %s: damaged file: %v", where, p)
		}
	}()
	rd, err := rtree.NewReader(r.tree, rvars)
	if err != nil {
		return fmt.Errorf("events: %s: %w", where, err)
	}
	defer rd.Close()

	b := newBatch(len(columns), batchSize)
	full := b.Cols
	k := 0
	var start int64
	var userErr error
	flush := func() error {
		for i := range b.Cols {
			if dupOf[i] >= 0 {
				copy(full[i][:k], full[dupOf[i]][:k])
			}
			b.Cols[i] = full[i][:k]
		}
		b.Start, b.Len = start, k
		if err := fn(b); err != nil {
			userErr = err
			return err
		}
		start += int64(k)
		k = 0
		return nil
	}
	errCtx := errors.New("cancelled")
	err = rd.Read(func(rctx rtree.RCtx) error {
		for _, c := range convs {
			full[c.dst][k] = c.value()
		}
		k++
		if k == batchSize {
			if ctx.Err() != nil {
				return errCtx
			}
			return flush()
		}
		return nil
	})
	switch {
	case userErr != nil:
		return userErr
	case errors.Is(err, errCtx):
		return ctx.Err()
	case err != nil:
		return fmt.Errorf("events: %s: entry %d: %w", where, start+int64(k), err)
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	if k > 0 {
		return flush()
	}
	return nil
}

// newScalar allocates a value of the exact Go type groot expects for leaf.
func newScalar(leaf rtree.Leaf) (any, reflect.Kind) {
	kind := leaf.Type().Kind()
	u := leaf.IsUnsigned()
	switch kind {
	case reflect.Bool:
		return new(bool), kind
	case reflect.Int8, reflect.Uint8:
		if u || kind == reflect.Uint8 {
			return new(uint8), reflect.Uint8
		}
		return new(int8), kind
	case reflect.Int16, reflect.Uint16:
		if u || kind == reflect.Uint16 {
			return new(uint16), reflect.Uint16
		}
		return new(int16), kind
	case reflect.Int32, reflect.Uint32:
		if u || kind == reflect.Uint32 {
			return new(uint32), reflect.Uint32
		}
		return new(int32), kind
	case reflect.Int64, reflect.Uint64:
		if u || kind == reflect.Uint64 {
			return new(uint64), reflect.Uint64
		}
		return new(int64), kind
	case reflect.Float32:
		if _, ok := leaf.(*rtree.LeafF16); ok {
			return new(root.Float16), reflect.Complex64 // marker: Float16
		}
		return new(float32), kind
	case reflect.Float64:
		if _, ok := leaf.(*rtree.LeafD32); ok {
			return new(root.Double32), reflect.Complex128 // marker: Double32
		}
		return new(float64), kind
	}
	panic("events: unsupported leaf kind " + kind.String()) // excluded by leafProblem
}

func (c *rootConv) value() float64 {
	switch c.kind {
	case reflect.Float64:
		return *c.ptr.(*float64)
	case reflect.Float32:
		return float64(*c.ptr.(*float32))
	case reflect.Int32:
		return float64(*c.ptr.(*int32))
	case reflect.Int64:
		return float64(*c.ptr.(*int64))
	case reflect.Bool:
		if *c.ptr.(*bool) {
			return 1
		}
		return 0
	case reflect.Int8:
		return float64(*c.ptr.(*int8))
	case reflect.Int16:
		return float64(*c.ptr.(*int16))
	case reflect.Uint8:
		return float64(*c.ptr.(*uint8))
	case reflect.Uint16:
		return float64(*c.ptr.(*uint16))
	case reflect.Uint32:
		return float64(*c.ptr.(*uint32))
	case reflect.Uint64:
		return float64(*c.ptr.(*uint64))
	case reflect.Complex64:
		return float64(*c.ptr.(*root.Float16))
	case reflect.Complex128:
		return float64(*c.ptr.(*root.Double32))
	}
	panic("events: bad converter")
}

// WriteROOT writes the columns as float64 branches of a TTree named tree in
// a new ROOT file (LZ4-compressed baskets).
func WriteROOT(path, tree string, names []string, cols [][]float64) error {
	if err := checkColumns(path, names, cols); err != nil {
		return err
	}
	if tree == "" || strings.ContainsAny(tree, "/;") {
		return fmt.Errorf("events: writing %s: bad tree name %q", path, tree)
	}
	return atomicWrite(path, func(tmp string) error {
		f, err := groot.Create(tmp)
		if err != nil {
			return fmt.Errorf("events: writing %s: %w", path, err)
		}
		vals := make([]float64, len(cols))
		wvars := make([]rtree.WriteVar, len(cols))
		for i, n := range names {
			wvars[i] = rtree.WriteVar{Name: n, Value: &vals[i]}
		}
		w, err := rtree.NewWriter(f, tree, wvars, rtree.WithLZ4(1))
		if err != nil {
			f.Close()
			return fmt.Errorf("events: writing %s: tree %q: %w", path, tree, err)
		}
		for k := range cols[0] {
			for i := range cols {
				vals[i] = cols[i][k]
			}
			if _, err := w.Write(); err != nil {
				w.Close()
				f.Close()
				return fmt.Errorf("events: writing %s: entry %d: %w", path, k, err)
			}
		}
		if err := w.Close(); err != nil {
			f.Close()
			return fmt.Errorf("events: writing %s: %w", path, err)
		}
		if err := f.Close(); err != nil {
			return fmt.Errorf("events: writing %s: %w", path, err)
		}
		return nil
	})
}
