package analysis

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"

	"go.yaml.in/yaml/v3"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/inputs/events"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/methods/tikhonov"
)

// ChangeKind says what a systematic variation changes.
type ChangeKind int

const (
	// ChangeFiles replaces the files of the simulated samples (an
	// alternative simulation with the same columns).
	ChangeFiles ChangeKind = iota + 1
	// ChangeWeight multiplies the weight of every simulated event by an
	// expression over the simulation's columns (a reweighting).
	ChangeWeight
	// ChangeBackgroundScale multiplies a background (or all of them) by
	// a factor.
	ChangeBackgroundScale
	// ChangeRecoObservables replaces the reco observable expressions of
	// some axes in every simulated sample (for example an energy-scale
	// shift).
	ChangeRecoObservables
)

// Variation is a systematic variation of the analysis file (variations)
// or the scale uncertainty of a background: its name (the name of its
// source of uncertainty) and one change, or an up/down pair.
type Variation struct {
	Name string
	// Change is the change of a single variation; nil for a pair.
	Change *Change
	// Up and Down are the changes of a pair; nil for a single one.
	Up, Down *Change
	Field    string
	Line     int
}

// Change is one change of a variation.
type Change struct {
	Kind ChangeKind
	// Files replaces the file of each simulated sample, in order
	// (ChangeFiles; resolved paths).
	Files []string
	// Weight multiplies every simulated event's weight (ChangeWeight).
	Weight Expression
	// Background is the index of the background scaled, −1 for all of
	// them; Scale the factor (ChangeBackgroundScale).
	Background int
	Scale      float64
	// Reco replaces, per reco axis, the observable of every simulated
	// sample where its Text is not empty (ChangeRecoObservables).
	Reco  []Expression
	Field string
	Line  int
}

// changesResponse reports whether the change needs a response built
// from the simulation of its own.
func (ch *Change) changesResponse() bool { return ch.Kind != ChangeBackgroundScale }

// ScaleSourceName returns the name of the source of uncertainty of the
// scale uncertainty of the background named background.
func ScaleSourceName(background string) string { return background + "-scale" }

// variations checks the variations of the analysis file, and adds one
// for the scale uncertainty of each background that has one.
func (c *checker) variations(a *Analysis, docs []variationDoc) {
	// The statistical sources' names, and the columns of the breakdown
	// tables, are taken.
	seen := map[string]int{unfold.SourceData: -1, unfold.SourceSimulation: -1, "index": -2, "region": -2, "flow": -2, "total": -2}
	for i, d := range docs {
		f := fmt.Sprintf("variations[%d]", i)
		v := Variation{Name: strings.TrimSpace(d.Name), Field: f, Line: c.line("variations", i)}
		if v.Name == "" {
			c.errf(v.Line, f+".name", "missing: name the variation (the name of its source of uncertainty)")
			continue
		}
		nameLine := c.line("variations", i, "name")
		if first, dup := seen[v.Name]; dup {
			switch first {
			case -1:
				c.errf(nameLine, f+".name", "%q is the name of a statistical source: choose another", v.Name)
			case -2:
				c.errf(nameLine, f+".name", "%q names a column of the breakdown tables: choose another", v.Name)
			default:
				c.errf(nameLine, f+".name", "%q is the name of the variation on line %d too: give each a name of its own", v.Name, first)
			}
			continue
		}
		seen[v.Name] = nameLine
		up, down := nodeAt(c.root, "variations", i, "up"), nodeAt(c.root, "variations", i, "down")
		direct := changeDoc{Files: d.Files, Weight: d.Weight, BackgroundScale: d.BackgroundScale, Background: d.Background, RecoObservables: d.RecoObservables}
		switch {
		case up == nil && down == nil:
			v.Change = c.change(a, direct, true, "variations", i)
		case up == nil || down == nil:
			c.errf(v.Line, f, "give both up and down (a pair), or one change without them")
		default:
			if k := c.kinds(direct, "variations", i); len(k) > 0 {
				c.errf(c.line("variations", i, k[0]), f+"."+k[0], "give either one change (%s) or an up/down pair, not both", k[0])
				continue
			}
			v.Up = c.change(a, d.Up, false, "variations", i, "up")
			v.Down = c.change(a, d.Down, false, "variations", i, "down")
		}
		if v.Change == nil && (v.Up == nil || v.Down == nil) {
			continue
		}
		a.Variations = append(a.Variations, v)
	}
	for i, b := range a.Backgrounds {
		if b.ScaleUncertainty == 0 {
			continue
		}
		name := ScaleSourceName(b.Name)
		if line, dup := seen[name]; dup {
			c.errf(c.line("backgrounds", i, "scale_uncertainty"), b.Field+".scale_uncertainty", "its source of uncertainty is named %q, the name of a variation (line %d) too: rename the variation or the background", name, line)
			continue
		}
		seen[name] = c.line("backgrounds", i, "scale_uncertainty")
		a.Variations = append(a.Variations, Variation{Name: name, Field: b.Field + ".scale_uncertainty", Line: seen[name],
			Change: &Change{Kind: ChangeBackgroundScale, Background: i, Scale: 1 + b.ScaleUncertainty, Field: b.Field + ".scale_uncertainty", Line: seen[name]}})
	}
	if len(a.Variations) > 0 && a.Uncertainty.Covariance == unfold.NoCovariance.String() {
		c.errf(c.line("uncertainty", "covariance"), "uncertainty.covariance", "is none, but the systematic variations (%s) add to an uncertainty: ask for diag or full", a.Variations[0].Name)
	}
}

