package events

import (
	"context"
	"errors"
	"fmt"
	"maps"
	"os"
	"reflect"
	"runtime"
	"slices"
	"strings"
	"sync"

	"go-hep.org/x/hep/groot"
	"go-hep.org/x/hep/groot/riofs"
	"go-hep.org/x/hep/groot/root"
	"go-hep.org/x/hep/groot/rtree"

	"github.com/desmear/desmear/unfold/internal/rootio"
)

// ROOT is an event sample in a TTree of a ROOT file.
type ROOT struct {
	path    string
	name    string // tree path in the file
	f       *riofs.File
	tree    rtree.Tree
	cols    []string          // supported scalar branches, in tree order
	bad     map[string]string // unsupported branch -> reason
	byName  map[string]rtree.Leaf
	workers int
}

// OpenROOT opens the TTree at treePath (empty: the only TTree at the top
// level) of a ROOT file.
func OpenROOT(path, treePath string) (*ROOT, error) {
	// A file that cannot be opened at all gets the same message as for
	// the other formats, not the ROOT library's.
	fd, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("events: %w", err)
	}
	st, err := fd.Stat()
	if err != nil {
		fd.Close()
		return nil, fmt.Errorf("events: %w", err)
	}
	r, err := newROOT(path, fd, st.Size(), treePath)
	if err != nil {
		fd.Close()
	}
	return r, err
}

