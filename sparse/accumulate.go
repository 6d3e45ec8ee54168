package sparse

import (
	"errors"
	"fmt"
	"math"
	"math/bits"
	"runtime"
	"runtime/debug"
	"sync"
	"sync/atomic"
)

// DefaultChunkEntries is the default number of entries an Accumulator
// sorts together (see AccumulatorOptions.ChunkEntries).
const DefaultChunkEntries = 1 << 19

// DefaultWindow is the default number of batches an Accumulator holds
// ahead of the next expected sequence number.
const DefaultWindow = 16

// MaxReportedCells is the largest number of cells listed individually in
// a Report; beyond it cells are only counted.
const MaxReportedCells = 1000

// serialBatch is the number of entries Add collects before handing them
// on as one batch.
const serialBatch = 1 << 16

// AccumulatorOptions tunes an Accumulator. The zero value selects the
// defaults.
type AccumulatorOptions struct {
	// ChunkEntries is the number of consecutive entries of the ordered
	// entry stream that are sorted and summed together before they are
	// merged into the distinct cells. It bounds the memory of the chunk
	// buffers (32 bytes per entry for each chunk being sorted) and it is
	// part of the definition of the result: sums of the same stream cut
	// into chunks of another size may differ in their last bits. Zero
	// means DefaultChunkEntries.
	ChunkEntries int
	// Window is the number of batches that may be held ahead of the next
	// expected sequence number; AddBatch blocks beyond it. It bounds the
	// memory of batches that arrive out of order and does not change the
	// result. Zero means DefaultWindow.
	Window int
	// MemoryLimit, when positive, bounds the accumulation's memory
	// budget (AccumulatorBytes) in bytes: once the distinct cells
	// gathered so far need more, the accumulation ends with a
	// *MemoryError. Zero means no limit.
	MemoryLimit int64

	segmentCells int // store segment size (tests); zero means maxSegment
}

// AccumulatorBytes returns the memory budget of an accumulation of a
// matrix of cols columns that holds cells distinct cells after entries
// entries, fed from goroutines goroutines in batches of at most batch
// entries, under opt (nil for the defaults), in bytes:
//
//	48·cells          the store: 24 bytes per cell, in arrays at least half full
//	+ 6·cells         the summed chunks waiting to be merged (a quarter of the store)
//	+ 56·k·(G+1)      the chunks being filled and sorted (32 bytes per entry) and their sums (24)
//	+ 16·(W+G)·B      the batches held ahead of the next expected one, and being packed
//	+ 8·(cols+1)      the column pointers of the matrix
//
// with k = min(ChunkEntries, entries), W = Window, B = batch and
// G = goroutines. Beyond the first chunk the number of entries (events)
// moves only the time. The matrix Matrix returns takes 24 bytes per cell
// (8 with its row index, 8 with its value, 8 with its sum of squared
// weights) plus the column pointers; Matrix writes it while it hands the
// store back to the system, segment by segment, so the peak stays within
// the budget. What the caller holds besides (its own batches, histograms
// over the bins) is not included. The store's arrays are about two
// thirds full on average, so the budget is an upper bound by about a
// third.
func AccumulatorBytes(entries int64, cells, cols int, opt *AccumulatorOptions, goroutines, batch int) int64 {
	k, w := int64(DefaultChunkEntries), int64(DefaultWindow)
	if opt != nil && opt.ChunkEntries > 0 {
		k = int64(opt.ChunkEntries)
	}
	if opt != nil && opt.Window > 0 {
		w = int64(opt.Window)
	}
	k = min(k, max(entries, 0))
	return 54*int64(cells) + 56*k*int64(goroutines+1) + 16*(w+int64(goroutines))*int64(batch) + 8*int64(cols+1)
}

// budget is AccumulatorBytes for the accumulator's state (under a.mu).
func (a *Accumulator) budget(cells int) int64 {
	opt := AccumulatorOptions{ChunkEntries: a.chunkCap, Window: int(a.window)}
	return AccumulatorBytes(a.entries, cells, a.cols, &opt, runtime.GOMAXPROCS(0), a.batch)
}

// MemoryError reports that an accumulation was stopped because the
// memory budget of the distinct cells gathered so far (AccumulatorBytes)
// exceeds AccumulatorOptions.MemoryLimit.
type MemoryError struct {
	Rows, Cols int   // the matrix's dimensions
	Cells      int   // distinct cells when the accumulation stopped
	Bytes      int64 // their budget
	Limit      int64
}

func (e *MemoryError) Error() string {
	return fmt.Sprintf("sparse: the accumulation of a %d×%d matrix reached %d distinct cells, whose memory budget of %.0f MiB (54 bytes per cell and the buffers) is above the memory limit of %.0f MiB; use coarser binnings (fewer cells), or raise the memory limit",
		e.Rows, e.Cols, e.Cells, float64(e.Bytes)/(1<<20), float64(e.Limit)/(1<<20))
}

