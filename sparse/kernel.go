package sparse

import (
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
)

// Partition parameters. They depend on nothing but constants and the
// matrix structure, so the summation order of every kernel is fixed.
const (
	minBlockNNZ   = 1 << 15 // smallest block worth a buffer
	maxBlockNNZ   = 1 << 20 // largest block (about 16 MB of matrix data)
	targetBlocks  = 16      // blocks aimed for between the two limits
	parallelNNZ   = 1 << 16 // below this many non-zeros kernels run on one goroutine
	reduceRows    = 1 << 14 // rows per reduction task
	bufferPerRows = 4       // bound on scatter buffer length, in multiples of rows
)

// partition is a fixed split of the columns into contiguous blocks,
// decided from the matrix structure alone (never from the number of
// cores), so that every kernel sums in the same order whatever the
// scheduling. Gathering kernels handle each column on its own. A
// scattering kernel either (banded matrices, see colored) scatters the
// even blocks and then the odd blocks straight into the destination, or
// accumulates block b into its own buffer covering the rows
// lo[b]..hi[b]-1 that the block touches and then reduces the buffers into
// the destination row by row in block order. With a single block the
// destination itself is the buffer.
type partition struct {
	rows, cols int
	nnz        int
	bounds     []int // block b holds columns bounds[b]..bounds[b+1]-1
	lo, hi     []int // rows touched by block b: [lo[b], hi[b])
	off        []int // offset of block b's buffer in the workspace; len = blocks+1
	tasks      []reduceTask
	covers     []int32 // the blocks of each reduction task, in block order
	parallel   bool    // large enough for several goroutines
	// colored is set when no block's rows meet those of the block two
	// further on (hi[b] <= lo[b+2], as in banded matrices). The blocks
	// then scatter straight into the destination without buffers: first
	// the even blocks, which touch disjoint rows, each clearing the rows
	// clr[b]..clr[b+2]-1 first; then the odd blocks, adding on top.
	colored bool
	clr     []int

	// rowBounds is the fixed partition of the rows handed to the rows
	// hook of SweepRows; odd block b of a colored partition finishes the
	// ranges rFirst[b]..rFirst[b+1]-1.
	rowBounds []int
	rFirst    []int

	mu   sync.Mutex
	free []*workspace
}

// reduceTask reduces rows [start, end), covered by the blocks
// covers[first : first+n].
type reduceTask struct {
	start, end int
	first, n   int32
}

func newPartition(rows int, colPtr, rowIdx []int) *partition {
	return newPartitionMin(rows, colPtr, rowIdx, minBlockNNZ)
}

// newPartitionMin is newPartition with another smallest block size (tests
// use it to cut small matrices into many blocks).
func newPartitionMin(rows int, colPtr, rowIdx []int, minBlock int) *partition {
	return newPartitionBlocks(rows, colPtr, rowIdx, minBlock, targetBlocks)
}

// newPartitionBlocks is newPartitionMin aiming for another number of
// blocks (benchmarks compare partitions with it).
func newPartitionBlocks(rows int, colPtr, rowIdx []int, minBlock, blocks int) *partition {
	cols := len(colPtr) - 1
	nnz := colPtr[cols]
	p := &partition{rows: rows, cols: cols, nnz: nnz, parallel: nnz >= parallelNNZ}
	target := min(max(nnz/blocks, minBlock), maxBlockNNZ)
	p.split(target, colPtr, rowIdx)
	if !p.color() {
		for len(p.lo) > 1 && p.off[len(p.lo)] > bufferPerRows*rows+minBlock {
			target *= 2 // spread-out columns: fewer, larger blocks
			p.split(target, colPtr, rowIdx)
		}
		p.plan()
	}
	p.ranges()
	return p
}

// ranges fixes the row ranges of SweepRows: for a colored partition, the
// rows finished by each odd block (from its first row, or 0, to the first
// row of the next odd block, or the end), cut into pieces of at most
// reduceRows; with buffers, the reduction tasks; with one block, pieces
// of reduceRows.
func (p *partition) ranges() {
	p.rowBounds = append(p.rowBounds[:0], 0)
	cut := func(start, end int) {
		for r := start + reduceRows; r < end; r += reduceRows {
			p.rowBounds = append(p.rowBounds, r)
		}
		if end > start {
			p.rowBounds = append(p.rowBounds, end)
		}
	}
	switch nb := len(p.lo); {
	case p.colored:
		p.rFirst = make([]int, nb+1)
		for b := 1; b < nb; b += 2 {
			start, end := 0, p.rows
			if b > 1 {
				start = p.lo[b]
			}
			if b+2 < nb {
				end = p.lo[b+2]
			}
			p.rFirst[b] = len(p.rowBounds) - 1
			cut(start, end)
			p.rFirst[b+1] = len(p.rowBounds) - 1
		}
	case len(p.tasks) > 0:
		for _, t := range p.tasks {
			p.rowBounds = append(p.rowBounds, t.end)
		}
	default:
		cut(0, p.rows)
	}
}

