package analysis

import (
	"context"
	"encoding"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/inputs"
	"github.com/desmear/desmear/unfold/inputs/events"
	"github.com/desmear/desmear/unfold/inputs/tables"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/methods/binbybin"
	"github.com/desmear/desmear/unfold/methods/inversion"
	"github.com/desmear/desmear/unfold/methods/tikhonov"
	"github.com/desmear/desmear/unfold/response"
	"github.com/desmear/desmear/unfold/result"
)

// Options control how an analysis runs. The zero value is usable.
type Options struct {
	// Workers overrides the analysis file's processing.workers when > 0.
	Workers int
	// Progress, when not nil, is called with a stage name ("simulation
	// FILE", "data FILE", ...) and the events done and expected (a
	// negative total when not known). The library never draws anything.
	Progress func(stage string, done, total int64)
	// Version is the program version recorded in the outputs.
	Version string
	// ShardEvents is the number of events of a response shard; 0 means
	// response.DefaultShardEvents. It is part of the definition of the
	// response (sums are formed shard by shard), recorded in the bundle
	// and in each part.
	ShardEvents int64

	// Staged and Final, when both are set, say that the analysis file
	// lies in a folder being written under the temporary name Staged,
	// to be installed at Final once the run is done: the paths under
	// Staged are recorded in the result and in the Outcome as under
	// Final, where they will be.
	Staged, Final string
}

func (o *Options) shardEvents() int64 {
	if o == nil || o.ShardEvents <= 0 {
		return response.DefaultShardEvents
	}
	return o.ShardEvents
}

// shown returns the path p as recorded in the outputs (see
// Options.Staged).
func (opt *Options) shown(p string) string {
	if opt == nil || opt.Staged == "" || opt.Final == "" {
		return p
	}
	staged := filepath.Clean(opt.Staged)
	if c := filepath.Clean(p); c == staged {
		return opt.Final
	} else if rel, ok := strings.CutPrefix(c, staged+string(filepath.Separator)); ok {
		return filepath.Join(opt.Final, rel)
	}
	return p
}

func (a *Analysis) fillOptions(opt *Options, stage string) *response.Options {
	o := &response.Options{Workers: a.Workers}
	if opt != nil {
		if opt.Workers > 0 {
			o.Workers = opt.Workers
		}
		if opt.Progress != nil {
			o.Progress = func(done, total int64) { opt.Progress(stage, done, total) }
		}
	}
	return o
}

// CheckInputs opens every events file of the analysis (simulation,
// data, backgrounds; only the simulation with sim) and compiles its
// expressions against the file's columns, so that a missing file or a
// misspelt column is reported before any event is read.
func (a *Analysis) CheckInputs(sim, rest bool) error {
	check := func(path, tree, field string, line int, exprs ...[]Expression) error {
		src, err := a.openEvents(path, tree, field, line)
		if err != nil {
			return err
		}
		defer src.Close()
		c := newCompiler(a, path, src)
		for _, es := range exprs {
			if _, err := c.addAll(es); err != nil {
				return err
			}
		}
		_, err = c.finish()
		return err
	}
	if sim {
		for _, s := range a.Simulation {
			if err := a.checkSample(&s); err != nil {
				return err
			}
		}
	}
	if !rest {
		return nil
	}
	if d := a.Data; d.Kind == DataEvents {
		if err := check(d.File, d.Tree, "data.events", d.Line, []Expression{d.Weight, d.Selection}, d.Observables); err != nil {
			return err
		}
	}
	for _, b := range a.Backgrounds {
		if b.Kind == DataEvents {
			if err := check(b.File, b.Tree, b.Field+".events", b.Line, []Expression{b.Weight, b.Selection}, b.Observables); err != nil {
				return err
			}
		}
	}
	return nil
}