// Cell is one cell of an accumulated matrix.
type Cell struct {
	Row, Col int
	SumW     float64 // sum of the weights
	SumW2    float64 // sum of the squared weights
}

// Report describes what an Accumulator built.
type Report struct {
	Entries int64 // number of entries added
	Cells   int   // number of distinct cells stored
	// NegativeCount is the number of cells whose sum of weights is
	// negative. They are stored in the matrix like every other cell.
	NegativeCount int
	// Negative lists the first MaxReportedCells of those cells in
	// column-major order.
	Negative []Cell
	// ZeroCount is the number of cells whose weights cancelled exactly to
	// a zero sum. They are stored (their SumW2 is positive).
	ZeroCount int
}

// Accumulator sums weighted (row, column) entries into the distinct
// cells of a rows×cols matrix, keeping for every cell the sum of the
// weights and the sum of the squared weights. Its memory grows with the
// number of distinct cells, not with the number of entries: entries are
// sorted in bounded chunks (a stable radix sort of packed column-major
// keys), summed within the chunk and merged into a sorted store of
// distinct cells.
//
// # Determinism
//
// Entries arrive in batches numbered 0, 1, 2, ... (AddBatch), which may
// be added from many goroutines in any order. The result is a function
// of the ordered entry stream alone, that is the batches concatenated in
// sequence order, and of AccumulatorOptions.ChunkEntries: each cell's
// sums are formed in stream order within a chunk and chunk by chunk in
// stream order. The same stream gives the same bits whatever the number
// of goroutines, their scheduling and the way the stream is cut into
// batches. A caller filling from events should number its batches by
// event position (for example batch s holds events [s·B, (s+1)·B)), never
// by worker.
//
// Add is a single-goroutine alternative that numbers batches itself; an
// Accumulator is fed either by Add or by AddBatch, not both.
//
// AddBatch and Add may be called concurrently (AddBatch) until Matrix is
// called; Matrix must be called once, after every AddBatch call has
// returned.
type Accumulator struct {
	rows, cols int
	rowBits    uint // row field width of a packed key
	keyBits    uint // total width of a packed key
	chunkCap   int
	window     uint64
	maxSeg     int
	limit      int64 // memory limit, 0 for none

	mu      sync.Mutex
	cond    sync.Cond
	err     error // first error, sticky
	done    bool
	mode    int // 0 none yet, modeSerial, modeBatch
	next    uint64
	held    map[uint64]*heldBatch
	heldMax uint64 // largest sequence number seen, plus one
	chunk   *chunkBuf
	nClosed uint64 // chunks closed so far
	entries int64
	batch   int // largest batch so far, in entries
	freeC   []*chunkBuf
	freeH   []*heldBatch

	// merge stage, also under mu
	runs       map[uint64]*run // sorted runs waiting for earlier ones
	ready      []*run          // consecutive runs due for merging
	freeR      [][]cell        // run buffers for reuse
	readyCells int
	nextMerge  uint64
	merging    bool
	segs       []*segment   // the distinct cells, split by key range
	tmp        []*mergeWork // per merging goroutine
	pool       backPool     // segment arrays given up, for reuse
	cells      int          // number of distinct cells in segs

	// serial feed (Add)
	ser    heldBatch
	serSeq uint64
}

const (
	modeSerial = 1
	modeBatch  = 2
)

// heldBatch is a batch packed into keys, waiting for its turn.
type heldBatch struct {
	keys []uint64
	w    []float64
}

// chunkBuf holds one chunk: the packed entries and the sort scratch.
type chunkBuf struct {
	k0, k1   []uint64
	w0, w1   []float64
	sorter   radixSorter
	sequence uint64
}

// NewAccumulator returns an empty accumulator for a rows×cols matrix
// (rows reco bins, cols truth bins). opt may be nil. Both dimensions must
// be at most math.MaxInt32.
func NewAccumulator(rows, cols int, opt *AccumulatorOptions) (*Accumulator, error) {
	if rows < 0 || cols < 0 || rows > math.MaxInt32 || cols > math.MaxInt32 {
		return nil, fmt.Errorf("sparse: accumulator dimensions %d×%d out of range [0,%d]", rows, cols, math.MaxInt32)
	}
	a := &Accumulator{rows: rows, cols: cols, chunkCap: DefaultChunkEntries, window: DefaultWindow, maxSeg: maxSegment}
	if opt != nil {
		if opt.ChunkEntries < 0 || opt.Window < 0 || opt.MemoryLimit < 0 {
			return nil, fmt.Errorf("sparse: negative accumulator option (ChunkEntries %d, Window %d, MemoryLimit %d)", opt.ChunkEntries, opt.Window, opt.MemoryLimit)
		}
		a.limit = opt.MemoryLimit
		if opt.ChunkEntries > 0 {
			a.chunkCap = opt.ChunkEntries
		}
		if opt.Window > 0 {
			a.window = uint64(opt.Window)
		}
		if opt.segmentCells > 1 {
			a.maxSeg = opt.segmentCells
		}
	}
	a.pool.size = segArray(a.maxSeg)
	if rows > 0 {
		a.rowBits = uint(bits.Len(uint(rows - 1)))
	}
	colBits := uint(0)
	if cols > 0 {
		colBits = uint(bits.Len(uint(cols - 1)))
	}
	a.keyBits = a.rowBits + colBits
	a.cond.L = &a.mu
	a.held = make(map[uint64]*heldBatch)
	a.runs = make(map[uint64]*run)
	return a, nil
}