// color reports whether the blocks can scatter in two phases without
// buffers, and prepares the clearing ranges of the even blocks.
func (p *partition) color() bool {
	nb := len(p.lo)
	if nb < 3 {
		return false
	}
	for b := 0; b+2 < nb; b++ {
		if p.lo[b] >= p.hi[b] || p.hi[b] > p.lo[b+2] {
			return false
		}
	}
	// Even block b clears [clr[b], clr[b+2]), covering all rows.
	p.clr = make([]int, nb+2)
	for b := 2; b < nb; b += 2 {
		p.clr[b] = p.lo[b]
	}
	last := (nb - 1) &^ 1
	p.clr[last+2] = p.rows
	p.colored = true
	return true
}

// split cuts the columns into blocks of about target non-zeros.
func (p *partition) split(target int, colPtr, rowIdx []int) {
	p.bounds = append(p.bounds[:0], 0)
	p.lo, p.hi, p.off = p.lo[:0], p.hi[:0], append(p.off[:0], 0)
	if p.nnz < 2*target || p.cols < 2 {
		p.bounds = append(p.bounds, p.cols)
		p.lo, p.hi = append(p.lo, 0), append(p.hi, p.rows)
		p.off = append(p.off, p.rows)
		return
	}
	start := 0
	for j := 0; j < p.cols; j++ {
		if colPtr[j+1]-colPtr[start] >= target || j == p.cols-1 {
			lo, hi := p.rows, 0
			for c := start; c <= j; c++ {
				if a, b := colPtr[c], colPtr[c+1]; a < b {
					lo = min(lo, rowIdx[a])
					hi = max(hi, rowIdx[b-1]+1)
				}
			}
			if hi < lo {
				lo, hi = 0, 0
			}
			p.bounds = append(p.bounds, j+1)
			p.lo, p.hi = append(p.lo, lo), append(p.hi, hi)
			p.off = append(p.off, p.off[len(p.off)-1]+hi-lo)
			start = j + 1
		}
	}
}

// plan builds the reduction tasks: the rows are cut where a block's range
// starts or ends, and every piece lists the blocks covering it.
func (p *partition) plan() {
	nb := len(p.lo)
	if nb == 1 {
		return
	}
	cuts := []int{0, p.rows}
	for b := 0; b < nb; b++ {
		cuts = append(cuts, p.lo[b], p.hi[b])
	}
	slices.Sort(cuts)
	for k := 0; k+1 < len(cuts); k++ {
		s, e := cuts[k], cuts[k+1]
		if s == e {
			continue
		}
		first := int32(len(p.covers))
		for b := 0; b < nb; b++ {
			if p.lo[b] <= s && e <= p.hi[b] {
				p.covers = append(p.covers, int32(b))
			}
		}
		n := int32(len(p.covers)) - first
		for r := s; r < e; r += reduceRows {
			p.tasks = append(p.tasks, reduceTask{start: r, end: min(r+reduceRows, e), first: first, n: n})
		}
	}
}

func (p *partition) blocks() int { return len(p.lo) }

// phases of a kernel call
const (
	phaseBlocks = iota // every block, scattering into its buffer
	phaseReduce        // buffers into the destination
	phaseEven          // colored: even blocks into the destination
	phaseOdd           // colored: odd blocks into the destination
)

// kernel kinds
const (
	kFold = iota
	kSweep
	kRowSums
	kBackProject
	kColSums
	kScale
	kSweepBlock
)