// checkSample opens the events file of a simulated sample and compiles
// its expressions against the file's columns.
func (a *Analysis) checkSample(s *Sample) error {
	src, err := a.openEvents(s.File, s.Tree, s.fileField(), s.Line)
	if err != nil {
		return err
	}
	defer src.Close()
	c := newCompiler(a, s.File, src)
	for _, es := range [][]Expression{{s.Weight, s.TruthSelection, s.RecoSelection}, s.Truth, s.Reco} {
		if _, err := c.addAll(es); err != nil {
			return err
		}
	}
	_, err = c.finish()
	return err
}

// BuildResponse streams the simulated samples into a response. It
// returns the response and the provenance of its inputs.
func (a *Analysis) BuildResponse(ctx context.Context, opt *Options) (*response.Built, *response.BundleInfo, error) {
	if err := a.CheckInputs(true, false); err != nil {
		return nil, nil, err
	}
	return a.buildResponse(ctx, opt)
}

// buildResponse is BuildResponse once the simulation's inputs are checked.
// The response is the merge, in shard order, of the partial responses of
// every shard (response.ShardRanges of each sample), so that it equals
// bit for bit the merge of parts built separately (BuildPart).
func (a *Analysis) buildResponse(ctx context.Context, opt *Options) (*response.Built, *response.BundleInfo, error) {
	return a.buildFrom(ctx, opt, a.Simulation, "")
}

// buildFrom builds the response from the samples; stage prefixes the
// progress stages.
func (a *Analysis) buildFrom(ctx context.Context, opt *Options, samples []Sample, stage string) (*response.Built, *response.BundleInfo, error) {
	if len(samples) == 0 {
		return nil, nil, &Error{File: a.File, Field: "simulation", Msg: "no simulated sample to build the response from"}
	}
	size := opt.shardEvents()
	// Fingerprint the schemes (a pass over every bin's label) while the
	// events are read, as the files are hashed below.
	info := &response.BundleInfo{ShardEvents: size}
	fingerprinted := make(chan struct{})
	go func() {
		defer close(fingerprinted)
		info.TruthScheme, info.RecoScheme = response.Fingerprint(a.Truth), response.Fingerprint(a.Reco)
	}()
	defer func() { <-fingerprinted }() // info is complete on every return
	if opt != nil {
		info.Program = opt.Version
	}
	b := response.NewBuilder(a.Truth, a.Reco)
	b.ShardEvents = size
	for i, s := range samples {
		sim, src, err := a.simulation(&s)
		if err != nil {
			return nil, nil, err
		}
		// Hash the file for the provenance while the events are read:
		// on a machine with a spare core this costs no time.
		type hashed struct {
			in  inputs.File
			err error
		}
		hc := make(chan hashed, 1)
		go func() {
			in, err := inputs.Hash("simulation", s.File)
			hc <- hashed{in, err}
		}()
		sum, err := b.Add(ctx, sim, a.fillOptions(opt, stage+"simulation "+s.File))
		src.Close()
		h := <-hc
		if err != nil {
			return nil, nil, a.eventsErr(s.Field, s.Line, err)
		}
		if h.err != nil {
			return nil, nil, h.err
		}
		info.Inputs = append(info.Inputs, h.in)
		info.Samples = append(info.Samples, response.SampleSummary{File: s.File, Summary: sum})
		for _, rg := range response.ShardRanges(sum.Events, size) {
			info.Shards = append(info.Shards, response.Shard{Sample: i, File: s.File, SHA256: h.in.SHA256, Lo: rg[0], Hi: rg[1]})
		}
	}
	r, err := b.Build()
	if err != nil {
		return nil, nil, err
	}
	return r, info, nil
}