// Dims returns the dimensions of the matrix being accumulated.
func (a *Accumulator) Dims() (rows, cols int) { return a.rows, a.cols }

// Add adds weight w to the cell (row, col). It is the single-goroutine
// feed: Add must not be called concurrently, nor mixed with AddBatch. The
// entries form the stream in call order. The first invalid entry (index
// out of range, non-finite weight) is returned as an error and ends the
// accumulation.
func (a *Accumulator) Add(row, col int, w float64) error {
	if a.mode != modeSerial {
		a.mu.Lock()
		if a.mode == modeBatch {
			a.mu.Unlock()
			return errors.New("sparse: Accumulator.Add called on an accumulator fed by AddBatch")
		}
		a.mode = modeSerial
		a.mu.Unlock()
	}
	if uint(row) >= uint(a.rows) || uint(col) >= uint(a.cols) || w-w != 0 {
		err := fmt.Errorf("sparse: entry %d: %w", a.entries+int64(len(a.ser.keys)), a.checkEntry(row, col, w))
		a.fail(err)
		return err
	}
	a.ser.keys = append(a.ser.keys, uint64(col)<<a.rowBits|uint64(row))
	a.ser.w = append(a.ser.w, w)
	if len(a.ser.keys) >= serialBatch {
		return a.flushSerial()
	}
	return nil
}

func (a *Accumulator) flushSerial() error {
	if len(a.ser.keys) == 0 {
		return nil
	}
	h := a.getHeld(len(a.ser.keys))
	h.keys = append(h.keys, a.ser.keys...)
	h.w = append(h.w, a.ser.w...)
	a.ser.keys, a.ser.w = a.ser.keys[:0], a.ser.w[:0]
	seq := a.serSeq
	a.serSeq++
	return a.submit(seq, h)
}

func (a *Accumulator) checkEntry(row, col int, w float64) error {
	switch {
	case uint(row) >= uint(a.rows):
		return fmt.Errorf("reco bin %d out of range [0,%d)", row, a.rows)
	case uint(col) >= uint(a.cols):
		return fmt.Errorf("truth bin %d out of range [0,%d)", col, a.cols)
	default:
		return fmt.Errorf("non-finite weight %v", w)
	}
}

// AddBatch adds the entries (rows[i], cols[i], w[i]) as batch number seq
// of the entry stream. Batches must be numbered 0, 1, 2, ... without gaps
// or repeats; they may be added from many goroutines in any order.
// AddBatch copies the entries, so the caller may reuse the slices on
// return. It blocks while seq is more than the window ahead of the
// earliest batch not yet added.
//
// An invalid entry (index out of range, non-finite weight, mismatched
// slice lengths, repeated sequence number) is returned as an error naming
// the batch and the entry; it ends the accumulation, and every later call
// returns the same error.
//
// A batch may be empty. Batches of 10^5 to 10^6 entries amortise the
// per-batch costs well.
func (a *Accumulator) AddBatch(seq uint64, rows, cols []int32, w []float64) error {
	if len(rows) != len(cols) || len(rows) != len(w) {
		err := fmt.Errorf("sparse: batch %d: %d rows, %d columns and %d weights", seq, len(rows), len(cols), len(w))
		a.fail(err)
		return err
	}
	a.mu.Lock()
	if a.mode == modeSerial {
		a.mu.Unlock()
		return errors.New("sparse: Accumulator.AddBatch called on an accumulator fed by Add")
	}
	a.mode = modeBatch
	for a.err == nil && !a.done && seq >= a.next+a.window {
		a.cond.Wait()
	}
	if err := a.stateErr(seq); err != nil {
		a.mu.Unlock()
		return err
	}
	h := a.popHeld(len(rows))
	a.mu.Unlock()

	rb := a.rowBits
	nr, nc := uint32(a.rows), uint32(a.cols)
	keys := h.keys[:len(rows)]
	hw := h.w[:len(rows)]
	cols = cols[:len(rows)]
	w = w[:len(rows)]
	for i, r := range rows {
		c := cols[i]
		wi := w[i]
		if uint32(r) >= nr || uint32(c) >= nc || wi-wi != 0 {
			err := fmt.Errorf("sparse: batch %d entry %d: %w", seq, i, a.checkEntry(int(r), int(c), wi))
			a.fail(err)
			return err
		}
		keys[i] = uint64(c)<<rb | uint64(r)
		hw[i] = wi
	}
	h.keys, h.w = keys, hw
	return a.submit(seq, h)
}

