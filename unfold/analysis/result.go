package analysis

import (
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/inputs"
	"github.com/desmear/desmear/unfold/internal/rootio"
	"github.com/desmear/desmear/unfold/response"
	"github.com/desmear/desmear/unfold/result"
)

// OutputError is a failure to write the result folder (the inputs were
// fine).
type OutputError struct {
	Folder string
	Err    error
}

func (e *OutputError) Error() string { return fmt.Sprintf("writing %s: %v", e.Folder, e.Err) }
func (e *OutputError) Unwrap() error { return e.Err }

// RootFile is the name of the ROOT file in a result folder.
const RootFile = "result.root"

// Outcome is everything a run produced.
type Outcome struct {
	Response     *response.Built
	ResponseInfo *response.BundleInfo
	Data         *Measured
	Background   *Expected
	Result       *unfold.Result
	// Folder is the result folder written.
	Folder string
	// Files lists the files written in it.
	Files []string
}

// Document is the content of result.json for an analysis run: the
// plain-table result fields plus the analysis's own.
type Document struct {
	result.Result
	Analysis AnalysisInfo `json:"analysis"`
	// Purity and Stability per truth bin (on the truth binning; see the
	// fill package); null where not defined.
	Purity    []*float64 `json:"purity,omitempty"`
	Stability []*float64 `json:"stability,omitempty"`
	// Density is the estimate divided by the bin volume (and by the
	// integrated luminosity when given), per truth bin; 0 for flow bins.
	Density            []float64 `json:"density"`
	DensityUncertainty []float64 `json:"density_uncertainty,omitempty"`
	Luminosity         float64   `json:"luminosity,omitempty"`
	LuminosityUnit     string    `json:"luminosity_unit,omitempty"`
	// ResponseSummary counts the simulated events.
	ResponseSummary response.Summary `json:"response_summary"`
	// DataEvents, DataSelected and DataOutside count the data events
	// (events files only).
	DataEvents   int64 `json:"data_events,omitempty"`
	DataSelected int64 `json:"data_selected,omitempty"`
	DataOutside  int64 `json:"data_outside,omitempty"`
}

// AnalysisInfo names the analysis file.
type AnalysisInfo struct {
	File  string `json:"file"`
	Title string `json:"title,omitempty"`
}

// CheckOutput reports early whether the result folder could be written.
func (a *Analysis) CheckOutput(replace bool) error {
	return result.Check(a.Output.Folder, replace)
}

// Run builds (or loads) the response, fills the data and the
// background, unfolds and writes the result folder atomically. replace
// allows replacing an earlier result folder.
func (a *Analysis) Run(ctx context.Context, opt *Options, replace bool) (*Outcome, error) {
	if err := a.CheckOutput(replace); err != nil {
		return nil, err
	}
	// Every input is checked here, once, before any event is read.
	if err := a.CheckInputs(a.ResponseFile == "", true); err != nil {
		return nil, err
	}
	out := &Outcome{}
	var err error
	if a.ResponseFile != "" {
		out.Response, out.ResponseInfo, err = a.LoadResponse()
	} else {
		out.Response, out.ResponseInfo, err = a.buildResponse(ctx, opt)
	}
	if err != nil {
		return nil, err
	}
	if out.Data, err = a.FillData(ctx, opt); err != nil {
		return nil, err
	}
	if out.Background, err = a.Background(ctx, out.Response, opt); err != nil {
		return nil, err
	}
	p, err := a.Problem(out.Response, out.Data, out.Background)
	if err != nil {
		return nil, err
	}
	s, err := a.Settings()
	if err != nil {
		return nil, err
	}
	if out.Result, err = unfold.Unfold(ctx, p, s); err != nil {
		return nil, a.placeKernelError(err)
	}
	if err := a.write(out, s, replace, opt); err != nil {
		if errors.Is(err, result.ErrExists) || errors.Is(err, result.ErrNotResult) {
			return nil, err
		}
		return nil, &OutputError{Folder: a.Output.Folder, Err: err}
	}
	return out, nil
}