// BuildPart builds part index of count of the response: the shards of
// every simulated sample are numbered in order (response.ShardRanges of
// each sample; a CSV file is scanned once to count its events), and the
// part holds the partial responses of its block of them
// (response.PartShards), read by event range. Merging the count parts
// (response.MergeParts) gives the response BuildResponse gives, bit for
// bit.
func (a *Analysis) BuildPart(ctx context.Context, index, count int, opt *Options) (*response.Part, error) {
	if len(a.Simulation) == 0 {
		return nil, &Error{File: a.File, Field: "simulation", Msg: "no simulated sample to build the response from"}
	}
	if count < 1 || index < 0 || index >= count {
		return nil, fmt.Errorf("part %d of %d: give a part number from 0 to the number of parts minus 1", index, count)
	}
	if err := a.CheckInputs(true, false); err != nil {
		return nil, err
	}
	an, err := inputs.Hash("analysis", a.File)
	if err != nil {
		return nil, err
	}
	size := opt.shardEvents()
	info := response.PartInfo{Analysis: an.SHA256, TruthScheme: response.Fingerprint(a.Truth), RecoScheme: response.Fingerprint(a.Reco),
		ShardEvents: size, Index: index, Count: count}
	if opt != nil {
		info.Program = opt.Version
	}
	for i, s := range a.Simulation {
		in, err := inputs.Hash("simulation", s.File)
		if err != nil {
			return nil, &Error{File: a.File, Line: s.Line, Field: s.Field + ".file", Msg: fmt.Sprintf("cannot read the simulation file: %v", unwrapPath(err)), Err: err}
		}
		info.Inputs = append(info.Inputs, in)
		src, err := a.openEvents(s.File, s.Tree, s.Field+".file", s.Line)
		if err != nil {
			return nil, err
		}
		n, err := events.Count(ctx, src)
		src.Close()
		if err != nil {
			return nil, a.eventsErr(s.Field, s.Line, err)
		}
		for _, rg := range response.ShardRanges(n, size) {
			info.Shards = append(info.Shards, response.Shard{Sample: i, File: s.File, SHA256: in.SHA256, Lo: rg[0], Hi: rg[1]})
		}
	}
	p := &response.Part{Info: info}
	lo, hi := response.PartShards(index, count, len(info.Shards))
	b := response.NewBuilder(a.Truth, a.Reco)
	b.ShardEvents = size
	for i, s := range a.Simulation {
		// The part's shards of this sample: a consecutive range of events.
		first, last := -1, -1
		for k := lo; k < hi; k++ {
			if info.Shards[k].Sample == i {
				if first < 0 {
					first = k
				}
				last = k
			}
		}
		if first < 0 {
			continue
		}
		sim, src, err := a.simulation(&s)
		if err != nil {
			return nil, err
		}
		number := first
		b.OnShard = func(_ int, slo, shi int64, r *response.Built) error {
			if sh := info.Shards[number]; sh.Lo != slo || sh.Hi != shi {
				return fmt.Errorf("%s: the shard of events %d to %d was read as events %d to %d; the file changed while it was read", s.File, sh.Lo, sh.Hi, slo, shi)
			}
			p.Numbers = append(p.Numbers, number)
			p.Partials = append(p.Partials, r)
			number++
			return nil
		}
		_, err = b.AddRange(ctx, sim, info.Shards[first].Lo, info.Shards[last].Hi, a.fillOptions(opt, "simulation "+s.File))
		src.Close()
		if err != nil {
			return nil, a.eventsErr(s.Field, s.Line, err)
		}
		if number != last+1 {
			return nil, fmt.Errorf("%s: %d shards read, want %d; the file changed while it was read", s.File, number-first, last+1-first)
		}
	}
	return p, nil
}

// ErrResponseNeeded is wrapped by the error of LoadResponse (and Run)
// when the saved response must be built from the simulation first: it
// does not exist yet, or it was built for other binning schemes.
var ErrResponseNeeded = errors.New("analysis: the saved response must be built from the simulation")