// stateErr reports, under a.mu, why batch seq cannot be added.
func (a *Accumulator) stateErr(seq uint64) error {
	switch {
	case a.err != nil:
		return a.err
	case a.done:
		return errors.New("sparse: Accumulator used after Matrix")
	case seq < a.next || a.held[seq] != nil:
		err := fmt.Errorf("sparse: batch %d added twice", seq)
		a.err = err
		a.cond.Broadcast()
		return err
	}
	return nil
}

// fail records err as the accumulator's sticky error.
func (a *Accumulator) fail(err error) {
	a.mu.Lock()
	if a.err == nil {
		a.err = err
	}
	a.cond.Broadcast()
	a.mu.Unlock()
}

func (a *Accumulator) popHeld(n int) *heldBatch {
	var h *heldBatch
	if k := len(a.freeH); k > 0 {
		h = a.freeH[k-1]
		a.freeH = a.freeH[:k-1]
	} else {
		h = new(heldBatch)
	}
	if cap(h.keys) < n || cap(h.w) < n {
		h.keys = make([]uint64, n)
		h.w = make([]float64, n)
	}
	h.keys, h.w = h.keys[:n], h.w[:n]
	return h
}

func (a *Accumulator) getHeld(n int) *heldBatch {
	a.mu.Lock()
	h := a.popHeld(n)
	a.mu.Unlock()
	h.keys, h.w = h.keys[:0], h.w[:0]
	return h
}

// submit hands the packed batch seq to the ordered stage: it is appended
// to the stream when every earlier batch has been; full chunks are then
// sorted and merged by the calling goroutine.
func (a *Accumulator) submit(seq uint64, h *heldBatch) error {
	a.mu.Lock()
	if err := a.stateErr(seq); err != nil {
		a.mu.Unlock()
		return err
	}
	a.held[seq] = h
	a.batch = max(a.batch, len(h.keys))
	if seq+1 > a.heldMax {
		a.heldMax = seq + 1
	}
	var closed []*chunkBuf
	for {
		b := a.held[a.next]
		if b == nil {
			break
		}
		delete(a.held, a.next)
		a.next++
		closed = a.appendStream(b, closed)
		b.keys, b.w = b.keys[:0], b.w[:0]
		a.freeH = append(a.freeH, b)
	}
	a.cond.Broadcast()
	a.mu.Unlock()
	if len(closed) == 0 {
		return nil
	}
	for _, c := range closed {
		a.sortAndMerge(c, false)
	}
	a.mu.Lock()
	err := a.err
	a.mu.Unlock()
	return err
}

// appendStream appends a batch to the stream (under a.mu), closing every
// chunk that fills up.
func (a *Accumulator) appendStream(b *heldBatch, closed []*chunkBuf) []*chunkBuf {
	keys, w := b.keys, b.w
	a.entries += int64(len(keys))
	for len(keys) > 0 {
		if a.chunk == nil {
			a.chunk = a.popChunk()
		}
		c := a.chunk
		room := a.chunkCap - len(c.k0)
		n := min(room, len(keys))
		if cap(c.k0)-len(c.k0) < n {
			c.grow(len(c.k0)+n, a.chunkCap)
		}
		c.k0 = append(c.k0, keys[:n]...)
		c.w0 = append(c.w0, w[:n]...)
		keys, w = keys[n:], w[n:]
		if len(c.k0) == a.chunkCap {
			c.sequence = a.nClosed
			a.nClosed++
			closed = append(closed, c)
			a.chunk = nil
		}
	}
	return closed
}

func (c *chunkBuf) grow(n, limit int) {
	nc := max(2*cap(c.k0), n, 1<<12)
	nc = min(nc, limit)
	k := make([]uint64, len(c.k0), nc)
	copy(k, c.k0)
	w := make([]float64, len(c.w0), nc)
	copy(w, c.w0)
	c.k0, c.w0 = k, w
}

func (a *Accumulator) popChunk() *chunkBuf {
	if k := len(a.freeC); k > 0 {
		c := a.freeC[k-1]
		a.freeC = a.freeC[:k-1]
		return c
	}
	return new(chunkBuf)
}

// maxGroup is the largest number of runs merged into the store at once.
const maxGroup = 16

// cell is one distinct cell: its packed key and sums.
type cell struct {
	key     uint64
	sw, sw2 float64
}

// run is a sorted chunk with its equal keys summed.
type run struct {
	cells    []cell
	sequence uint64
}

