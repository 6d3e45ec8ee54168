package demo

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/internal/atomicfile"
)

// File names inside a demo folder.
const (
	AnalysisFile       = "analysis.yaml"
	TruthBinningFile   = "truth-binning.yaml"
	RecoBinningFile    = "reco-binning.yaml"
	SimulationROOT     = "simulation.root"
	SimulationParquet  = "simulation.parquet"
	DataROOT           = "data.root"
	DataParquet        = "data.parquet"
	TruthFile          = "truth.csv"
	ReferenceFile      = "truth-expected.csv"
	ScenarioFile       = "scenario.json"
	ResultFolder       = "result"
	StressFile         = "stress-test.yaml"
	StressResultFolder = "result-reweighted"
)

// ErrNotDemoFolder is wrapped by Generate's error when the output folder
// exists and is not one Generate may replace.
var ErrNotDemoFolder = errors.New("not a demo folder")

// Inputs describes a generated demo folder.
type Inputs struct {
	Dir    string // the folder
	Config Config // size and seed it was made with

	SimulatedEvents int // events in the simulation files
	DataEvents      int // events in the pseudo-data files

	// Truth is the known truth of the pseudo-data, per truth bin.
	Truth *Truth
}

// Path returns the path of the named file of the folder.
func (in *Inputs) Path(name string) string { return filepath.Join(in.Dir, name) }

// Truth is the known truth-level spectrum of the pseudo-data, indexed by
// the global bins of the demo's truth binning.
type Truth struct {
	Scheme *binning.Scheme
	// Expected is the expected number of generated zetons in each bin:
	// the generator's densities integrated in closed form over the bin,
	// times the expected yield. It is what the unfolded spectrum
	// estimates, and what the demo compares it with.
	Expected []float64
	// Generated is the number of zetons the pseudo-data actually hold in
	// each bin. It fluctuates around Expected with the Poisson
	// uncertainty of the generation, which is correlated with the data,
	// so the data-statistical covariance of the unfolded spectrum does
	// not apply to unfolded − Generated; it is kept for reference.
	Generated []float64
}

// TruthScheme returns the demo's truth binning.
func TruthScheme() *binning.Scheme { return mustScheme(truthBinningYAML, TruthBinningFile) }

// RecoScheme returns the demo's reco binning.
func RecoScheme() *binning.Scheme { return mustScheme(recoBinningYAML, RecoBinningFile) }

func mustScheme(text, name string) *binning.Scheme {
	s, err := binning.Decode(strings.NewReader(text), name)
	if err != nil {
		panic(fmt.Sprintf("demo: built-in %s does not decode: %v", name, err))
	}
	return s
}

// ExpectedTruth returns the expected number of generated zetons of the
// pseudo-data of cfg in each global bin of the truth scheme s, whose axes
// must be named "y" (absolute rapidity) and "pt" (GeV); another axis
// name panics. Flow bins get the expectation over their open range,
// clipped to the generated and fiducial region.
func ExpectedTruth(s *binning.Scheme, cfg Config) []float64 {
	out := make([]float64, s.Len())
	lz := cfg.dataZetons()
	for g := range out {
		b := s.Bin(g)
		ptLo, ptHi := math.Inf(-1), math.Inf(1)
		yLo, yHi := math.Inf(-1), math.Inf(1)
		for k, name := range b.Axes {
			switch name {
			case "pt":
				ptLo, ptHi = b.Low[k], b.High[k]
			case "y":
				yLo, yHi = b.Low[k], b.High[k]
			default:
				panic(fmt.Sprintf("demo: truth scheme axis %q is neither y nor pt", name))
			}
		}
		out[g] = lz * dataModel.fraction(ptLo, ptHi, yLo, yHi)
	}
	return out
}