// LoadResponse loads the saved response bundle named by the analysis
// file and checks it against the schemes; see ErrResponseNeeded.
func (a *Analysis) LoadResponse() (*response.Built, *response.BundleInfo, error) {
	r, info, err := response.Load(a.ResponseFile)
	if err != nil {
		msg := fmt.Sprintf("cannot load the saved response: %v", err)
		if _, serr := os.Stat(a.ResponseFile); serr != nil && len(a.Simulation) > 0 {
			msg = fmt.Sprintf("the saved response %s does not exist yet; build it from the simulation", a.ResponseFile)
			err = errors.Join(ErrResponseNeeded, err)
		}
		return nil, nil, &Error{File: a.File, Line: a.responseLine, Field: "response", Msg: msg, Err: err}
	}
	var differ []string
	if info.TruthScheme != response.Fingerprint(a.Truth) {
		differ = append(differ, "truth")
	}
	if info.RecoScheme != response.Fingerprint(a.Reco) {
		differ = append(differ, "reco")
	}
	if len(differ) > 0 {
		return nil, nil, &Error{File: a.File, Line: a.responseLine, Field: "response", Msg: fmt.Sprintf("the saved response %s was built for another %s binning than this file's; rebuild it from the simulation", a.ResponseFile, strings.Join(differ, " and ")), Err: ErrResponseNeeded}
	}
	if err := a.sameSimulation(info); err != nil {
		return nil, nil, err
	}
	return r, info, nil
}

// sameSimulation refuses a saved response that was not built from the
// simulation files the analysis file lists (when it lists any): the
// files are compared by their SHA-256 with those the bundle records,
// so that neither key is silently ignored.
func (a *Analysis) sameSimulation(info *response.BundleInfo) error {
	if len(a.Simulation) == 0 {
		return nil
	}
	built := map[string]int{}
	nbuilt := 0
	for _, f := range info.Inputs {
		if f.Role == "simulation" {
			built[f.SHA256]++
			nbuilt++
		}
	}
	for _, s := range a.Simulation {
		f, err := inputs.Hash("simulation", s.File)
		if err != nil {
			return &Error{File: a.File, Line: s.Line, Field: s.Field + ".file", Msg: fmt.Sprintf("cannot read the simulation file to compare it with the saved response: %v", unwrapPath(err)), Err: err}
		}
		if built[f.SHA256] == 0 {
			return &Error{File: a.File, Line: s.Line, Field: s.Field + ".file", Msg: fmt.Sprintf("the saved response %s was not built from %s (the file changed, or the response was built from other samples); rebuild it from the simulation", a.ResponseFile, s.File), Err: ErrResponseNeeded}
		}
		built[f.SHA256]--
	}
	if nbuilt != len(a.Simulation) {
		return &Error{File: a.File, Line: a.responseLine, Field: "response", Msg: fmt.Sprintf("the saved response %s was built from %d simulation files, this file lists %d; rebuild it from the simulation", a.ResponseFile, nbuilt, len(a.Simulation)), Err: ErrResponseNeeded}
	}
	return nil
}

// eventsErr places an error from reading events.
func (a *Analysis) eventsErr(field string, line int, err error) error {
	var ae *Error
	if errors.As(err, &ae) || errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) {
		return err
	}
	return &Error{File: a.File, Line: line, Field: field, Msg: err.Error(), Err: err}
}

func (a *Analysis) simulation(s *Sample) (*response.Simulation, closer, error) {
	src, err := a.openEvents(s.File, s.Tree, s.fileField(), s.Line)
	if err != nil {
		return nil, nil, err
	}
	ok := false
	defer func() {
		if !ok {
			src.Close()
		}
	}()
	c := newCompiler(a, s.File, src)
	sim := &response.Simulation{Sample: response.Sample{Name: s.File, Events: src.Len(), Scale: s.Scale}}
	if sim.Weight, err = c.add(s.Weight); err != nil {
		return nil, nil, err
	}
	if sim.Truth.Select, err = c.add(s.TruthSelection); err != nil {
		return nil, nil, err
	}
	if sim.Reco.Select, err = c.add(s.RecoSelection); err != nil {
		return nil, nil, err
	}
	if sim.Truth.Observables, err = c.addAll(s.Truth); err != nil {
		return nil, nil, err
	}
	if sim.Reco.Observables, err = c.addAll(s.Reco); err != nil {
		return nil, nil, err
	}
	// Purity and stability on the truth binning need the reco
	// observables of the truth axes: available when every truth axis
	// has a reco observable of the same name.
	var rit []int
	for _, name := range a.Truth.AxisNames() {
		ax := a.Reco.AxisIndex(name)
		if ax < 0 {
			rit = nil
			break
		}
		rit = append(rit, ax)
	}
	sim.RecoInTruth = rit
	cols, err := c.finish()
	if err != nil {
		return nil, nil, err
	}
	sim.Read = readFunc(src, cols, a.BatchSize)
	sim.ReadRange = readRangeFunc(src, cols, a.BatchSize)
	ok = true
	return sim, src, nil
}

