package response

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"sync"
)

// Locator places a point in a binning scheme: Locate returns the global
// bin index of x, or a negative value when x is outside the scheme (a
// flow bin it would need is switched off). *binning.Scheme is a Locator.
type Locator interface {
	Len() int
	Locate(x []float64) int
}

// Evaluator computes one quantity (an observable, a weight or a
// selection) for every event of a batch: dst[k] is the value for event
// k, computed from cols, the batch's input columns in the order the
// sample's reader delivers them. len(dst) is the batch length. An
// Evaluator must not keep dst or cols.
type Evaluator func(dst []float64, cols [][]float64)

// Expr makes Evaluators. Each worker goroutine calls it once and uses
// the Evaluator it returns on that goroutine only, so Evaluators need
// not be safe for concurrent use (an *observable.Expr's Clone().Eval is
// a suitable result).
type Expr func() Evaluator

// Func returns an Expr whose Evaluators are all f, which must then be
// safe for concurrent use.
func Func(f func(dst []float64, cols [][]float64)) Expr {
	return func() Evaluator { return f }
}

// ReadFunc streams a sample's events: it calls fn for consecutive batches
// of events in file order, start being the position of the batch's first
// event and cols its input columns (all of length n). cols may be reused
// by the reader once fn returns. ReadFunc stops at the first error fn
// returns and must honour ctx.
type ReadFunc func(ctx context.Context, fn func(start int64, n int, cols [][]float64) error) error

// Level describes one level of a sample (truth or reco): the observable
// of each axis of the level's scheme (in the scheme's axis order) and an
// optional selection.
type Level struct {
	Observables []Expr
	// Select, when not nil, selects the events that pass this level:
	// an event passes when its value is non-zero and not NaN. A nil
	// Select lets every event pass.
	Select Expr
}

// Sample is one input file (or stream) of events.
type Sample struct {
	// Name identifies the sample in messages (usually its file name).
	Name string
	// Read streams the events.
	Read ReadFunc
	// ReadRange, when not nil, streams the events [lo, hi) of the sample
	// as Read does (start staying the position in the sample); it is
	// needed by Builder.AddRange.
	ReadRange func(ctx context.Context, lo, hi int64, fn func(start int64, n int, cols [][]float64) error) error
	// Events is the number of events if known in advance (for progress
	// reports), or a negative value.
	Events int64
	// Weight is the per-event weight; nil means 1.
	Weight Expr
	// Scale multiplies every weight; 0 means 1.
	Scale float64
}

func (s *Sample) scale() float64 {
	if s.Scale == 0 {
		return 1
	}
	return s.Scale
}

// Options control how events are processed. The zero value is usable.
type Options struct {
	// Workers is the number of goroutines that evaluate and locate
	// events; 0 means runtime.GOMAXPROCS(0). Results do not depend on it.
	Workers int
	// Progress, when not nil, is called from one goroutine after each
	// batch with the number of events done so far and the sample's
	// Events. It must return quickly; the library never draws anything.
	Progress func(done, total int64)
}

func (o *Options) workers() int {
	if o == nil || o.Workers <= 0 {
		return runtime.GOMAXPROCS(0)
	}
	return o.Workers
}

// bin codes in the per-event index arrays, beside bin numbers >= 0.
const (
	codeOutside  = -1 // selected, but outside the scheme
	codeRejected = -2 // failed the level's selection (or level absent)
)

// batch is one unit of work: a copy of the input columns and, after
// processing, the located bins and weights of its events.
type batch struct {
	erows, ecols []int32   // migration entries: reco and truth bins (Builder)
	ew           []float64 // and their weights
	seq          int64
	start        int64
	n            int
	cols         [][]float64
	truth        []int32 // truth bin or code
	reco         []int32 // reco bin or code
	diag         []int32 // reco observables located in the truth scheme, or code
	w            []float64
	err          error
}