func (a *Analysis) inputs(out *Outcome) ([]inputs.File, error) {
	var ins []inputs.File
	add := func(role, path string) error {
		if path == "" {
			return nil
		}
		in, err := inputs.Hash(role, path)
		if err != nil {
			return err
		}
		ins = append(ins, in)
		return nil
	}
	if err := add("analysis", a.File); err != nil {
		return nil, err
	}
	if err := add("truth-binning", a.TruthFile); err != nil {
		return nil, err
	}
	if err := add("reco-binning", a.RecoFile); err != nil {
		return nil, err
	}
	if a.ResponseFile != "" {
		for _, name := range response.BundleFiles() {
			if err := add("response", filepath.Join(a.ResponseFile, name)); err != nil {
				return nil, err
			}
		}
	}
	if out.ResponseInfo != nil {
		ins = append(ins, out.ResponseInfo.Inputs...)
	}
	if err := add("data", a.Data.File); err != nil {
		return nil, err
	}
	for _, b := range a.Backgrounds {
		if err := add("background", b.File); err != nil {
			return nil, err
		}
	}
	if err := add("prior", a.Unfolding.PriorFile); err != nil {
		return nil, err
	}
	return ins, nil
}

func finitePtrs(v []float64) []*float64 {
	if v == nil {
		return nil
	}
	out := make([]*float64, len(v))
	for i, x := range v {
		if !math.IsNaN(x) && !math.IsInf(x, 0) {
			out[i] = &x
		}
	}
	return out
}

// densities returns the estimate and its uncertainty divided by the bin
// volume and the luminosity (1 when not given); 0 for flow bins.
func (a *Analysis) densities(est, unc []float64) (dens, densUnc []float64) {
	lumi := a.Output.Luminosity
	if lumi == 0 {
		lumi = 1
	}
	dens = make([]float64, len(est))
	if unc != nil {
		densUnc = make([]float64, len(est))
	}
	for g := range est {
		b := a.Truth.Bin(g)
		if b.Flow || !(b.Volume > 0) || math.IsInf(b.Volume, 0) {
			continue
		}
		dens[g] = est[g] / b.Volume / lumi
		if unc != nil {
			densUnc[g] = unc[g] / b.Volume / lumi
		}
	}
	return dens, densUnc
}

func (a *Analysis) write(out *Outcome, s *unfold.Settings, replace bool, opt *Options) (err error) {
	res, err := result.FromUnfold(out.Result)
	if err != nil {
		return err
	}
	doc := &Document{Result: *res}
	doc.Program = result.Program{Name: "desmear"}
	if opt != nil {
		doc.Program.Version = opt.Version
	}
	if doc.Inputs, err = a.inputs(out); err != nil {
		return err
	}
	prior := "generated"
	if a.Unfolding.Prior != "simulation" {
		prior = a.Unfolding.Prior
	}
	doc.Settings = result.DescribeSettings(s, prior, out.Background != nil)
	doc.TruthBinning = result.DescribeBinning(a.Truth, a.TruthFile)
	doc.RecoBinning = result.DescribeBinning(a.Reco, a.RecoFile)
	doc.Analysis = AnalysisInfo{File: a.File, Title: a.Title}
	pur, stab := out.Response.Purity(nil), out.Response.Stability(nil)
	doc.Purity, doc.Stability = finitePtrs(pur), finitePtrs(stab)
	doc.Density, doc.DensityUncertainty = a.densities(doc.Estimate, doc.Uncertainty)
	doc.Luminosity, doc.LuminosityUnit = a.Output.Luminosity, a.Output.LuminosityUnit
	doc.ResponseSummary = out.Response.Summary
	doc.DataEvents, doc.DataSelected, doc.DataOutside = out.Data.Events, out.Data.Selected, out.Data.Outside

	f, err := result.New(a.Output.Folder, replace)
	if err != nil {
		return err
	}
	defer func() {
		if err != nil {
			f.Abort()
		}
	}()
	if err := result.WriteJSON(f, result.JSONFile, doc); err != nil {
		return err
	}
	out.Files = append(out.Files, result.JSONFile)
	if a.Output.Has("csv") {
		w, err := f.Create(result.CSVFile)
		if err != nil {
			return err
		}
		if err := result.WriteCSV(w, &doc.Result, a.Truth); err != nil {
			return err
		}
		if err := w.Close(); err != nil {
			return err
		}
		out.Files = append(out.Files, result.CSVFile)
	}
	if a.Output.Has("regions") {
		for r, reg := range a.Truth.Regions() {
			name := "region-" + reg.Name() + ".csv"
			w, err := f.Create(name)
			if err != nil {
				return err
			}
			if err := writeRegion(w, a.Truth, r, doc, pur, stab); err != nil {
				return err
			}
			if err := w.Close(); err != nil {
				return err
			}
			out.Files = append(out.Files, name)
		}
	}
	if a.Output.Has("root") {
		path, err := f.Reserve(RootFile)
		if err != nil {
			return err
		}
		h1, h2 := rootHistograms(a.Truth, doc.Estimate, doc.Uncertainty, doc.Density, doc.DensityUncertainty)
		if err := rootio.WriteFile(path, h1, h2); err != nil {
			return err
		}
		out.Files = append(out.Files, RootFile)
	}
	if err := f.Commit(); err != nil {
		return err
	}
	out.Folder = a.Output.Folder
	return nil
}