// sortAndMerge sorts a closed chunk and sums its equal keys into a run,
// then merges the runs that are due into the store. Runs are merged
// strictly in chunk order, several at a time once they hold a quarter of
// the store's cells (so the store is rewritten rarely); force merges all
// that are ready. For every cell the sums are added chunk by chunk in
// chunk order, so how the runs are grouped does not change the result.
func (a *Accumulator) sortAndMerge(c *chunkBuf, force bool) {
	a.mu.Lock()
	if c != nil {
		var out []cell
		if k := len(a.freeR); k > 0 && cap(a.freeR[k-1]) >= len(c.k0) {
			out = a.freeR[k-1]
			a.freeR = a.freeR[:k-1]
		}
		a.mu.Unlock()
		if out == nil {
			out = make([]cell, 0, len(c.k0))
		}
		r := &run{cells: c.sortRun(a.keyBits, out[:0]), sequence: c.sequence}
		a.mu.Lock()
		c.k0, c.w0 = c.k0[:0], c.w0[:0]
		a.freeC = append(a.freeC, c)
		a.runs[r.sequence] = r
	}
	for {
		for r := a.runs[a.nextMerge]; r != nil; r = a.runs[a.nextMerge] {
			delete(a.runs, a.nextMerge)
			a.nextMerge++
			a.ready = append(a.ready, r)
			a.readyCells += len(r.cells)
		}
		if a.merging || len(a.ready) == 0 ||
			!force && len(a.ready) < maxGroup && 4*a.readyCells < a.cells {
			break
		}
		group := a.ready[:min(len(a.ready), maxGroup)]
		a.merging = true
		a.mu.Unlock()
		a.mergeGroup(group)
		a.mu.Lock()
		a.merging = false
		if b := a.budget(a.cells); a.limit > 0 && b > a.limit && a.err == nil {
			a.err = &MemoryError{Rows: a.rows, Cols: a.cols, Cells: a.cells, Bytes: b, Limit: a.limit}
			a.cond.Broadcast()
		}
		for _, r := range group {
			a.readyCells -= len(r.cells)
			if len(a.freeR) < maxGroup {
				a.freeR = append(a.freeR, r.cells[:0])
			}
			r.cells = nil
		}
		n := copy(a.ready, a.ready[len(group):])
		clear(a.ready[n:])
		a.ready = a.ready[:n]
	}
	a.mu.Unlock()
}

// sortRun sorts the chunk stably by key and sums equal keys in stream
// order, appending the cells to out.
func (c *chunkBuf) sortRun(keyBits uint, out []cell) []cell {
	n := len(c.k0)
	if cap(c.k1) < n {
		c.k1 = make([]uint64, n, cap(c.k0))
		c.w1 = make([]float64, n, cap(c.k0))
	}
	c.k1, c.w1 = c.k1[:n], c.w1[:n]
	k, w := c.sorter.sort(c.k0, c.w0, c.k1, c.w1, keyBits)
	w = w[:len(k)]
	for i := 0; i < n; {
		key := k[i]
		s, s2 := w[i], w[i]*w[i]
		i++
		for i < n && k[i] == key {
			wi := w[i]
			s += wi
			s2 += wi * wi
			i++
		}
		out = append(out, cell{key, s, s2})
	}
	return out
}

// maxSegment is the number of cells a store segment is cut to when it
// overflows its array (6 MiB of cells: a segment being merged stays in
// cache).
const maxSegment = 1 << 18

// segArray returns the capacity, in cells, of a full-size segment array
// for segments of at most maxSeg cells after a split: a quarter more, so
// that a segment absorbs new cells in place for a while before it is cut
// again.
func segArray(maxSeg int) int { return maxSeg + max(maxSeg/4, 1) }

// segment is the part of the store with keys below hi (and at or above
// the previous segment's hi): sorted distinct cells, a window of a backing
// array with some spare capacity, placed at its start or at its end.
// Every backing array but that of a store of one small segment has the
// same capacity (segArray), so that arrays given up by one segment are
// taken by the next: the store's growth creates no garbage.
type segment struct {
	hi    uint64
	cells []cell
	back  []cell
	runs  [][]cell   // the parts of the runs being merged
	split []*segment // the pieces replacing the segment after an overflow
}

// mergeWork is a merging goroutine's scratch: two buffers for combining
// the run parts of a segment, and one for a segment that overflows its
// array before it is cut.
type mergeWork struct {
	tmp [2][]cell
	big []cell
}