// kinds returns the keys of the changes given in d (at the path).
func (c *checker) kinds(d changeDoc, path ...any) []string {
	var ks []string
	for _, k := range []string{"files", "weight", "background_scale", "reco_observables"} {
		if nodeAt(c.root, append(slices.Clone(path), k)...) != nil {
			ks = append(ks, k)
		}
	}
	return ks
}

// change checks one change at path (a variation, or its up or down).
func (c *checker) change(a *Analysis, d changeDoc, single bool, path ...any) *Change {
	f := fieldName(path...)
	at := func(k string) []any { return append(slices.Clone(path), k) }
	ch := &Change{Field: f, Line: c.line(path...), Background: -1}
	ks := c.kinds(d, path...)
	switch {
	case len(ks) == 0:
		what := "give one change"
		if single {
			what = "give one change, or an up/down pair"
		}
		c.errf(ch.Line, f, "missing: %s: files (an alternative simulation), weight (a reweighting of the simulation), background_scale or reco_observables", what)
		return nil
	case len(ks) > 1:
		c.errf(c.line(at(ks[1])...), f+"."+ks[1], "give one change per variation (%s and %s given): make two variations", ks[0], ks[1])
		return nil
	}
	if ks[0] != "background_scale" && nodeAt(c.root, at("background")...) != nil {
		c.errf(c.line(at("background")...), f+".background", "names the background of background_scale only")
		return nil
	}
	if ks[0] != "background_scale" && len(a.Simulation) == 0 {
		c.errf(c.line(at(ks[0])...), f+"."+ks[0], "changes the simulation, but the file lists no simulated samples (the saved response cannot be varied): list the simulation")
		return nil
	}
	switch ks[0] {
	case "files":
		ch.Kind = ChangeFiles
		if len(d.Files) != len(a.Simulation) {
			c.errf(c.line(at("files")...), f+".files", "lists %d files for %d simulated samples: give one file per sample, in the order of simulation", len(d.Files), len(a.Simulation))
			return nil
		}
		for k, name := range d.Files {
			p := c.path(fmt.Sprintf("%s.files[%d]", f, k), name, c.keyLine(append(at("files"), k)...), ch.Line)
			if p != "" && events.FormatOf(p) == events.FormatUnknown {
				c.errf(c.line(append(at("files"), k)...), fmt.Sprintf("%s.files[%d]", f, k), "unknown events format of %q (use .root, .parquet or .csv)", name)
			}
			ch.Files = append(ch.Files, p)
		}
	case "weight":
		ch.Kind = ChangeWeight
		ch.Weight = c.expr(d.Weight, at("weight")...)
		if ch.Weight.Text == "" {
			c.errf(ch.Weight.Line, ch.Weight.Field, "missing: a weight expression over the simulation's columns")
			return nil
		}
	case "background_scale":
		ch.Kind = ChangeBackgroundScale
		ch.Scale = c.scale(d.BackgroundScale, 1, at("background_scale")...)
		if len(a.Backgrounds) == 0 {
			c.errf(c.line(at("background_scale")...), f+".background_scale", "the file lists no backgrounds to scale")
			return nil
		}
		if d.Background != "" {
			ch.Background = slices.IndexFunc(a.Backgrounds, func(b Background) bool { return b.Name == d.Background })
			if ch.Background < 0 {
				var ns []string
				for _, b := range a.Backgrounds {
					ns = append(ns, b.Name)
				}
				c.errf(c.line(at("background")...), f+".background", "no background is named %q (backgrounds: %s)", d.Background, strings.Join(ns, ", "))
				return nil
			}
		}
	case "reco_observables":
		ch.Kind = ChangeRecoObservables
		ch.Reco = c.replacedExprs(f+".reco_observables", d.RecoObservables.node, a)
		if ch.Reco == nil {
			return nil
		}
	}
	return ch
}