// workspace is the state of one kernel call in flight: the scatter
// buffers of the blocks and the call's arguments. Workspaces are kept on
// the partition's free list, so that calls allocate nothing after
// warm-up and concurrent calls each get their own.
type workspace struct {
	p      *partition
	m      *Matrix
	buf    []float64
	kind   int
	dst    []float64
	x      []float64
	update func(j int, g float64) float64
	rows   func(r, lo, hi int)
	cols   func(lo, hi int) // SweepHooks: after the updates of a column block
	// SweepBlock: the number of interleaved vectors, the update, and
	// per block the gathered sums and the update's values (2·width each)
	width       int
	updateBlock func(j int, g, x []float64)
	gx          []float64
	ntask       int64
	next        atomic.Int64
	// pending counts the helper jobs of the current phase not finished;
	// the helper that finishes the last one signals done.
	pending atomic.Int64
	done    chan struct{}
}

func (p *partition) get(m *Matrix) *workspace {
	p.mu.Lock()
	var ws *workspace
	if k := len(p.free); k > 0 {
		ws = p.free[k-1]
		p.free = p.free[:k-1]
	}
	p.mu.Unlock()
	if ws == nil {
		ws = &workspace{p: p}
	}
	ws.m = m
	return ws
}

func (p *partition) put(ws *workspace) {
	ws.m, ws.dst, ws.x, ws.update, ws.rows, ws.updateBlock, ws.cols = nil, nil, nil, nil, nil, nil, nil
	ws.width = 0
	p.mu.Lock()
	p.free = append(p.free, ws)
	p.mu.Unlock()
}

// job is one helper's share of a phase of a kernel call.
type job struct {
	ws    *workspace
	phase int
}

// helpers is the package's pool of helper goroutines. They are started
// on first need and live for the rest of the process, idle on the
// channel between calls, so that kernel calls start no goroutines.
var helpers struct {
	mu sync.Mutex
	n  int
	ch chan job
}

func startHelpers(n int) {
	helpers.mu.Lock()
	if helpers.ch == nil {
		helpers.ch = make(chan job, 256)
	}
	for helpers.n < n {
		helpers.n++
		go func(ch chan job) {
			for j := range ch {
				j.run()
			}
		}(helpers.ch)
	}
	helpers.mu.Unlock()
}

// run does a helper's share of a phase and reports it finished.
func (j job) run() {
	j.ws.run(j.phase)
	if j.ws.pending.Add(-1) == 0 {
		j.ws.done <- struct{}{}
	}
}

// exec runs a kernel call: phase 1 over the blocks, then (for scattering
// kernels with several blocks) phase 2 over the reduction tasks. Both
// phases compute exactly the same operations in the same order whether
// one goroutine or many run them.
func (m *Matrix) exec(kind int, dst, x []float64, update func(int, float64) float64, rows func(r, lo, hi int), cols func(lo, hi int)) {
	p := m.part
	nb := p.blocks()
	scatter := kind == kFold || kind == kSweep || kind == kRowSums
	if nb == 1 {
		// One block: the destination is the buffer.
		ws := workspace{p: p, m: m, kind: kind, dst: dst, x: x, update: update, cols: cols}
		ws.block(0)
		if rows != nil {
			for r := 0; r+1 < len(p.rowBounds); r++ {
				rows(r, p.rowBounds[r], p.rowBounds[r+1])
			}
		}
		return
	}
	ws := p.get(m)
	ws.kind, ws.dst, ws.x, ws.update, ws.rows, ws.cols = kind, dst, x, update, rows, cols
	m.execOn(ws, scatter)
	p.put(ws)
}

// execOn runs the phases of a kernel call on the workspace ws, which
// holds the call's arguments.
func (m *Matrix) execOn(ws *workspace, scatter bool) {
	p := m.part
	nb := p.blocks()
	w := max(ws.width, 1)
	if nb == 1 {
		ws.block(0)
		return
	}
	workers := 1
	if p.parallel {
		workers = min(runtime.GOMAXPROCS(0), nb)
	}
	switch {
	case scatter && p.colored:
		ws.phase(phaseEven, int64((nb+1)/2), workers)
		ws.phase(phaseOdd, int64(nb/2), workers)
	case scatter:
		if len(ws.buf) < w*p.off[nb] {
			ws.buf = make([]float64, w*p.off[nb])
		}
		ws.phase(phaseBlocks, int64(nb), workers)
		ws.phase(phaseReduce, int64(len(p.tasks)), workers)
	default:
		ws.phase(phaseBlocks, int64(nb), workers)
	}
}