type closer interface{ Close() error }

// fileField names the key of the sample's events file in messages.
func (s *Sample) fileField() string {
	if s.FileField != "" {
		return s.FileField
	}
	return s.Field + ".file"
}

// recoHistogram fills the reco scheme from an events file.
func (a *Analysis) recoHistogram(ctx context.Context, opt *Options, stage, file, tree, field string, line int, weight, sel Expression, obs []Expression, scale float64) (*response.Histogram, error) {
	src, err := a.openEvents(file, tree, field, line)
	if err != nil {
		return nil, err
	}
	defer src.Close()
	c := newCompiler(a, file, src)
	s := &response.Sample{Name: file, Events: src.Len(), Scale: scale}
	l := &response.Level{}
	if s.Weight, err = c.add(weight); err != nil {
		return nil, err
	}
	if l.Select, err = c.add(sel); err != nil {
		return nil, err
	}
	if l.Observables, err = c.addAll(obs); err != nil {
		return nil, err
	}
	cols, err := c.finish()
	if err != nil {
		return nil, err
	}
	s.Read = readFunc(src, cols, a.BatchSize)
	h := response.NewHistogram(a.Reco.Len())
	if err := h.Add(ctx, s, l, a.Reco, a.fillOptions(opt, stage)); err != nil {
		return nil, a.eventsErr(field, line, err)
	}
	return h, nil
}

// Measured is the data as filled or read.
type Measured struct {
	Values   []float64
	Variance []float64 // nil: Poisson (unweighted data)
	// Events, Selected and Outside count the data events (events files),
	// or Outside the non-empty histogram cells of switched-off flows.
	Events, Selected, Outside int64
	// OutsideContent is the content left out in flows the reco binning
	// switches off (weights of events, or histogram content), and
	// OutsideFraction its fraction of everything read.
	OutsideContent, OutsideFraction float64
}

// FillData fills or reads the data into the reco scheme.
func (a *Analysis) FillData(ctx context.Context, opt *Options) (*Measured, error) {
	d := &a.Data
	nr := a.Reco.Len()
	switch d.Kind {
	case DataEvents:
		h, err := a.recoHistogram(ctx, opt, "data "+d.File, d.File, d.Tree, "data.events", d.Line, d.Weight, d.Selection, d.Observables, 1)
		if err != nil {
			return nil, err
		}
		m := &Measured{Values: h.Values, Events: h.Events, Selected: h.Selected, Outside: h.Outside, OutsideContent: h.OutsideWeight}
		m.outsideFraction()
		if d.Weight.Text != "" {
			m.Variance = h.SumW2
		}
		return m, nil
	case DataTable:
		v, err := tables.LoadVector(d.File, tables.Data)
		if err != nil {
			return nil, err
		}
		val, vr, err := v.Dense(nr, "the reco binning")
		if err != nil {
			return nil, err
		}
		return &Measured{Values: val, Variance: vr}, nil
	case DataHistogram:
		return a.readHistogram()
	case DataMissing:
		return nil, a.missingData()
	}
	return nil, fmt.Errorf("analysis: unknown data kind %d", d.Kind)
}

// missingData is the error for unfolding without a data section.
func (a *Analysis) missingData() error {
	return &Error{File: a.File, Field: "data", Msg: "missing: the unfolding needs the data; " + dataChoice}
}

// Expected is the expected background in the reco scheme.
type Expected struct {
	Values, Variance []float64
}

// Background returns the expected background: the simulation's fakes
// (unless unfolding.fakes is "ignore") plus every background sample
// times its scale. Its variance is the sum of the squared weights; a
// background's scale uncertainty is not in it but a systematic source of
// its own, fully correlated across bins (method.md §21). It returns nil
// when there is no background at all.
func (a *Analysis) Background(ctx context.Context, r *response.Built, opt *Options) (*Expected, error) {
	bs, err := a.backgroundSamples(ctx, opt)
	if err != nil {
		return nil, err
	}
	return a.expected(r, bs, nil)
}