// replacedExprs reads a mapping reco axis name → expression that
// replaces some of the reco observables; nil after an error.
func (c *checker) replacedExprs(field string, n *yaml.Node, a *Analysis) []Expression {
	names := a.Reco.AxisNames()
	if n == nil || n.Kind != yaml.MappingNode || len(n.Content) == 0 {
		line := 0
		if n != nil {
			line = n.Line
		}
		c.errf(line, field, "want a mapping from reco axis name to expression, e.g. {%s: \"1.01*%s_reco\"}", names[0], names[0])
		return nil
	}
	out := make([]Expression, len(names))
	ok := true
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		ax := a.Reco.AxisIndex(k.Value)
		switch {
		case ax < 0:
			c.errf(k.Line, field+"."+k.Value, "the reco binning has no axis %q (axes: %s)", k.Value, strings.Join(names, ", "))
			ok = false
		case v.Kind != yaml.ScalarNode || strings.TrimSpace(v.Value) == "":
			c.errf(v.Line, field+"."+k.Value, "want an expression over the input columns")
			ok = false
		default:
			out[ax] = Expression{Text: strings.TrimSpace(v.Value), Line: v.Line, Field: field + "." + k.Value}
		}
	}
	if !ok {
		return nil
	}
	return out
}

// samples returns the simulated samples with the change applied (the
// file's samples when the change leaves the simulation alone).
func (a *Analysis) samples(ch *Change) []Sample {
	if ch == nil || !ch.changesResponse() {
		return a.Simulation
	}
	out := make([]Sample, len(a.Simulation))
	for i, s := range a.Simulation {
		s.Truth, s.Reco = slices.Clone(s.Truth), slices.Clone(s.Reco)
		switch ch.Kind {
		case ChangeFiles:
			s.File = ch.Files[i]
			s.FileField, s.Line = fmt.Sprintf("%s.files[%d]", ch.Field, i), ch.Line
		case ChangeWeight:
			w := ch.Weight
			if s.Weight.Text != "" {
				w.Text = "(" + s.Weight.Text + ")*(" + ch.Weight.Text + ")"
			}
			s.Weight = w
		case ChangeRecoObservables:
			for ax, e := range ch.Reco {
				if e.Text != "" {
					s.Reco[ax] = e
				}
			}
		}
		out[i] = s
	}
	return out
}

// checkVariations opens the events files of the variations and compiles
// their expressions, before any event is read.
func (a *Analysis) checkVariations() error {
	for _, v := range a.Variations {
		for _, ch := range []*Change{v.Change, v.Up, v.Down} {
			if ch == nil || !ch.changesResponse() {
				continue
			}
			for _, s := range a.samples(ch) {
				if err := a.checkSample(&s); err != nil {
					return err
				}
			}
		}
	}
	return nil
}

// backgroundScales returns the factor of each background under the
// change (nil: all 1).
func (a *Analysis) backgroundScales(ch *Change) []float64 {
	if ch == nil || ch.Kind != ChangeBackgroundScale {
		return nil
	}
	f := make([]float64, len(a.Backgrounds))
	for i := range f {
		f[i] = 1
		if ch.Background < 0 || ch.Background == i {
			f[i] = ch.Scale
		}
	}
	return f
}

// fixRegularisation returns m with the regularisation the nominal result
// res ended with: the number of iterations made, the tau chosen. A
// variation is unfolded with it (method.md §21).
func fixRegularisation(m unfold.Method, res *unfold.Result) unfold.Method {
	switch d := res.Details.(type) {
	case *bayes.Details:
		if b, ok := m.(*bayes.Settings); ok {
			c := b.WithIterations(d.Iterations).(*bayes.Settings)
			c.Scan = false
			return c
		}
	case *tikhonov.Details:
		if t, ok := m.(*tikhonov.Settings); ok {
			c := *t
			c.Tau = d.Tau
			c.Criterion = 0
			return &c
		}
	}
	return m
}