func (ws *workspace) phase(ph int, ntask int64, workers int) {
	ws.ntask = ntask
	ws.next.Store(0)
	h := workers - 1
	if h <= 0 {
		ws.run(ph)
		return
	}
	startHelpers(h)
	if ws.done == nil {
		ws.done = make(chan struct{}, 1)
	}
	ws.pending.Store(int64(h))
	sent := 0
	for k := 0; k < h; k++ {
		select {
		case helpers.ch <- job{ws: ws, phase: ph}:
			sent++
		default: // the queue is full: this goroutine does the work
		}
	}
	ws.run(ph)
	if ws.pending.Add(int64(sent-h)) == 0 && sent < h {
		return // every job sent has finished (or none was sent)
	}
	// Wait for the helpers that took a job, running queued jobs meanwhile
	// (ours or other calls'): a waiting goroutine never idles on work
	// that no one else could pick up, so nested or concurrent calls
	// cannot deadlock the pool.
	for {
		select {
		case <-ws.done:
			return
		case j := <-helpers.ch:
			j.run()
		}
	}
}

// run takes tasks of the phase until none is left.
func (ws *workspace) run(ph int) {
	for {
		t := ws.next.Add(1) - 1
		if t >= ws.ntask {
			return
		}
		switch ph {
		case phaseBlocks:
			ws.block(int(t))
		case phaseReduce:
			ws.reduce(int(t))
			if ws.rows != nil {
				ws.rows(int(t), ws.p.rowBounds[t], ws.p.rowBounds[t+1])
			}
		case phaseEven:
			ws.block(2 * int(t))
		case phaseOdd:
			b := 2*int(t) + 1
			ws.block(b)
			if ws.rows != nil {
				rb := ws.p.rowBounds
				for r := ws.p.rFirst[b]; r < ws.p.rFirst[b+1]; r++ {
					ws.rows(r, rb[r], rb[r+1])
				}
			}
		}
	}
}

// block runs phase 1 for block b.
func (ws *workspace) block(b int) {
	p, m := ws.p, ws.m
	c0, c1 := p.bounds[b], p.bounds[b+1]
	var buf []float64
	lo := 0
	w := max(ws.width, 1) // interleaved vectors (SweepBlock)
	switch ws.kind {
	case kFold, kSweep, kRowSums, kSweepBlock:
		switch {
		case p.blocks() == 1:
			buf = ws.dst
			clear(buf)
		case p.colored:
			buf = ws.dst
			if b%2 == 0 {
				clear(buf[w*p.clr[b] : w*p.clr[b+2]])
			}
		default:
			lo = p.lo[b]
			buf = ws.buf[w*p.off[b] : w*p.off[b+1]]
			clear(buf)
		}
	}
	colPtr := m.colPtr[c0 : c1+1]
	rowIdx, val := m.rowIdx, m.val
	switch ws.kind {
	case kFold:
		x := ws.x[c0:c1]
		for jj, xj := range x {
			ri := rowIdx[colPtr[jj]:colPtr[jj+1]]
			v := val[colPtr[jj]:colPtr[jj+1]]
			v = v[:len(ri)]
			for k, i := range ri {
				buf[i-lo] += v[k] * xj
			}
		}
	case kSweep:
		y, update := ws.x, ws.update
		for jj := 0; jj < c1-c0; jj++ {
			ri := rowIdx[colPtr[jj]:colPtr[jj+1]]
			v := val[colPtr[jj]:colPtr[jj+1]]
			v = v[:len(ri)]
			xj := update(c0+jj, gather(ri, v, y))
			for k, i := range ri {
				buf[i-lo] += v[k] * xj
			}
		}
		if ws.cols != nil {
			ws.cols(c0, c1)
		}
	case kSweepBlock:
		y, update := ws.x, ws.updateBlock
		gx := ws.gx[2*w*b : 2*w*(b+1)]
		g, x := gx[:w], gx[w:]
		if w == 8 {
			ws.sweep8(buf, lo, colPtr, c0, c1, (*[8]float64)(g), (*[8]float64)(x))
			break
		}
		for jj := 0; jj < c1-c0; jj++ {
			ri := rowIdx[colPtr[jj]:colPtr[jj+1]]
			v := val[colPtr[jj]:colPtr[jj+1]]
			v = v[:len(ri)]
			gatherBlock(g, ri, v, y)
			update(c0+jj, g, x)
			for k, i := range ri {
				vk := v[k]
				d := buf[w*(i-lo) : w*(i-lo+1)]
				d = d[:len(x)]
				for s, xs := range x {
					d[s] += vk * xs
				}
			}
		}
	case kRowSums:
		ri := rowIdx[colPtr[0]:colPtr[c1-c0]]
		v := val[colPtr[0]:colPtr[c1-c0]]
		v = v[:len(ri)]
		for k, i := range ri {
			buf[i-lo] += v[k]
		}
	case kBackProject:
		y, dst := ws.x, ws.dst[c0:c1]
		for jj := range dst {
			ri := rowIdx[colPtr[jj]:colPtr[jj+1]]
			v := val[colPtr[jj]:colPtr[jj+1]]
			v = v[:len(ri)]
			dst[jj] = gather(ri, v, y)
		}
	case kColSums:
		dst := ws.dst[c0:c1]
		for jj := range dst {
			var s float64
			for _, vk := range val[colPtr[jj]:colPtr[jj+1]] {
				s += vk
			}
			dst[jj] = s
		}
	case kScale:
		f := ws.x[c0:c1]
		for jj, fj := range f {
			v := val[colPtr[jj]:colPtr[jj+1]]
			for k := range v {
				v[k] *= fj
			}
			if m.sumw2 != nil {
				w2 := m.sumw2[colPtr[jj]:colPtr[jj+1]]
				f2 := fj * fj
				for k := range w2 {
					w2[k] *= f2
				}
			}
		}
	}
}