// mergeGroup merges consecutive summed runs into the store, one group at
// a time. For a cell in several places the sums are the store's, then
// each run's in chunk order, added left to right; the store's split into
// segments and the goroutines that merge them do not change any sum.
func (a *Accumulator) mergeGroup(rs []*run) {
	if len(a.segs) == 0 {
		a.segs = []*segment{{hi: math.MaxUint64}}
	}
	// Cut every run at the segment bounds.
	for q, r := range rs {
		lo := 0
		for _, sg := range a.segs {
			if q == 0 {
				sg.runs = sg.runs[:0]
			}
			hi := lo + searchCells(r.cells[lo:], sg.hi)
			sg.runs = append(sg.runs, r.cells[lo:hi])
			lo = hi
		}
	}
	var next atomic.Int64
	g := min(runtime.GOMAXPROCS(0), len(a.segs))
	for len(a.tmp) < g {
		a.tmp = append(a.tmp, new(mergeWork))
	}
	work := func(w *mergeWork) {
		for {
			i := int(next.Add(1) - 1)
			if i >= len(a.segs) {
				return
			}
			a.segs[i].merge(w, &a.pool, a.maxSeg)
		}
	}
	if g > 1 {
		var wg sync.WaitGroup
		for k := 1; k < g; k++ {
			wg.Add(1)
			go func() { defer wg.Done(); work(a.tmp[k]) }()
		}
		work(a.tmp[0])
		wg.Wait()
	} else {
		work(a.tmp[0])
	}
	// Put the pieces of the segments that overflowed in their place. A
	// cut leaves its pieces about half full; when the next segment is
	// fuller, the last two pieces and that segment share their cells
	// evenly (three arrays about two thirds full instead of two half full
	// and one full, as a B*-tree splits).
	segs := a.segs[:0:0]
	a.cells = 0
	for q := 0; q < len(a.segs); q++ {
		sg := a.segs[q]
		clear(sg.runs)
		sg.runs = sg.runs[:0]
		if sg.split == nil {
			segs = append(segs, sg)
			a.cells += len(sg.cells)
			continue
		}
		pieces := sg.split
		sg.split = nil
		if k := len(pieces); k >= 2 && q+1 < len(a.segs) && a.segs[q+1].split == nil {
			if nb := a.segs[q+1]; len(nb.cells) > len(pieces[k-1].cells) && cap(nb.back) == a.pool.size {
				nb.runs = nb.runs[:0]
				a.rebalance(pieces[k-2], pieces[k-1], nb)
				pieces = append(pieces, nb)
				q++
			}
		}
		for _, p := range pieces {
			segs = append(segs, p)
			a.cells += len(p.cells)
		}
	}
	a.segs = segs
}

// rebalance shares the cells of three consecutive segments evenly among
// their arrays (at their starts), through the first merging goroutine's
// overflow buffer.
func (a *Accumulator) rebalance(x, y, z *segment) {
	w := a.tmp[0]
	n := len(x.cells) + len(y.cells) + len(z.cells)
	if cap(w.big) < n {
		w.big = make([]cell, n)
	}
	all := append(append(append(w.big[:0], x.cells...), y.cells...), z.cells...)
	for i, sg := range []*segment{x, y, z} {
		lo, hi := i*n/3, (i+1)*n/3
		sg.cells = sg.back[:copy(sg.back[:cap(sg.back)], all[lo:hi])]
		if i < 2 {
			sg.hi = all[hi].key
		}
	}
}

// backPool keeps the full-size segment arrays given up when a segment is
// cut, for its pieces: with GOGC=100 garbage would let the heap reach
// twice the live data. It holds at most maxPooled arrays.
type backPool struct {
	mu   sync.Mutex
	free [][]cell
	size int // capacity of every pooled array (segArray)
}

// maxPooled bounds the arrays a backPool keeps.
const maxPooled = 8

// get returns a full-size array, from the pool or new.
func (p *backPool) get() []cell {
	p.mu.Lock()
	if k := len(p.free); k > 0 {
		b := p.free[k-1]
		p.free[k-1] = nil
		p.free = p.free[:k-1]
		p.mu.Unlock()
		return b[:cap(b)]
	}
	p.mu.Unlock()
	return make([]cell, p.size)
}

// put gives back an array; arrays of another size, and arrays beyond
// maxPooled, are dropped.
func (p *backPool) put(b []cell) {
	if cap(b) != p.size {
		return
	}
	p.mu.Lock()
	if len(p.free) < maxPooled {
		p.free = append(p.free, b)
	}
	p.mu.Unlock()
}

// searchCells returns the number of cells with keys below bound.
func searchCells(cs []cell, bound uint64) int {
	lo, hi := 0, len(cs)
	for lo < hi {
		m := int(uint(lo+hi) >> 1)
		if cs[m].key < bound {
			lo = m + 1
		} else {
			hi = m
		}
	}
	return lo
}