// backgroundSample is a background sample filled (or read) and scaled by
// its scale, with its variance (nil when not known).
type backgroundSample struct {
	Values, Variance []float64
}

// backgroundSamples fills or reads every background sample.
func (a *Analysis) backgroundSamples(ctx context.Context, opt *Options) ([]backgroundSample, error) {
	nr := a.Reco.Len()
	var out []backgroundSample
	for _, b := range a.Backgrounds {
		var val, vr []float64
		switch b.Kind {
		case DataEvents:
			h, err := a.recoHistogram(ctx, opt, "background "+b.File, b.File, b.Tree, b.Field+".events", b.Line, b.Weight, b.Selection, b.Observables, b.Scale)
			if err != nil {
				return nil, err
			}
			val, vr = h.Values, h.SumW2 // the sample's scale is in the weights
		case DataTable:
			v, err := tables.LoadVector(b.File, tables.Background)
			if err != nil {
				return nil, err
			}
			if val, vr, err = v.Dense(nr, "the reco binning"); err != nil {
				return nil, err
			}
			for i := range val {
				val[i] *= b.Scale
				if vr != nil {
					vr[i] *= b.Scale * b.Scale
				}
			}
		}
		out = append(out, backgroundSample{Values: val, Variance: vr})
	}
	return out, nil
}

// expected sums the fakes of r and the background samples bs, sample k
// times factor[k] (its variance times factor[k]²; nil factor: all 1).
func (a *Analysis) expected(r *response.Built, bs []backgroundSample, factor []float64) (*Expected, error) {
	nr := a.Reco.Len()
	e := &Expected{Values: make([]float64, nr), Variance: make([]float64, nr)}
	nonzero := false
	if a.Unfolding.Fakes == "background" {
		for i := range e.Values {
			e.Values[i] += r.Fakes[i]
			e.Variance[i] += r.FakesSumW2[i]
			nonzero = nonzero || r.Fakes[i] != 0
		}
	}
	for k, b := range bs {
		f := 1.0
		if factor != nil {
			f = factor[k]
		}
		for i, v := range b.Values {
			e.Values[i] += f * v
			if b.Variance != nil {
				e.Variance[i] += f * f * b.Variance[i]
			}
			nonzero = nonzero || v != 0
		}
	}
	if !nonzero {
		return nil, nil
	}
	for i, v := range e.Values {
		if v < 0 {
			// Without background samples the negative sum comes from the
			// simulation's fakes: point there.
			field, line, what := "backgrounds", 0, "the fakes or background samples"
			switch {
			case len(a.Backgrounds) == 0 && len(a.Simulation) > 0:
				field, line, what = "simulation", a.Simulation[0].Line, "the simulated fakes"
			case len(a.Backgrounds) > 0:
				line = a.Backgrounds[0].Line
			}
			return nil, &Error{File: a.File, Line: line, Field: field, Msg: fmt.Sprintf("the expected background in reco bin %d (%s) is negative (%.6g); check negative weights in %s", i, a.Reco.Label(i), v, what)}
		}
	}
	return e, nil
}

