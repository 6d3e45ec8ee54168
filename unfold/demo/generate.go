package demo

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"

	"gonum.org/v1/gonum/stat/distuv"
)

// Defaults of Config.
const (
	// DefaultEvents is the default number of simulated events. The
	// pseudo-data then hold about DefaultEvents/9 reconstructed events.
	DefaultEvents = 1_500_000
	// DefaultSeed is the default seed of the generator.
	DefaultSeed = 20240917
	// MinEvents is the smallest simulation Config accepts: below it the
	// high-pt bins are nearly empty and the demo shows nothing useful.
	MinEvents = 10_000
	// MaxEvents bounds the simulation so that the event columns fit in
	// memory comfortably (about 60 bytes per event while generating).
	MaxEvents = 100_000_000
)

// chunkEvents is the number of events per random-number stream. The
// split into chunks depends only on the sizes, never on the number of
// cores, so the events are the same bits whatever GOMAXPROCS is.
const chunkEvents = 1 << 16

// Stream identifiers of the two samples; each chunk c of a sample draws
// from rand.NewPCG(seed, stream<<32|c).
const (
	streamSimulation = 1
	streamData       = 2
)

// Config sets the size and the seed of the demo. The zero value means
// DefaultEvents and seed 0; use DefaultConfig for the documented default.
type Config struct {
	// Events is the number of simulated events (zetons and fakes). The
	// pseudo-data are scaled with it: their expected number of generated
	// zetons is Events/6. Zero means DefaultEvents.
	Events int
	// Seed seeds every random-number stream of the demo.
	Seed uint64
}

// DefaultConfig returns the demo's default size and seed.
func DefaultConfig() Config { return Config{Events: DefaultEvents, Seed: DefaultSeed} }

func (c Config) events() int {
	if c.Events == 0 {
		return DefaultEvents
	}
	return c.Events
}

// check returns an error for a size out of range.
func (c Config) check() error {
	n := c.events()
	if n < MinEvents || n > MaxEvents {
		return fmt.Errorf("demo: %d simulated events requested; choose between %d and %d", n, MinEvents, MaxEvents)
	}
	return nil
}

// dataZetons is the expected number of generated zetons (|y| < yMax,
// pt ≥ ptMin) in the pseudo-data.
func (c Config) dataZetons() float64 { return float64(c.events()) * dataPerSim }

// dataFakes is the expected number of fakes in the pseudo-data.
func (c Config) dataFakes() float64 { return c.dataZetons() * fakesPerSignal }

// sample holds the events of one sample in columns.
type sample struct {
	ptTrue, yTrue, ptReco, yReco []float64
	weight                       []float64
	passTruth, passReco          []bool
}

func (s *sample) len() int { return len(s.weight) }

func (s *sample) add(e event) {
	s.ptTrue = append(s.ptTrue, e.ptTrue)
	s.yTrue = append(s.yTrue, e.yTrue)
	s.ptReco = append(s.ptReco, e.ptReco)
	s.yReco = append(s.yReco, e.yReco)
	s.weight = append(s.weight, e.weight)
	s.passTruth = append(s.passTruth, e.passTruth)
	s.passReco = append(s.passReco, e.passReco)
}

func (s *sample) appendSample(t *sample) {
	s.ptTrue = append(s.ptTrue, t.ptTrue...)
	s.yTrue = append(s.yTrue, t.yTrue...)
	s.ptReco = append(s.ptReco, t.ptReco...)
	s.yReco = append(s.yReco, t.yReco...)
	s.weight = append(s.weight, t.weight...)
	s.passTruth = append(s.passTruth, t.passTruth...)
	s.passReco = append(s.passReco, t.passReco...)
}

func newSample(n int) *sample {
	return &sample{
		ptTrue: make([]float64, 0, n), yTrue: make([]float64, 0, n),
		ptReco: make([]float64, 0, n), yReco: make([]float64, 0, n),
		weight: make([]float64, 0, n), passTruth: make([]bool, 0, n), passReco: make([]bool, 0, n),
	}
}