// gather returns Σ_k v[k] y[ri[k]], summed in four interleaved partial
// sums (k mod 4) that are then added as (s0+s1)+(s2+s3): the four
// independent chains hide the latency of the additions. The order is
// fixed, so the bits depend only on the column.
func gather(ri []int, v, y []float64) float64 {
	v = v[:len(ri)]
	var s0, s1, s2, s3 float64
	k := 0
	for ; k+4 <= len(ri); k += 4 {
		s0 += v[k] * y[ri[k]]
		s1 += v[k+1] * y[ri[k+1]]
		s2 += v[k+2] * y[ri[k+2]]
		s3 += v[k+3] * y[ri[k+3]]
	}
	for ; k < len(ri); k++ {
		s0 += v[k] * y[ri[k]]
	}
	return (s0 + s1) + (s2 + s3)
}

// gatherBlock sets g[s] = Σ_k v[k] y[ri[k]·w + s] for the w = len(g)
// vectors interleaved in y, each summed exactly as gather sums one
// vector, so that every vector gets the bits gather would give it.
func gatherBlock(g []float64, ri []int, v, y []float64) {
	w := len(g)
	v = v[:len(ri)]
	for s := range g {
		var s0, s1, s2, s3 float64
		k := 0
		for ; k+4 <= len(ri); k += 4 {
			s0 += v[k] * y[ri[k]*w+s]
			s1 += v[k+1] * y[ri[k+1]*w+s]
			s2 += v[k+2] * y[ri[k+2]*w+s]
			s3 += v[k+3] * y[ri[k+3]*w+s]
		}
		for ; k < len(ri); k++ {
			s0 += v[k] * y[ri[k]*w+s]
		}
		g[s] = (s0 + s1) + (s2 + s3)
	}
}

// sweep8Go is the SweepBlock loop of block columns c0..c1-1 for 8
// vectors, with fixed-size rows: the same sums in the same order as
// gatherBlock and the generic scatter (per vector, the four chains
// k mod 4 of gather, the tail into the first), fewer bounds checks. It
// is the reference of the assembly loop of sweep8 (amd64 with AVX) and
// the loop everywhere else.
func (ws *workspace) sweep8Go(buf []float64, lo int, colPtr []int, c0, c1 int, g, x *[8]float64) {
	rowIdx, val, y, update := ws.m.rowIdx, ws.m.val, ws.x, ws.updateBlock
	for jj := 0; jj < c1-c0; jj++ {
		ri := rowIdx[colPtr[jj]:colPtr[jj+1]]
		v := val[colPtr[jj]:colPtr[jj+1]]
		v = v[:len(ri)]
		var acc [4][8]float64
		k := 0
		for ; k+4 <= len(ri); k += 4 {
			for q := range 4 {
				vq, yr, a := v[k+q], (*[8]float64)(y[8*ri[k+q]:]), &acc[q]
				a[0] += vq * yr[0]
				a[1] += vq * yr[1]
				a[2] += vq * yr[2]
				a[3] += vq * yr[3]
				a[4] += vq * yr[4]
				a[5] += vq * yr[5]
				a[6] += vq * yr[6]
				a[7] += vq * yr[7]
			}
		}
		for ; k < len(ri); k++ {
			vq, yr, a := v[k], (*[8]float64)(y[8*ri[k]:]), &acc[0]
			for s := range 8 {
				a[s] += vq * yr[s]
			}
		}
		for s := range 8 {
			g[s] = (acc[0][s] + acc[1][s]) + (acc[2][s] + acc[3][s])
		}
		update(c0+jj, g[:], x[:])
		x0, x1, x2, x3, x4, x5, x6, x7 := x[0], x[1], x[2], x[3], x[4], x[5], x[6], x[7]
		for k, i := range ri {
			vk, d := v[k], (*[8]float64)(buf[8*(i-lo):])
			d[0] += vk * x0
			d[1] += vk * x1
			d[2] += vk * x2
			d[3] += vk * x3
			d[4] += vk * x4
			d[5] += vk * x5
			d[6] += vk * x6
			d[7] += vk * x7
		}
	}
}