// writeRegion writes the in-range bins of region r: global index, the
// edges of each axis of the region, the volume, the estimate and its
// uncertainty as counts and as a density, the efficiency, purity and
// stability.
func writeRegion(w io.Writer, s *binning.Scheme, r int, doc *Document, pur, stab []float64) error {
	cw := csv.NewWriter(w)
	reg := s.Regions()[r]
	header := []string{"index"}
	for _, ax := range reg.Axes() {
		header = append(header, ax.Name()+"_low", ax.Name()+"_high")
	}
	header = append(header, "volume", "estimate", "uncertainty", "density", "density_uncertainty", "efficiency", "purity", "stability", "determined")
	if err := cw.Write(header); err != nil {
		return err
	}
	f := func(v float64) string {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return ""
		}
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
	at := func(v []float64, g int) float64 {
		if v == nil {
			return math.NaN()
		}
		return v[g]
	}
	lo, hi := s.Span(r)
	for g := lo; g < hi; g++ {
		b := s.Bin(g)
		rec := []string{strconv.Itoa(g)}
		for k := range b.Axes {
			rec = append(rec, f(b.Low[k]), f(b.High[k]))
		}
		rec = append(rec, f(b.Volume), f(doc.Estimate[g]), f(at(doc.Uncertainty, g)), f(doc.Density[g]), f(at(doc.DensityUncertainty, g)),
			f(doc.Efficiency[g]), f(at(pur, g)), f(at(stab, g)), strconv.FormatBool(doc.Determined[g]))
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// placeKernelError puts an input error of the unfolding kernel at the key
// of the analysis file whose input it concerns, with the labels of the
// bins concerned, so that the message names the file and what to look at.
// Other errors are returned unchanged.
func (a *Analysis) placeKernelError(err error) error {
	var ue *unfold.InputError
	if !errors.As(err, &ue) {
		return err
	}
	e := &Error{File: a.File, Err: err}
	what := ""
	switch ue.Field {
	case "Migrations", "Generated":
		switch {
		case a.ResponseFile != "":
			e.Field, e.Line = "response", a.responseLine
		case len(a.Simulation) > 0:
			e.Field, e.Line = "simulation", a.Simulation[0].Line
		}
	case "Data", "DataVariance":
		e.Field, e.Line = "data", a.Data.Line
	case "Background", "BackgroundVariance":
		// The expected background holds the simulation's fakes and the
		// background samples.
		what = "the expected background (the simulation's fakes and the backgrounds): "
		e.Field = "backgrounds"
		if len(a.Backgrounds) == 0 {
			what = "the expected background (the simulation's fakes): "
			e.Field = "simulation"
		}
	case "Prior":
		e.Field = "unfolding.prior_file"
	default:
		e.Field = ue.Field
	}
	var where []string
	if ue.Reco >= 0 && ue.Reco < a.Reco.Len() {
		where = append(where, fmt.Sprintf("reco bin %d (%s)", ue.Reco, a.Reco.Label(ue.Reco)))
	}
	if ue.Truth >= 0 && ue.Truth < a.Truth.Len() {
		where = append(where, fmt.Sprintf("truth bin %d (%s)", ue.Truth, a.Truth.Label(ue.Truth)))
	}
	e.Msg = what + ue.Reason
	if len(where) > 0 {
		e.Msg = strings.Join(where, ", ") + ": " + e.Msg
	}
	return e
}