// chunkRand returns the random-number stream of chunk c of a sample.
func chunkRand(seed uint64, stream, c int) *rand.Rand {
	return rand.New(rand.NewPCG(seed, uint64(stream)<<32|uint64(c)))
}

// simulationChunk generates chunk c of the simulation: n events, each a
// fake with probability simFakeFraction, weighted so that the weighted
// sums are expected counts of the pseudo-data. The zetons are generated
// with the harder genModel and reweighted to simModel (importance
// sampling, common practice to populate the tail of a falling spectrum).
func simulationChunk(cfg Config, c, n int) *sample {
	rng := chunkRand(cfg.Seed, streamSimulation, c)
	total := float64(cfg.events())
	zetonWeight := simNormalRatio * cfg.dataZetons() / (total * (1 - simFakeFraction))
	fakeWeight := cfg.dataFakes() / (total * simFakeFraction)
	s := newSample(n)
	for range n {
		var e event
		if rng.Float64() < simFakeFraction {
			e = fake(rng)
			e.weight = fakeWeight
		} else {
			e = zeton(rng, genModel)
			e.weight = zetonWeight * simModel.ptDensity(e.ptTrue) / genModel.ptDensity(e.ptTrue)
		}
		s.add(e)
	}
	return s
}

// dataChunk generates chunk c of the pseudo-data, one of chunks chunks
// sharing the expected yield: a Poisson number of events (gonum's
// distuv.Poisson), each a fake with the probability given by the ratio of
// the expected yields (thinning a Poisson process gives independent
// Poisson counts of zetons and fakes). It returns the reconstructed events
// (the data) and the generated zetons in the fiducial region (their
// truth, for the known spectrum).
func dataChunk(cfg Config, c, chunks int) (reco, truth *sample) {
	rng := chunkRand(cfg.Seed, streamData, c)
	lz, lf := cfg.dataZetons(), cfg.dataFakes()
	n := int(distuv.Poisson{Lambda: (lz + lf) / float64(chunks), Src: rng}.Rand())
	pFake := lf / (lz + lf)
	reco, truth = newSample(n), newSample(n)
	for range n {
		var e event
		if rng.Float64() < pFake {
			e = fake(rng)
		} else {
			e = zeton(rng, dataModel)
		}
		if e.passReco {
			reco.add(e)
		}
		if e.passTruth {
			truth.add(e)
		}
	}
	return reco, truth
}

// generate generates the simulation and the pseudo-data, in chunks spread
// over GOMAXPROCS goroutines and joined in chunk order.
func generate(ctx context.Context, cfg Config) (sim, data, dataTruth *sample, err error) {
	total := cfg.events()
	simChunks := (total + chunkEvents - 1) / chunkEvents
	dataChunks := int(math.Ceil((cfg.dataZetons() + cfg.dataFakes()) / chunkEvents))
	type result struct{ reco, truth *sample }
	results := make([]result, simChunks+dataChunks)
	work := make(chan int)
	var wg sync.WaitGroup
	for range runtime.GOMAXPROCS(0) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := range work {
				if k < simChunks {
					n := min(chunkEvents, total-k*chunkEvents)
					results[k].reco = simulationChunk(cfg, k, n)
				} else {
					results[k].reco, results[k].truth = dataChunk(cfg, k-simChunks, dataChunks)
				}
			}
		}()
	}
feed:
	for k := range results {
		select {
		case work <- k:
		case <-ctx.Done():
			break feed
		}
	}
	close(work)
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, nil, nil, err
	}
	sim = newSample(total)
	for _, r := range results[:simChunks] {
		sim.appendSample(r.reco)
	}
	data, dataTruth = newSample(0), newSample(0)
	for _, r := range results[simChunks:] {
		data.appendSample(r.reco)
		dataTruth.appendSample(r.truth)
	}
	return sim, data, dataTruth, nil
}