// newROOT opens the TTree at treePath of the ROOT file of size bytes in
// rd, named path in messages. The returned source closes rd; on error,
// the caller does.
func newROOT(path string, rd riofs.Reader, size int64, treePath string) (src *ROOT, err error) {
	var f *riofs.File
	defer func() {
		if p := recover(); p != nil {
			src, err = nil, fmt.Errorf("events: %s: damaged ROOT file: %v", path, p)
		}
	}()
	// go-hep allocates what the file declares before reading it: the
	// layout is checked first.
	if err := rootio.CheckFile(rd, size); err != nil {
		return nil, fmt.Errorf("events: %s: %w", path, err)
	}
	f, err = riofs.NewReader(rd)
	if err != nil {
		return nil, fmt.Errorf("events: %s: cannot open as a ROOT file: %w", path, err)
	}
	if treePath == "" {
		trees := treeNames(f)
		switch len(trees) {
		case 0:
			return nil, fmt.Errorf("events: %s: no TTree at the top level of the file; give the tree's path", path)
		case 1:
			treePath = trees[0]
		default:
			return nil, fmt.Errorf("events: %s: %d trees (%s); say which one to read", path, len(trees), strings.Join(trees, ", "))
		}
	}
	// go-hep decodes an object of a class it does not know from the
	// file's streamer information, and with damaged information that can
	// hang (v0.36.0): the class of a top-level object is checked first.
	for _, k := range f.Keys() {
		if k.Name() == treePath && !isTreeClass(k.ClassName()) {
			return nil, fmt.Errorf("events: %s: %q is a %s, not a TTree", path, treePath, k.ClassName())
		}
	}
	obj, err := riofs.Dir(f).Get(treePath)
	if err != nil {
		// groot's message names the file by the path it was written
		// under, which may be a temporary name: list what the file holds
		// instead.
		return nil, fmt.Errorf("events: %s: no tree %q; %s", path, treePath, topLevelTrees(f))
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

// treeNames returns the names of the trees at the top level of f.
func treeNames(f *groot.File) []string {
	var trees []string
	for _, k := range f.Keys() {
		if isTreeClass(k.ClassName()) && !slices.Contains(trees, k.Name()) {
			trees = append(trees, k.Name())
		}
	}
	return trees
}

// topLevelTrees describes the trees at the top level of f, for messages.
func topLevelTrees(f *groot.File) string {
	trees := treeNames(f)
	if len(trees) == 0 {
		return "the file has no TTree at its top level"
	}
	return "the file's top level has the trees " + strings.Join(trees, ", ")
}

func isTreeClass(c string) bool { return c == "TTree" || c == "TNtuple" || c == "TNtupleD" }

// leafProblem says why a leaf cannot be read as one number per event, or
// returns "".
func leafProblem(leaf rtree.Leaf) string {
	if leaf.Kind() == reflect.String {
		return "it holds text, not numbers"
	}
	if leaf.LeafCount() != nil {
		return fmt.Sprintf("it is a variable-length array (%s[%s]); only branches with one number per event can be read", leaf.TypeName(), leaf.LeafCount().Name())
	}
	if leaf.Len() != 1 {
		return fmt.Sprintf("it is a fixed-size array of %d values; only branches with one number per event can be read", leaf.Len())
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

// Unreadable implements Unreadable: the branches that are not one
// number per event, with the reason.
func (r *ROOT) Unreadable() map[string]string { return maps.Clone(r.bad) }

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

// binding is a set of branches bound to typed variables for one reader.
type binding struct {
	rvars []rtree.ReadVar
	convs []rootConv
	dupOf []int // dupOf[i] >= 0: column i repeats column dupOf[i]
}

// bind checks the requested branches and binds each to a variable of its
// exact type.
func (r *ROOT) bind(columns []string) (*binding, error) {
	bd := &binding{dupOf: make([]int, len(columns))}
	bound := map[string]int{}
	for i, name := range columns {
		bd.dupOf[i] = -1
		if j, ok := bound[name]; ok {
			bd.dupOf[i] = j
			continue
		}
		leaf, ok := r.byName[name]
		if !ok {
			if why, isBad := r.bad[name]; isBad {
				return nil, fmt.Errorf("events: %s: branch %q cannot be read: %s", r.where(), name, why)
			}
			return nil, fmt.Errorf("events: %s: no branch %q%s", r.where(), name, listHint(r.cols))
		}
		ptr, kind := newScalar(leaf)
		bd.rvars = append(bd.rvars, rtree.ReadVar{Name: name, Leaf: leaf.Name(), Value: ptr})
		bd.convs = append(bd.convs, rootConv{dst: i, kind: kind, ptr: ptr})
		bound[name] = i
	}
	return bd, nil
}

func (r *ROOT) where() string { return fmt.Sprintf("%s: tree %q", r.path, r.name) }

var errStop = errors.New("stop")

// scan reads the entries of rd's range into full, column by column. Each
// time len(full[0]) rows are filled, and at the end if rows remain, it
// calls flush with the number of rows; flush returning an error stops the
// scan, and scan then returns errStop.
func (bd *binding) scan(rd *rtree.Reader, full [][]float64, flush func(k int) error) error {
	var f64 []f64conv
	var f32 []f32conv
	var other []rootConv
	// Grouped by type so that the per-entry loop has no type switch for the
	// common float64 and float32 branches.
	for _, c := range bd.convs {
		switch c.kind {
		case reflect.Float64:
			f64 = append(f64, f64conv{dst: full[c.dst], p: c.ptr.(*float64)})
		case reflect.Float32:
			f32 = append(f32, f32conv{dst: full[c.dst], p: c.ptr.(*float32)})
		default:
			other = append(other, c)
		}
	}
	size := len(full[0])
	k := 0
	done := func() error {
		for i, j := range bd.dupOf {
			if j >= 0 {
				copy(full[i][:k], full[j][:k])
			}
		}
		if err := flush(k); err != nil {
			return errStop
		}
		k = 0
		return nil
	}
	err := rd.Read(func(rtree.RCtx) error {
		for _, c := range f64 {
			c.dst[k] = *c.p
		}
		for _, c := range f32 {
			c.dst[k] = float64(*c.p)
		}
		for i := range other {
			full[other[i].dst][k] = other[i].value()
		}
		k++
		if k == size {
			return done()
		}
		return nil
	})
	if err != nil {
		if errors.Is(err, errStop) {
			return errStop
		}
		return err
	}
	if k > 0 {
		return done()
	}
	return nil
}

// rootChunk is the number of entries each worker of a parallel read
// decodes at a time.
var rootChunk int64 = 1 << 16

// SetWorkers sets the number of goroutines that decode the tree in
// parallel in Read, each with its own handle on the file and its own range
// of entries; batches are still delivered in file order. n <= 0 means
// runtime.GOMAXPROCS(0); 1 reads in the calling goroutine.
func (r *ROOT) SetWorkers(n int) { r.workers = n }

// Read implements Source.
func (r *ROOT) Read(ctx context.Context, columns []string, batchSize int, fn func(b *Batch) error) error {
	return r.ReadRange(ctx, columns, 0, -1, batchSize, fn)
}

// ReadRange implements Source: the entry range [lo, hi) of the tree.
func (r *ROOT) ReadRange(ctx context.Context, columns []string, lo, hi int64, batchSize int, fn func(b *Batch) error) (err error) {
	checkBatchSize(batchSize)
	bd, err := r.bind(columns)
	if err != nil {
		return err
	}
	lo, hi = clipRange(lo, hi, r.tree.Entries())
	if len(columns) == 0 {
		// Nothing to decode: batches of the right lengths only.
		b := &Batch{}
		for b.Start = lo; b.Start < hi; b.Start += int64(b.Len) {
			if err := ctx.Err(); err != nil {
				return err
			}
			b.Len = int(min(int64(batchSize), hi-b.Start))
			if err := fn(b); err != nil {
				return err
			}
		}
		return nil
	}
	if lo == hi {
		return nil
	}
	workers := r.workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	if nchunks := (hi - lo + rootChunk - 1) / rootChunk; int64(workers) > nchunks {
		workers = int(nchunks)
	}
	if workers > 1 {
		return r.readParallel(ctx, columns, lo, hi, batchSize, fn, workers)
	}
	defer func() {
		if p := recover(); p != nil {
			err = fmt.Errorf("events: %s: damaged file: %v", r.where(), p)
		}
	}()
	rd, err := rtree.NewReader(r.tree, bd.rvars, rtree.WithRange(lo, hi))
	if err != nil {
		return fmt.Errorf("events: %s: %w", r.where(), err)
	}
	defer rd.Close()

	b := newBatch(len(columns), batchSize)
	b.Start = lo
	full := b.Cols
	var userErr error
	err = bd.scan(rd, full, func(k int) error {
		if err := ctx.Err(); err != nil {
			userErr = err
			return err
		}
		for i := range b.Cols {
			b.Cols[i] = full[i][:k]
		}
		b.Len = k
		if err := fn(b); err != nil {
			userErr = err
			return err
		}
		b.Start += int64(k)
		return nil
	})
	switch {
	case userErr != nil:
		return userErr
	case err != nil:
		return fmt.Errorf("events: %s: entry %d: %w", r.where(), b.Start, err)
	}
	return nil
}

// rootPart is a range of entries decoded by a worker.
type rootPart struct {
	lo   int64
	m    int
	cols [][]float64
	err  error
}

// readParallel decodes chunks of rootChunk entries on several goroutines:
// worker w decodes chunks w, w+workers, ..., each through its own file
// handle, and hands them over in a channel of its own; the calling
// goroutine takes chunk j from worker j%workers, so batches arrive in file
// order.
func (r *ROOT) readParallel(ctx context.Context, columns []string, lo, hi int64, batchSize int, fn func(b *Batch) error, workers int) error {
	nchunks := (hi - lo + rootChunk - 1) / rootChunk
	results := make([]chan *rootPart, workers)
	free := make([]chan *rootPart, workers)
	quit := make(chan struct{})
	var wg sync.WaitGroup
	for w := range workers {
		results[w] = make(chan *rootPart, 1)
		free[w] = make(chan *rootPart, 2)
		for range 2 {
			free[w] <- &rootPart{cols: newBatch(len(columns), int(rootChunk)).Cols}
		}
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			r.worker(columns, w, workers, lo, hi, nchunks, free[w], results[w], quit)
		}(w)
	}
	defer func() {
		close(quit)
		wg.Wait()
	}()
	b := &Batch{Cols: make([][]float64, len(columns))}
	for j := range nchunks {
		w := int(j % int64(workers))
		var part *rootPart
		select {
		case part = <-results[w]:
		case <-ctx.Done():
			return ctx.Err()
		}
		if part.err != nil {
			return part.err
		}
		for off := 0; off < part.m; off += batchSize {
			if err := ctx.Err(); err != nil {
				return err
			}
			m := min(batchSize, part.m-off)
			for i := range b.Cols {
				b.Cols[i] = part.cols[i][off : off+m]
			}
			b.Start, b.Len = part.lo+int64(off), m
			if err := fn(b); err != nil {
				return err
			}
		}
		free[w] <- part
	}
	return nil
}

// worker decodes every workers-th chunk of entries of [first, last),
// starting at chunk w.
func (r *ROOT) worker(columns []string, w, workers int, first, last, nchunks int64, free <-chan *rootPart, out chan<- *rootPart, quit <-chan struct{}) {
	fail := func(err error) {
		select {
		case out <- &rootPart{err: err}:
		case <-quit:
		}
	}
	defer func() {
		if p := recover(); p != nil {
			fail(fmt.Errorf("events: %s: damaged file: %v", r.where(), p))
		}
	}()
	src, err := OpenROOT(r.path, r.name)
	if err != nil {
		fail(err)
		return
	}
	defer src.Close()
	bd, err := src.bind(columns)
	if err != nil {
		fail(err)
		return
	}
	var rd *rtree.Reader
	defer func() {
		if rd != nil {
			rd.Close()
		}
	}()
	for j := int64(w); j < nchunks; j += int64(workers) {
		var part *rootPart
		select {
		case part = <-free:
		case <-quit:
			return
		}
		lo, hi := first+j*rootChunk, min(first+(j+1)*rootChunk, last)
		if rd == nil {
			rd, err = rtree.NewReader(src.tree, bd.rvars, rtree.WithRange(lo, hi))
		} else {
			err = rd.Reset(rtree.WithRange(lo, hi))
		}
		if err == nil {
			got := 0
			err = bd.scan(rd, part.cols, func(k int) error { got += k; return nil })
			if err == nil && int64(got) != hi-lo {
				err = fmt.Errorf("read %d entries, want %d", got, hi-lo)
			}
		}
		if err != nil {
			err = fmt.Errorf("events: %s: entries %d to %d: %w", r.where(), lo, hi, err)
		}
		part.lo, part.m, part.err = lo, int(hi-lo), err
		select {
		case out <- part:
		case <-quit:
			return
		}
		if err != nil {
			return
		}
	}
}

type f64conv struct {
	dst []float64
	p   *float64
}

type f32conv struct {
	dst []float64
	p   *float32
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