// merge merges the segment's run parts into it. Several parts are first
// combined into one sequence sorted by key in which equal keys keep the
// run order (pairwise stable merges in w.tmp, which is cache-sized since
// a segment is small). The sequence is then merged into the store in
// place when the backing array has room: a store at its start is merged
// backwards, from the last cell, writing from the end of the array; a
// store at its end is merged forwards, writing from the start. Either way
// no write overtakes a store cell not yet read. A segment that no longer
// fits in a full-size array is merged into w.big and cut into pieces of
// at most maxSeg cells, each in a full-size array (its own array is
// reused for the first), which become sg.split.
func (sg *segment) merge(w *mergeWork, pool *backPool, maxSeg int) {
	ns := len(sg.cells)
	need := ns
	for _, r := range sg.runs {
		need += len(r)
	}
	if need == ns {
		return
	}
	seq := combine(sg.runs, &w.tmp)
	off := cap(sg.back) - cap(sg.cells)
	if ns == 0 {
		off = 0
	}
	switch {
	case need <= cap(sg.back) && off == 0:
		sg.cells = mergeBackward(sg.back[:cap(sg.back)], sg.cells, seq)
	case need <= cap(sg.back) && off+ns == cap(sg.back):
		sg.cells = mergeForward(sg.back[:cap(sg.back)], sg.cells, seq)
	case need <= cap(sg.back):
		// In the middle (cannot happen with the placements above, but
		// cheap to handle): move to the start first.
		sg.cells = sg.back[:copy(sg.back, sg.cells)]
		sg.cells = mergeBackward(sg.back[:cap(sg.back)], sg.cells, seq)
	case need <= pool.size:
		// The only segment of a small store, growing towards full size.
		back := make([]cell, min(pool.size, max(need+need/2, 2*cap(sg.back), 1<<10)))
		sg.cells = mergeBackward(back, sg.cells, seq)
		sg.back = back
	default:
		if cap(w.big) < need {
			w.big = make([]cell, need+need/8)
		}
		cells := mergeBackward(w.big[:need], sg.cells, seq)
		pool.put(sg.back)
		sg.back, sg.cells = nil, nil
		n := len(cells)
		pieces := (n + maxSeg - 1) / maxSeg
		sg.split = make([]*segment, pieces)
		for p := range pieces {
			lo, hi := p*n/pieces, (p+1)*n/pieces
			ps := &segment{hi: sg.hi, back: pool.get()}
			if p+1 < pieces {
				ps.hi = cells[hi].key
			}
			ps.cells = ps.back[:copy(ps.back, cells[lo:hi])]
			sg.split[p] = ps
		}
		if cap(w.big) > 4*pool.size {
			w.big = nil // an unusually large merge: do not keep its buffer
		}
	}
}

// combine returns the parts merged into one key-sorted sequence in which
// equal keys appear in part order. A single part is returned as it is.
func combine(parts [][]cell, tmp *[2][]cell) []cell {
	var n int
	live := parts[:0:0]
	for _, p := range parts {
		if len(p) > 0 {
			live = append(live, p)
			n += len(p)
		}
	}
	if len(live) == 1 {
		return live[0]
	}
	for k := range tmp {
		if cap(tmp[k]) < n {
			tmp[k] = make([]cell, n+n/4)
		}
	}
	buf := 0
	for len(live) > 1 {
		out := tmp[buf][:0]
		next := live[:0:0]
		for i := 0; i < len(live); i += 2 {
			start := len(out)
			if i+1 == len(live) {
				out = append(out, live[i]...)
			} else {
				out = mergeStable(out, live[i], live[i+1])
			}
			next = append(next, out[start:])
		}
		live = next
		buf ^= 1
	}
	return live[0]
}

// mergeStable appends the merge of the key-sorted a and b to out; on equal
// keys the cells of a come first.
func mergeStable(out, a, b []cell) []cell {
	i, j := 0, 0
	for i < len(a) && j < len(b) {
		if b[j].key < a[i].key {
			out = append(out, b[j])
			j++
		} else {
			out = append(out, a[i])
			i++
		}
	}
	out = append(out, a[i:]...)
	return append(out, b[j:]...)
}

// mergeBackward merges src (distinct keys) and seq (sorted, equal keys in
// run order) into the end of dst, which may be src's own array with src
// at its start, and returns the merged cells. A cell's sums are the
// store's, then those of its entries in seq in order, added left to
// right.
func mergeBackward(dst, src, seq []cell) []cell {
	s, w := len(src)-1, len(dst)-1
	for p := len(seq) - 1; p >= 0; {
		key := seq[p].key
		q := p
		for q > 0 && seq[q-1].key == key {
			q--
		}
		for s >= 0 && src[s].key > key {
			dst[w] = src[s]
			s--
			w--
		}
		var c cell
		first := q
		if s >= 0 && src[s].key == key {
			c = src[s]
			s--
		} else {
			c = seq[q]
			first = q + 1
		}
		for i := first; i <= p; i++ {
			c.sw += seq[i].sw
			c.sw2 += seq[i].sw2
		}
		dst[w] = c
		w--
		p = q - 1
	}
	// The store cells below every run key: copied unless already in place.
	if n := s + 1; n > 0 && &dst[w-s] != &src[0] {
		copy(dst[w-s:w+1], src[:n])
	}
	return dst[w-s:]
}

// mergeForward merges src, which sits at the end of dst, and seq into
// the start of dst, and returns the merged cells (sums as in
// mergeBackward).
func mergeForward(dst, src, seq []cell) []cell {
	s, w := 0, 0
	for p := 0; p < len(seq); {
		key := seq[p].key
		q := p + 1
		for q < len(seq) && seq[q].key == key {
			q++
		}
		for s < len(src) && src[s].key < key {
			dst[w] = src[s]
			s++
			w++
		}
		var c cell
		first := p
		if s < len(src) && src[s].key == key {
			c = src[s]
			s++
		} else {
			c = seq[p]
			first = p + 1
		}
		for i := first; i < q; i++ {
			c.sw += seq[i].sw
			c.sw2 += seq[i].sw2
		}
		dst[w] = c
		w++
		p = q
	}
	w += copy(dst[w:], src[s:])
	return dst[:w]
}