// reduce runs phase 2 task t: the destination rows are the sums of the
// covering blocks' buffers, taken in block order.
func (ws *workspace) reduce(t int) {
	p := ws.p
	w := max(ws.width, 1)
	task := p.tasks[t]
	start, end := w*task.start, w*task.end
	dst := ws.dst[start:end]
	cov := p.covers[task.first : task.first+task.n]
	if len(cov) == 0 {
		clear(dst)
		return
	}
	b := int(cov[0])
	base := w * (p.off[b] - p.lo[b])
	copy(dst, ws.buf[base+start:base+end])
	for _, c := range cov[1:] {
		b := int(c)
		base := w * (p.off[b] - p.lo[b])
		src := ws.buf[base+start : base+end]
		src = src[:len(dst)]
		for i, v := range src {
			dst[i] += v
		}
	}
}

// Fold computes dst = A x, overwriting dst. len(dst) must be the number
// of rows and len(x) the number of columns, otherwise Fold panics. dst
// must not alias x.
func (m *Matrix) Fold(dst, x []float64) {
	if len(dst) != m.rows || len(x) != m.cols {
		panic("sparse: Fold dimension mismatch")
	}
	m.exec(kFold, dst, x, nil, nil, nil)
}

// BackProject computes dst = Aᵀ y, overwriting dst. len(dst) must be the
// number of columns and len(y) the number of rows, otherwise BackProject
// panics. dst must not alias y.
func (m *Matrix) BackProject(dst, y []float64) {
	if len(dst) != m.cols || len(y) != m.rows {
		panic("sparse: BackProject dimension mismatch")
	}
	m.exec(kBackProject, dst, y, nil, nil, nil)
}

// Sweep makes one fused pass over the matrix. For every column j it
// gathers g = (Aᵀ y)_j, calls x := update(j, g), and scatters column j
// times x into next, so that on return next = A x' where x'_j is the value
// update returned for column j. next is overwritten; len(next) and
// len(y) must be the number of rows, otherwise Sweep panics. next must
// not alias y.
//
// update is called exactly once per column, in increasing column order
// within each block of the fixed partition but concurrently from several
// goroutines for columns of different blocks; it must only touch state
// belonging to column j (typically x[j] and per-column arrays). It may
// call kernels (of this or other matrices) on other destination slices.
func (m *Matrix) Sweep(next, y []float64, update func(j int, g float64) float64) {
	if len(next) != m.rows || len(y) != m.rows {
		panic("sparse: Sweep dimension mismatch")
	}
	m.exec(kSweep, next, y, update, nil, nil)
}

// SweepBlock is Sweep on k vectors at once, read from y and written to
// next interleaved: element i of vector s is y[i*k+s] (len(y) and
// len(next) are k times the number of rows). For every column j it
// gathers g[s] = (Aᵀ y_s)_j for s < k, calls update(j, g, x), which must
// set x[s] for every s, and scatters column j times x[s] into next_s. The
// matrix is read once for all k vectors. Every vector gets exactly the
// bits that Sweep would give it alone (the same sums in the same order),
// whatever k. next is overwritten and must not alias y. g and x have
// length k, belong to the call and must not be kept. The rules of Sweep
// for update apply. SweepBlock allocates only on the first calls (its
// scratch is kept with the matrix's workspaces). It panics if k < 1 or
// a length does not match.
func (m *Matrix) SweepBlock(next, y []float64, k int, update func(j int, g, x []float64)) {
	if k < 1 || len(next) != k*m.rows || len(y) != k*m.rows {
		panic("sparse: SweepBlock dimension mismatch")
	}
	p := m.part
	ws := p.get(m)
	ws.kind, ws.dst, ws.x, ws.updateBlock, ws.width = kSweepBlock, next, y, update, k
	if n := 2 * k * p.blocks(); len(ws.gx) < n {
		ws.gx = make([]float64, n)
	}
	m.execOn(ws, true)
	p.put(ws)
}