// Generate makes the demo's inputs with cfg and writes them into the
// folder dir: the simulation and the pseudo-data as ROOT and Parquet
// files, the truth and reco binnings, the analysis file, the known truth
// of the pseudo-data (truth.csv) and a description of the scenario
// (scenario.json). The folder is written under a temporary name beside
// dir and renamed into place, so a failed or cancelled run leaves nothing
// behind. If dir exists Generate returns an error wrapping fs.ErrExist,
// unless replace is true and dir is empty or a previous demo folder (it
// holds scenario.json): then it is replaced; any other existing path is
// refused with an error wrapping ErrNotDemoFolder. Whatever the number of
// cores, the same cfg gives the same events and the same bytes in every
// file except the ROOT files, whose keys carry their write time and path.
func Generate(ctx context.Context, dir string, cfg Config, replace bool) (*Inputs, error) {
	st, err := Stage(ctx, dir, cfg, replace)
	if err != nil {
		return nil, err
	}
	defer st.Abort()
	if err := st.Commit(); err != nil {
		return nil, err
	}
	return st.Inputs, nil
}

// Staged is a demo folder written under a temporary name and not yet
// installed: work that belongs in the folder (the result of its
// analysis) is done inside it, at Dir, and Commit installs the whole at
// once, so that the inputs and that work appear together or not at all,
// and an earlier demo folder stays intact until then.
type Staged struct {
	// Inputs describes the folder; its Dir is the final path.
	Inputs *Inputs
	f      *atomicfile.Folder
}

// Dir returns the temporary folder holding the files until Commit.
func (s *Staged) Dir() string { return s.f.Dir() }

// Path returns the path of the named file in the temporary folder.
func (s *Staged) Path(name string) string { return filepath.Join(s.f.Dir(), name) }

// Commit installs the folder at its final path, replacing an earlier
// demo folder if that was asked for.
func (s *Staged) Commit() error {
	if err := s.f.Commit(); err != nil {
		return folderError(err)
	}
	return nil
}

// Abort removes the temporary folder and everything in it; it does
// nothing after a successful Commit.
func (s *Staged) Abort() { s.f.Abort() }

// Stage writes the demo's inputs as Generate does, but into a temporary
// folder that Commit installs: always pair it with a deferred Abort.
func Stage(ctx context.Context, dir string, cfg Config, replace bool) (*Staged, error) {
	if err := cfg.check(); err != nil {
		return nil, err
	}
	if cfg.Events == 0 {
		cfg.Events = DefaultEvents
	}
	if err := CheckFolder(dir, replace); err != nil {
		return nil, err
	}
	sim, data, dataTruth, err := generate(ctx, cfg)
	if err != nil {
		return nil, err
	}
	f, err := atomicfile.New(dir, ScenarioFile, replace)
	if err != nil {
		return nil, folderError(err)
	}
	in := &Inputs{Config: cfg, SimulatedEvents: sim.len(), DataEvents: data.len()}
	if err := writeInputs(ctx, f, in, sim, data, dataTruth); err != nil {
		f.Abort()
		return nil, fmt.Errorf("demo: writing the inputs in %s: %w", dir, err)
	}
	in.Dir = dir
	return &Staged{Inputs: in, f: f}, nil
}

// CheckFolder reports whether Generate could write the demo folder at
// dir with replace, with the error Generate would return, so that a
// refusal comes before the work of generating.
func CheckFolder(dir string, replace bool) error {
	if base := filepath.Base(filepath.Clean(dir)); dir == "" || base == "." || base == ".." || base == string(filepath.Separator) {
		return fmt.Errorf("demo: %q cannot be the demo folder (%w); name a folder to create", dir, ErrNotDemoFolder)
	}
	if err := atomicfile.Check(dir, ScenarioFile, replace); err != nil {
		return folderError(err)
	}
	return nil
}

// folderError says that a refused folder is the demo folder; a folder
// that is not an earlier demo folder is reported with ErrNotDemoFolder.
func folderError(err error) error {
	if errors.Is(err, atomicfile.ErrNotOurs) {
		return fmt.Errorf("demo: %w, so it is left alone (%w): choose another output folder", err, ErrNotDemoFolder)
	}
	return fmt.Errorf("demo: %w", err)
}