// releaseRounds and releaseCells set how often Matrix hands the memory
// of the store segments already written back to the system: every
// 1/releaseRounds of the cells, but not more often than every
// releaseCells cells (48 MiB of cells).
const (
	releaseRounds = 8
	releaseCells  = 1 << 21
)

// releaseMemory collects the garbage and returns the free memory to the
// system when bytes of memory were just dropped and that is more than
// releaseCells cells; below, it does nothing (a small accumulation never
// forces a collection).
func releaseMemory(bytes int) {
	if bytes >= 24*releaseCells {
		debug.FreeOSMemory()
	}
}

// Matrix finishes the accumulation and returns the matrix of the sums of
// weights (with the sums of squared weights as its SumW2) and a report.
// Call it once, after every AddBatch call has returned; the accumulator
// cannot be used afterwards.
//
// It returns an error if the accumulation failed earlier (the first
// error), if a batch number is missing from the sequence, or if a sum
// overflowed to infinity. Cells with a negative sum of weights are kept
// and listed in the report.
func (a *Accumulator) Matrix() (*Matrix, *Report, error) {
	if a.mode == modeSerial {
		if err := a.flushSerial(); err != nil {
			return nil, nil, err
		}
	}
	a.mu.Lock()
	if a.err != nil {
		a.mu.Unlock()
		return nil, nil, a.err
	}
	if a.done {
		a.mu.Unlock()
		return nil, nil, errors.New("sparse: Accumulator.Matrix called twice")
	}
	a.done = true
	a.cond.Broadcast()
	if len(a.held) > 0 {
		err := fmt.Errorf("sparse: batch %d was never added (batches up to %d were); every batch number from 0 must be added once", a.next, a.heldMax-1)
		a.err = err
		a.mu.Unlock()
		return nil, nil, err
	}
	if a.merging || len(a.runs) > 0 {
		a.mu.Unlock()
		return nil, nil, errors.New("sparse: Accumulator.Matrix called while AddBatch calls are running")
	}
	var last *chunkBuf
	if a.chunk != nil && len(a.chunk.k0) > 0 {
		last = a.chunk
		last.sequence = a.nClosed
		a.nClosed++
	}
	a.chunk = nil
	entries := a.entries
	a.mu.Unlock()
	a.sortAndMerge(last, false)
	// The chunk and spare run buffers are garbage from here on.
	a.freeC, a.freeR, a.freeH, a.ser = nil, nil, nil, heldBatch{}
	a.sortAndMerge(nil, true)
	a.freeR, a.ready, a.tmp, a.held, a.runs = nil, nil, nil, nil, nil
	a.pool = backPool{}
	if a.err != nil {
		a.segs = nil
		return nil, nil, a.err
	}
	n := a.cells
	colPtr := make([]int, a.cols+1)
	rowIdx := make([]int, 0, n)
	sw := make([]float64, 0, n)
	sw2 := make([]float64, 0, n)
	rowMask := uint64(1)<<a.rowBits - 1
	rep := &Report{Entries: entries, Cells: n}
	// The matrix arrays are written segment by segment; the segments
	// written are dropped and, for a large store, their memory is handed
	// back to the system every release cells (release), so that the
	// resident memory stays near that of the store alone instead of the
	// store and the matrix side by side.
	release := max(n/releaseRounds, releaseCells)
	releaseMemory(24 * n) // the buffers dropped above
	since := 0
	for q, sg := range a.segs {
		for _, cl := range sg.cells {
			r, c := int(cl.key&rowMask), int(cl.key>>a.rowBits)
			rowIdx = append(rowIdx, r)
			sw = append(sw, cl.sw)
			sw2 = append(sw2, cl.sw2)
			colPtr[c+1]++
			switch {
			case math.IsInf(cl.sw, 0) || math.IsInf(cl.sw2, 0):
				return nil, nil, fmt.Errorf("sparse: the sum of weights of cell (reco %d, truth %d) overflows", r, c)
			case cl.sw < 0:
				rep.NegativeCount++
				if len(rep.Negative) < MaxReportedCells {
					rep.Negative = append(rep.Negative, Cell{Row: r, Col: c, SumW: cl.sw, SumW2: cl.sw2})
				}
			case cl.sw == 0:
				rep.ZeroCount++
			}
		}
		since += len(sg.cells)
		a.segs[q] = nil
		if since >= release {
			releaseMemory(24 * since)
			since = 0
		}
	}
	a.segs = nil
	for c := 0; c < a.cols; c++ {
		colPtr[c+1] += colPtr[c]
	}
	m, err := NewMatrix(a.rows, a.cols, colPtr, rowIdx, sw, sw2)
	if err != nil {
		return nil, nil, fmt.Errorf("sparse: internal error building the accumulated matrix: %w", err)
	}
	return m, rep, nil
}