// RowRanges returns the fixed partition of the rows used by SweepRows:
// range r covers the rows b[r]..b[r+1]-1 of the returned b (len(b)-1
// ranges, at most 2^14 rows each, in increasing order, covering all
// rows). It depends only on the matrix structure. The slice must not be
// modified.
func (m *Matrix) RowRanges() []int { return m.part.rowBounds }

// SweepRows is Sweep with a hook on finished rows: for every range r of
// RowRanges it calls rows(r, lo, hi) exactly once, as soon as next[lo:hi]
// holds its final values, which is while the scatter still runs over
// other rows and usually while next[lo:hi] is still in cache. It lets the
// caller fold its per-row work (for example the ratio of data to the new
// folded spectrum and a likelihood) into the same pass.
//
// rows may be called concurrently for different ranges, and concurrently
// with update. It may read and write next[lo:hi] and state belonging to
// range r; it must not touch next outside [lo, hi) nor modify y (other
// columns may still be gathering from it). Per-range partial sums
// combined in range order give results independent of the scheduling.
// The other rules of Sweep apply.
func (m *Matrix) SweepRows(next, y []float64, update func(j int, g float64) float64, rows func(r, lo, hi int)) {
	if len(next) != m.rows || len(y) != m.rows {
		panic("sparse: SweepRows dimension mismatch")
	}
	m.exec(kSweep, next, y, update, rows, nil)
}

// ColRanges returns the fixed partition of the columns into the blocks
// of the kernels: range r covers the columns b[r]..b[r+1]-1 of the
// returned b (in increasing order, covering all columns). It depends
// only on the matrix structure. The slice must not be modified.
func (m *Matrix) ColRanges() []int { return m.part.bounds }

// SweepHooks is SweepRows with a second hook, on finished columns: for
// every range of ColRanges it calls cols(lo, hi) exactly once, right
// after update has returned for the columns lo..hi-1, from the goroutine
// that called update for them, while their per-column state is usually
// still in cache. It lets the caller fold its per-column work (for
// example a distance between the old and the new x) into the same pass.
//
// cols may be called concurrently for different ranges, and
// concurrently with update and rows; it may touch only state belonging
// to the columns [lo, hi). rows may be nil. The other rules of
// SweepRows apply.
func (m *Matrix) SweepHooks(next, y []float64, update func(j int, g float64) float64, rows func(r, lo, hi int), cols func(lo, hi int)) {
	if len(next) != m.rows || len(y) != m.rows {
		panic("sparse: SweepHooks dimension mismatch")
	}
	m.exec(kSweep, next, y, update, rows, cols)
}

// ColSums writes the sum of each column into dst (length cols),
// overwriting it.
func (m *Matrix) ColSums(dst []float64) {
	if len(dst) != m.cols {
		panic("sparse: ColSums dimension mismatch")
	}
	m.exec(kColSums, dst, nil, nil, nil, nil)
}

// RowSums writes the sum of each row into dst (length rows), overwriting
// it.
func (m *Matrix) RowSums(dst []float64) {
	if len(dst) != m.rows {
		panic("sparse: RowSums dimension mismatch")
	}
	m.exec(kRowSums, dst, nil, nil, nil, nil)
}

// ScaleCols multiplies column j by f[j] in place, and its sums of
// squared weights (if any) by f[j]². len(f) must be the number of
// columns and every f[j] finite, otherwise ScaleCols panics. ScaleCols
// changes the matrix: it must not run concurrently
// with any other use of the matrix or of matrices sharing its values
// (Clone first to keep the original).
func (m *Matrix) ScaleCols(f []float64) {
	if len(f) != m.cols {
		panic("sparse: ScaleCols dimension mismatch")
	}
	for _, v := range f {
		if v-v != 0 {
			panic("sparse: ScaleCols with a non-finite factor")
		}
	}
	m.exec(kScale, nil, f, nil, nil, nil)
}