// varied unfolds the data of out with the change applied: the response
// (built again when the change needs it), the background, the nominal
// settings without an uncertainty computation (no covariance, no
// sampled responses) and the regularisation m fixed. It
// returns the estimate.
func (a *Analysis) varied(ctx context.Context, out *Outcome, bkg []backgroundSample, s *unfold.Settings, m unfold.Method, v *Variation, ch *Change, opt *Options) ([]float64, error) {
	r := out.Response
	if ch.changesResponse() {
		var err error
		if r, _, err = a.buildFrom(ctx, opt, a.samples(ch), "variation "+v.Name+": "); err != nil {
			return nil, err
		}
	}
	e, err := a.expected(r, bkg, a.backgroundScales(ch))
	if err != nil {
		return nil, err
	}
	p, err := a.Problem(r, out.Data, e)
	if err != nil {
		return nil, err
	}
	// The remedies of the nominal unfolding apply to every variation.
	if p, _, err = unfold.Remedy(p, s, a.Reco.Label, a.Truth.Label); err != nil {
		return nil, &Error{File: a.File, Line: ch.Line, Field: ch.Field, Msg: "unfolding with this variation: " + err.Error(), Err: err}
	}
	sv := *s
	sv.Covariance, sv.ResponseSamples, sv.Replicas = unfold.NoCovariance, 0, 0 // the estimate alone
	res, err := unfold.Unfold(ctx, p, &sv, m)
	if err != nil {
		return nil, &Error{File: a.File, Line: ch.Line, Field: ch.Field, Msg: "unfolding with this variation: " + err.Error(), Err: err}
	}
	return res.Estimate, nil
}

// checkSourceCovariances refuses, with the size, dense covariances of
// the variations' sources that would not fit under the memory limit
// (with covariance full only).
func (a *Analysis) checkSourceCovariances(s *unfold.Settings) error {
	if s.Covariance != unfold.Full || len(a.Variations) == 0 {
		return nil
	}
	return unfold.CheckSourceCovariances(a.Truth.Len(), a.Reco.Len(), len(a.Variations), s.MemoryLimit)
}

// Varied is the varied estimate of one systematic variation: Estimates
// holds one estimate for a single change, the up and the down estimate
// for a pair.
type Varied struct {
	Name      string
	Estimates [][]float64
}

// Vary unfolds variation k (of a.Variations) as Run does: the data with
// the change applied, the nominal settings and the regularisation the
// nominal unfolding ended with (method.md §21). It panics if k is out of
// range.
func (n *Nominal) Vary(ctx context.Context, k int) (*Varied, error) {
	a := n.a
	v := &a.Variations[k]
	vd := &Varied{Name: v.Name}
	for _, ch := range []*Change{v.Change, v.Up, v.Down} {
		if ch == nil {
			continue
		}
		est, err := a.varied(ctx, n.out, n.out.backgrounds, n.s, n.fixed, v, ch, n.opt)
		if err != nil {
			return nil, err
		}
		vd.Estimates = append(vd.Estimates, est)
	}
	return vd, nil
}

// checkVaried reports whether varied holds the varied estimates of the
// analysis's variations, in order, each of nt truth bins.
func (a *Analysis) checkVaried(varied []*Varied, nt int) error {
	if len(varied) != len(a.Variations) {
		return fmt.Errorf("analysis: %d varied estimates for the %d systematic variations of %s", len(varied), len(a.Variations), a.File)
	}
	for k, vd := range varied {
		v := &a.Variations[k]
		want := 1
		if v.Change == nil {
			want = 2
		}
		if vd == nil || vd.Name != v.Name || len(vd.Estimates) != want {
			return fmt.Errorf("analysis: the varied estimates %d are not those of the variation %q of %s (%s, line %d)", k, v.Name, a.File, v.Field, v.Line)
		}
		for _, e := range vd.Estimates {
			if len(e) != nt {
				return fmt.Errorf("analysis: the varied estimate of %q has %d truth bins, the truth binning of %s %d", v.Name, len(e), a.File, nt)
			}
		}
	}
	return nil
}

// addVariations adds the source of every variation to out.Result, from
// the varied estimates (in the order of a.Variations).
func (a *Analysis) addVariations(out *Outcome, s *unfold.Settings, varied []*Varied) error {
	res := out.Result
	if err := a.checkVaried(varied, len(res.Estimate)); err != nil {
		return err
	}
	if len(a.Variations) == 0 {
		return nil
	}
	full := s.Covariance == unfold.Full
	for k, vd := range varied {
		if a.Variations[k].Change != nil {
			res.AddSource(unfold.ShiftSource(vd.Name, res.Estimate, vd.Estimates[0], res.Determined, full))
			continue
		}
		res.AddSource(unfold.PairSource(vd.Name, res.Estimate, vd.Estimates[0], vd.Estimates[1], res.Determined, full))
	}
	for j, x := range res.Uncertainty {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return &unfold.NumericalError{Iteration: -1, Reason: fmt.Sprintf("the total uncertainty of truth bin %d (%s) is %v", j, a.Truth.Label(j), x)}
		}
	}
	return nil
}