func (b *batch) ensure(ncols, n int) {
	if len(b.cols) != ncols {
		b.cols = make([][]float64, ncols)
	}
	for c := range b.cols {
		if cap(b.cols[c]) < n {
			b.cols[c] = make([]float64, n)
		}
		b.cols[c] = b.cols[c][:n]
	}
	if cap(b.w) < n {
		b.truth = make([]int32, n)
		b.reco = make([]int32, n)
		b.diag = make([]int32, n)
		b.w = make([]float64, n)
	}
	b.truth, b.reco, b.diag, b.w = b.truth[:n], b.reco[:n], b.diag[:n], b.w[:n]
}

// scratch is a worker's evaluation space.
type scratch struct {
	diagPoint []float64
	sel       []float64
	obs       [][]float64 // per axis values
	point     []float64
}

func (s *scratch) ensure(naxes, n int) {
	if cap(s.sel) < n {
		s.sel = make([]float64, n)
	}
	s.sel = s.sel[:n]
	if len(s.obs) < naxes {
		s.obs = append(s.obs, make([][]float64, naxes-len(s.obs))...)
	}
	for a := 0; a < naxes; a++ {
		if cap(s.obs[a]) < n {
			s.obs[a] = make([]float64, n)
		}
		s.obs[a] = s.obs[a][:n]
	}
	if cap(s.point) < naxes {
		s.point = make([]float64, naxes)
	}
	s.point = s.point[:naxes]
}

// level is a Level with the Evaluators of one worker.
type level struct {
	obs []Evaluator
	sel Evaluator
}

func (l *Level) instantiate() *level {
	if l == nil || len(l.Observables) == 0 {
		return nil
	}
	v := &level{obs: make([]Evaluator, len(l.Observables))}
	for a, e := range l.Observables {
		v.obs[a] = e()
	}
	if l.Select != nil {
		v.sel = l.Select()
	}
	return v
}

// locate fills dst with the bin of every event of the batch at level l
// (codeRejected for events failing the selection, codeOutside for
// events outside the scheme). l may be nil: every event is rejected.
func (s *scratch) locate(dst []int32, l *level, scheme Locator, cols [][]float64, n int) {
	if l == nil || scheme == nil {
		for k := range dst {
			dst[k] = codeRejected
		}
		return
	}
	naxes := len(l.obs)
	s.ensure(naxes, n)
	for a, e := range l.obs {
		e(s.obs[a], cols)
	}
	if l.sel != nil {
		l.sel(s.sel, cols)
	}
	pt := s.point
	for k := 0; k < n; k++ {
		if l.sel != nil {
			if v := s.sel[k]; v == 0 || v != v {
				dst[k] = codeRejected
				continue
			}
		}
		for a := 0; a < naxes; a++ {
			pt[a] = s.obs[a][k]
		}
		if i := scheme.Locate(pt); i >= 0 {
			dst[k] = int32(i)
		} else {
			dst[k] = codeOutside
		}
	}
}