// writeInputs writes every file of the demo folder into f.
func writeInputs(ctx context.Context, f *atomicfile.Folder, in *Inputs, sim, data, dataTruth *sample) error {
	truthScheme, err := writeScheme(f, TruthBinningFile, truthBinningYAML)
	if err != nil {
		return err
	}
	if _, err := writeScheme(f, RecoBinningFile, recoBinningYAML); err != nil {
		return err
	}
	in.Truth = &Truth{
		Scheme:    truthScheme,
		Expected:  ExpectedTruth(truthScheme, in.Config),
		Generated: histogramTruth(truthScheme, dataTruth),
	}
	if err := writeTruth(f, TruthFile, in.Truth); err != nil {
		return err
	}
	if err := writeReference(f, ReferenceFile, in.Truth); err != nil {
		return err
	}
	if err := f.WriteFile(AnalysisFile, []byte(analysisYAML(in.Config))); err != nil {
		return err
	}
	if err := f.WriteFile(StressFile, []byte(stressYAML(in.Config))); err != nil {
		return err
	}
	if err := writeScenario(f, in); err != nil {
		return err
	}
	writers := []func() error{
		func() error { return writeSimulationROOT(ctx, f, SimulationROOT, sim) },
		func() error { return writeSimulationParquet(ctx, f, SimulationParquet, sim) },
		func() error { return writeDataROOT(ctx, f, DataROOT, data) },
		func() error { return writeDataParquet(ctx, f, DataParquet, data) },
	}
	errs := make([]error, len(writers))
	var wg sync.WaitGroup
	for k, w := range writers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs[k] = w()
		}()
	}
	wg.Wait()
	// The first error only: the writers usually fail for one cause (a
	// full disk), and the message stays one line.
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// writeScheme writes the binning scheme text to the file name of f and
// returns the scheme.
func writeScheme(f *atomicfile.Folder, name, text string) (*binning.Scheme, error) {
	if err := f.WriteFile(name, []byte(text)); err != nil {
		return nil, err
	}
	return binning.Decode(strings.NewReader(text), name)
}

// histogramTruth counts the fiducial zetons of s in the truth scheme t.
func histogramTruth(t *binning.Scheme, s *sample) []float64 {
	h := make([]float64, t.Len())
	x := make([]float64, len(t.AxisNames()))
	iy, ipt := t.AxisIndex("y"), t.AxisIndex("pt")
	for i := range s.len() {
		if !s.passTruth[i] {
			continue
		}
		x[iy], x[ipt] = math.Abs(s.yTrue[i]), s.ptTrue[i]
		if g := t.Locate(x); g >= 0 {
			h[g]++
		}
	}
	return h
}

// TruthHeader is the header of truth.csv.
var TruthHeader = []string{"index", "label", "flow", "expected", "generated"}

func writeTruth(f *atomicfile.Folder, name string, t *Truth) error {
	out, err := f.Create(name)
	if err != nil {
		return err
	}
	w := csv.NewWriter(out)
	w.Write(TruthHeader)
	for g := range t.Expected {
		b := t.Scheme.Bin(g)
		w.Write([]string{
			strconv.Itoa(g), t.Scheme.Label(g), strconv.FormatBool(b.Flow),
			strconv.FormatFloat(t.Expected[g], 'g', 17, 64),
			strconv.FormatFloat(t.Generated[g], 'g', -1, 64),
		})
	}
	w.Flush()
	if err := w.Error(); err != nil {
		return err
	}
	return out.Close()
}