// Settings returns the settings of the analysis file: the common ones
// and the method with its own settings (nil when the method name is not
// one of methods.Names, which Decode has refused already). The error is
// an *unfold.SettingsError for a mode name the enumerations do not know
// (Decode has refused those already too).
func (a *Analysis) Settings() (*unfold.Settings, unfold.Method, error) {
	u, un := a.Unfolding, a.Uncertainty
	s := &unfold.Settings{Probes: un.Probes, Toys: un.Toys, Seed: un.Seed, MemoryLimit: u.MemoryLimit, ResponseSamples: un.ResponseSamples, BiasToys: un.BiasToys, Replicas: un.Replicas}
	// names are the settings given by name in the file: the field, its
	// value to set and the text.
	type named struct {
		field string
		v     encoding.TextUnmarshaler
		text  string
	}
	names := []named{
		{"Background", &s.Background, u.Background},
		{"NegativeCells", &s.NegativeCells, u.NegativeCells},
		{"Unexplained", &s.Unexplained, u.Unexplained},
		{"Covariance", &s.Covariance, un.Covariance},
		{"DiagonalMethod", &s.DiagonalMethod, un.Method},
		{"SamplingPrior", &s.SamplingPrior, un.SamplingPrior},
		{"VarianceFrom", &s.VarianceFrom, un.VarianceFrom},
	}
	var m unfold.Method
	switch u.Method {
	case bayes.Name, "":
		b := &bayes.Settings{Iterations: u.Iterations, StopChi2: u.StopChi2, MaxIterations: u.MaxIterations,
			Scan: slices.Contains(a.Output.Formats, result.IterationsFormat)}
		if u.Smoothing != 0 {
			b.Smoothing = &bayes.Smoothing{Neighbours: a.Truth, Strength: u.Smoothing}
		}
		m = b
	case tikhonov.Name:
		t := &tikhonov.Settings{Tau: u.Tau, Widths: u.Widths, Truth: a.Truth}
		names = append(names, named{"Criterion", &t.Criterion, u.TauCriterion}, named{"Penalty", &t.Penalty, u.Penalty}, named{"Bias", &t.Bias, u.Bias})
		m = t
	case inversion.Name:
		m = &inversion.Settings{}
	case binbybin.Name:
		m = &binbybin.Settings{}
	}
	for _, e := range names {
		if e.text == "" {
			continue
		}
		if err := e.v.UnmarshalText([]byte(e.text)); err != nil {
			return nil, nil, &unfold.SettingsError{Field: e.field, Reason: err.Error()}
		}
	}
	return s, m, nil
}

// Prior returns the prior of the iteration: nil for the simulation's
// generated spectrum, ones for "flat", or the prior table.
func (a *Analysis) Prior() ([]float64, error) {
	nt := a.Truth.Len()
	switch a.Unfolding.Prior {
	case "flat":
		p := make([]float64, nt)
		for j := range p {
			p[j] = 1
		}
		return p, nil
	case "file":
		v, err := tables.LoadVector(a.Unfolding.PriorFile, tables.Prior)
		if err != nil {
			return nil, err
		}
		p, _, err := v.Dense(nt, "the truth binning")
		return p, err
	}
	return nil, nil
}

// Reference reads the reference spectrum of the key compare (nil when
// none is given), one value per bin of the truth binning; errors are
// *tables.Error values naming the file and the line.
func (a *Analysis) Reference() ([]float64, error) {
	if a.Compare == "" {
		return nil, nil
	}
	v, err := tables.LoadVector(a.Compare, tables.Prior)
	if err != nil {
		return nil, err
	}
	ref, _, err := v.Dense(a.Truth.Len(), "the truth binning")
	return ref, err
}

// Problem assembles the unfolding problem.
func (a *Analysis) Problem(r *response.Built, data *Measured, bkg *Expected) (*unfold.Problem, error) {
	p := &unfold.Problem{Migrations: r.Migrations, Generated: r.Generated, GeneratedSumW2: r.GeneratedSumW2, Data: data.Values, DataVariance: data.Variance}
	if bkg != nil {
		p.Background, p.BackgroundVariance = bkg.Values, bkg.Variance
	}
	prior, err := a.Prior()
	if err != nil {
		return nil, err
	}
	p.Prior = prior
	for j, g := range r.Generated {
		if g < 0 || math.IsNaN(g) {
			field, line := "simulation", 0
			switch {
			case a.ResponseFile != "":
				field, line = "response", a.responseLine
			case len(a.Simulation) > 0:
				line = a.Simulation[0].Line
			}
			return nil, &Error{File: a.File, Line: line, Field: field, Msg: fmt.Sprintf("the generated count of truth bin %d (%s) is %.6g; negative event weights left it below zero: merge bins or use more simulated events", j, a.Truth.Label(j), g)}
		}
	}
	return p, nil
}