// stream runs the sample through the worker pipeline: the reader
// goroutine copies batches, workers evaluate and locate them with the
// function newWork returns to each of them,
// and consume receives every processed batch in event order, on the
// calling goroutine. Memory is bounded by a fixed number of batches in
// flight.
//
// The batches of read are cut at every multiple of cut events (0: no
// cut), so that no batch spans two shards.
func stream(ctx context.Context, s *Sample, read ReadFunc, cut int64, opt *Options, newWork func() func(*scratch, *batch) error, consume func(*batch) error) (events, batches int64, err error) {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	nw := opt.workers()
	inflight := 4*nw + 8
	free := make(chan *batch, inflight)
	for i := 0; i < inflight; i++ {
		free <- &batch{}
	}
	jobs := make(chan *batch, inflight)
	done := make(chan *batch, inflight)

	var wg sync.WaitGroup
	for i := 0; i < nw; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var sc scratch
			work := newWork()
			for b := range jobs {
				b.err = work(&sc, b)
				done <- b
			}
		}()
	}

	var readErr error
	readDone := make(chan struct{})
	go func() {
		defer close(readDone)
		defer close(jobs)
		var seq int64
		readErr = read(ctx, func(start int64, n int, cols [][]float64) error {
			for c := range cols {
				if len(cols[c]) < n {
					return fmt.Errorf("%s: reader gave column %d with %d values for a batch of %d events", s.Name, c, len(cols[c]), n)
				}
			}
			for off := 0; off < n; {
				m := n - off
				if cut > 0 {
					m = int(min(int64(m), cut-(start+int64(off))%cut))
				}
				var b *batch
				select {
				case b = <-free:
				case <-ctx.Done():
					return ctx.Err()
				}
				b.ensure(len(cols), m)
				for c := range cols {
					copy(b.cols[c], cols[c][off:off+m])
				}
				b.seq, b.start, b.n, b.err = seq, start+int64(off), m, nil
				seq++
				select {
				case jobs <- b:
				case <-ctx.Done():
					return ctx.Err()
				}
				off += m
			}
			return nil
		})
	}()
	go func() {
		wg.Wait()
		close(done)
	}()

	// Consume in sequence order.
	pending := make(map[int64]*batch)
	var next int64
	var firstErr error
	for b := range done {
		if firstErr != nil {
			continue // drain
		}
		pending[b.seq] = b
		for {
			c, ok := pending[next]
			if !ok {
				break
			}
			delete(pending, next)
			next++
			if c.err != nil {
				firstErr = c.err
				cancel()
				break
			}
			if err := consume(c); err != nil {
				firstErr = err
				cancel()
				break
			}
			events += int64(c.n)
			if opt != nil && opt.Progress != nil {
				opt.Progress(events, s.Events)
			}
			free <- c
		}
	}
	<-readDone
	if firstErr != nil {
		return events, next, firstErr
	}
	if readErr != nil {
		return events, next, readErr
	}
	if err := ctx.Err(); err != nil {
		return events, next, err
	}
	return events, next, nil
}

// evalWeights fills b.w with the sample's weights (from weight, nil
// meaning 1) times its scale and returns an error naming the first event
// whose weight is not finite.
func evalWeights(s *Sample, weight Evaluator, b *batch) error {
	if weight == nil {
		for k := range b.w {
			b.w[k] = 1
		}
	} else {
		weight(b.w, b.cols)
	}
	sc := s.scale()
	for k, w := range b.w {
		if math.IsNaN(w) || math.IsInf(w, 0) {
			return &EventError{Sample: s.Name, Event: b.start + int64(k), Err: fmt.Errorf("weight is %v", w)}
		}
		b.w[k] = w * sc
	}
	return nil
}

// EventError reports a problem with one event of a sample.
type EventError struct {
	Sample string
	Event  int64 // 0-based position in the sample
	Err    error
}

func (e *EventError) Error() string {
	return fmt.Sprintf("%s: event %d: %v", e.Sample, e.Event, e.Err)
}

func (e *EventError) Unwrap() error { return e.Err }

// locateDiag fills dst with the truth bin of each event's reco
// observables, which s.obs still holds from locating the reco level
// into reco (codeRejected where the reco selection failed). A reco bin
// that lies inside one truth bin gives that bin directly, one that
// straddles one truth edge gives it with one comparison; other events
// are located in the truth scheme.
func (s *scratch) locateDiag(dst, reco []int32, m *diagMap, haveReco bool) {
	if !haveReco {
		for k := range dst {
			dst[k] = codeRejected
		}
		return
	}
	pt := s.diagPoint[:0]
	for range m.axes {
		pt = append(pt, 0)
	}
	s.diagPoint = pt
	cells, splits := m.cells, m.splits
	for k, r := range reco {
		if r == codeRejected {
			dst[k] = codeRejected
			continue
		}
		if r >= 0 {
			if c := cells[r]; c.truth >= 0 {
				t := c.truth
				if c.split != 0 {
					if sp := &splits[c.split-1]; s.obs[sp.obs][k] >= sp.edge {
						t += sp.step
					}
				}
				dst[k] = t
				continue
			}
		}
		for a, ax := range m.axes {
			pt[a] = s.obs[ax][k]
		}
		if i := m.truth.Locate(pt); i >= 0 {
			dst[k] = int32(i)
		} else {
			dst[k] = codeOutside
		}
	}
}