// writeReference writes the expected truth as a plain truth table
// (truth,value), the reference spectrum of the stress test's compare key.
func writeReference(f *atomicfile.Folder, name string, t *Truth) error {
	out, err := f.Create(name)
	if err != nil {
		return err
	}
	w := csv.NewWriter(out)
	w.Write([]string{"truth", "value"})
	for g, e := range t.Expected {
		w.Write([]string{strconv.Itoa(g), strconv.FormatFloat(e, 'g', 17, 64)})
	}
	w.Flush()
	if err := w.Error(); err != nil {
		return err
	}
	return out.Close()
}

// ReadTruth reads the known truth (truth.csv) of the demo folder dir.
func ReadTruth(dir string) (*Truth, error) {
	s, err := binning.ReadFile(filepath.Join(dir, TruthBinningFile))
	if err != nil {
		return nil, err
	}
	path := filepath.Join(dir, TruthFile)
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.FieldsPerRecord = len(TruthHeader)
	rows, err := r.ReadAll()
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if len(rows) != s.Len()+1 || strings.Join(rows[0], ",") != strings.Join(TruthHeader, ",") {
		return nil, fmt.Errorf("%s: want the header %q and %d rows, one per truth bin", path, strings.Join(TruthHeader, ","), s.Len())
	}
	t := &Truth{Scheme: s, Expected: make([]float64, s.Len()), Generated: make([]float64, s.Len())}
	for k, row := range rows[1:] {
		g, err := strconv.Atoi(row[0])
		if err != nil || g != k {
			return nil, fmt.Errorf("%s:%d: index %q, want %d", path, k+2, row[0], k)
		}
		if t.Expected[k], err = strconv.ParseFloat(row[3], 64); err != nil {
			return nil, fmt.Errorf("%s:%d: expected: %w", path, k+2, err)
		}
		if t.Generated[k], err = strconv.ParseFloat(row[4], 64); err != nil {
			return nil, fmt.Errorf("%s:%d: generated: %w", path, k+2, err)
		}
	}
	return t, nil
}

// scenario is the content of scenario.json: what the folder is and how
// it was made, for people and for Generate's replace check.
type scenario struct {
	Description     string             `json:"description"`
	Events          int                `json:"events"`
	Seed            uint64             `json:"seed"`
	SimulatedEvents int                `json:"simulated_events"`
	DataEvents      int                `json:"data_events"`
	Parameters      map[string]float64 `json:"parameters"`
}

func writeScenario(f *atomicfile.Folder, in *Inputs) error {
	sc := scenario{
		Description: "desmear demo: an invented measurement of the made-up zeton particle in the imaginary " +
			"\"demo run\", double-differential in pt (GeV) and |y|. The simulation and the pseudo-data differ in shape " +
			"(harder pt slope and narrower |y| shape in the pseudo-data). No number comes from a real experiment.",
		Events: in.Config.Events, Seed: in.Config.Seed,
		SimulatedEvents: in.SimulatedEvents, DataEvents: in.DataEvents,
		Parameters: map[string]float64{
			"pt_min_GeV": ptMin, "abs_y_max": yMax, "abs_y_fiducial": yFiducial,
			"sim_pt_slope": simSlope, "data_pt_slope": dataSlope, "generation_pt_slope": genSlope,
			"sim_y_width": simYWidth, "data_y_width": dataYWidth,
			"efficiency_plateau": effPlateau, "efficiency_y_drop": effYDrop,
			"efficiency_turn_on": effTurnOn, "efficiency_turn_on_GeV": effTurnPt,
			"resolution_constant": resA, "resolution_per_GeV": resB, "pt_scale": ptScale, "y_resolution": resY,
			"fake_pt_min_GeV": fakePtMin, "fake_pt_mean_GeV": fakePtMean,
			"data_zetons_expected": in.Config.dataZetons(), "data_fakes_expected": in.Config.dataFakes(),
			"sim_cross_section_ratio": simNormalRatio, "sim_fake_fraction": simFakeFraction,
		},
	}
	b, err := json.MarshalIndent(sc, "", "  ")
	if err != nil {
		return err
	}
	return f.WriteFile(ScenarioFile, append(b, '\n'))
}
