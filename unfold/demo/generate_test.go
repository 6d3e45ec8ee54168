package demo

import (
	"bytes"
	"context"
	"errors"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"github.com/desmear/desmear/unfold/inputs/events"
)

// chi2Band returns the 0.1% and 99.9% quantiles of the chi-square
// distribution with ndf degrees of freedom (gonum's distuv.ChiSquared as
// the reference): a correct generator fails a check against the band
// with probability 0.2% for a given seed.
func chi2Band(ndf int) (lo, hi float64) {
	d := distuv.ChiSquared{K: float64(ndf)}
	return d.Quantile(0.001), d.Quantile(0.999)
}

// The generated zetons of the pseudo-data fall in the truth bins as
// independent Poisson counts whose means are the closed-form integrals
// of the generator's densities (ExpectedTruth): the total is a sum of
// Poisson chunk sizes, and each event is placed independently. Pearson's
// chi-square of the counts against the means then follows a chi-square
// distribution with one degree of freedom per bin (K. Pearson, Phil.
// Mag. 50 (1900) 157; asymptotic: the expected counts here are ≥ 20 per
// bin, above the common-practice minimum of 5, W. G. Cochran, Biometrics
// 10 (1954) 417). This checks the inversion and rejection sampling of pt and |y|
// against the formulas that give the known truth.
func TestGeneratedTruthFollowsExpected(t *testing.T) {
	for _, seed := range []uint64{1, 2, 3} {
		cfg := Config{Events: 600_000, Seed: seed}
		_, _, dataTruth, err := generate(context.Background(), cfg)
		if err != nil {
			t.Fatal(err)
		}
		s := TruthScheme()
		want := ExpectedTruth(s, cfg)
		got := histogramTruth(s, dataTruth)
		var chi2 float64
		for g := range want {
			if want[g] < 20 {
				t.Fatalf("bin %s expects only %.1f events; the check needs ≥ 20", s.Label(g), want[g])
			}
			d := got[g] - want[g]
			chi2 += d * d / want[g]
		}
		lo, hi := chi2Band(len(want))
		if chi2 < lo || chi2 > hi {
			t.Errorf("seed %d: Pearson chi2 %.2f for %d bins, outside the 0.1%%-99.9%% band [%.2f, %.2f]", seed, chi2, len(want), lo, hi)
		}
	}
}

// The simulation is generated with a harder pt spectrum and reweighted to
// its own model (importance sampling). Its weighted truth spectrum must
// then match the simulation model's closed-form expectation, with the
// variance of a weighted sum estimated by the sum of squared weights
// (common practice); Pearson-type chi-square as above.
func TestSimulationWeightsReproduceItsModel(t *testing.T) {
	cfg := Config{Events: 600_000, Seed: 11}
	sim, _, _, err := generate(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	s := TruthScheme()
	iy, ipt := s.AxisIndex("y"), s.AxisIndex("pt")
	sumW := make([]float64, s.Len())
	sumW2 := make([]float64, s.Len())
	x := make([]float64, 2)
	for i := range sim.len() {
		if !sim.passTruth[i] {
			continue
		}
		x[iy], x[ipt] = math.Abs(sim.yTrue[i]), sim.ptTrue[i]
		g := s.Locate(x)
		if g < 0 {
			t.Fatalf("fiducial event %d (pt %v, y %v) outside the truth binning", i, sim.ptTrue[i], sim.yTrue[i])
		}
		sumW[g] += sim.weight[i]
		sumW2[g] += sim.weight[i] * sim.weight[i]
	}
	var chi2 float64
	for g := range sumW {
		b := s.Bin(g)
		want := simNormalRatio * cfg.dataZetons() * simModel.fraction(b.Low[ipt], b.High[ipt], b.Low[iy], b.High[iy])
		d := sumW[g] - want
		chi2 += d * d / sumW2[g]
	}
	lo, hi := chi2Band(s.Len())
	if chi2 < lo || chi2 > hi {
		t.Errorf("weighted simulation vs its model: chi2 %.2f for %d bins, outside [%.2f, %.2f]", chi2, s.Len(), lo, hi)
	}
}

// A few percent of the reconstructed pseudo-data are fakes (the
// scenario's promise), and the efficiency is below one everywhere.
func TestScenarioProportions(t *testing.T) {
	cfg := Config{Events: 200_000, Seed: 5}
	_, data, dataTruth, err := generate(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	fakes := 0
	for i := range data.len() {
		if !data.passTruth[i] && data.ptTrue[i] == noValue {
			fakes++
		}
	}
	if f := float64(fakes) / float64(data.len()); f < 0.02 || f > 0.08 {
		t.Errorf("fake fraction of the pseudo-data %.3f, want a few percent", f)
	}
	reco := 0
	for i := range dataTruth.len() {
		if dataTruth.passReco[i] {
			reco++
		}
	}
	if e := float64(reco) / float64(dataTruth.len()); e < 0.5 || e > 0.9 {
		t.Errorf("overall efficiency %.3f, want clearly below one", e)
	}
	for _, pt := range []float64{ptMin, 20, 50, 200, 1e4} {
		for _, a := range []float64{0, 1, 2, 2.5} {
			if e := efficiency(pt, a); !(e > 0.2 && e < 1) {
				t.Errorf("efficiency(%v, %v) = %v, want in (0.2, 1)", pt, a, e)
			}
		}
	}
}

// readAll reads every column of an event file with the events package.
func readAll(t *testing.T, path string) map[string][]float64 {
	t.Helper()
	src, err := events.Open(path, events.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	cols := src.Columns()
	out := make(map[string][]float64)
	err = src.Read(context.Background(), cols, 1<<14, func(b *events.Batch) error {
		for k, c := range cols {
			out[c] = append(out[c], b.Cols[k]...)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func sameBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// Determinism (a design rule of the project): the same seed gives the
// same files whatever GOMAXPROCS is. Every file is byte-identical except
// the ROOT files, whose format stores the time of writing in each key;
// their event values must be identical, and equal to the Parquet copies'.
func TestGenerateIsDeterministic(t *testing.T) {
	cfg := Config{Events: 150_000, Seed: 7}
	base := t.TempDir()
	dirs := []string{filepath.Join(base, "one"), filepath.Join(base, "two")}
	prev := runtime.GOMAXPROCS(0)
	defer runtime.GOMAXPROCS(prev)
	for k, procs := range []int{1, 2} {
		runtime.GOMAXPROCS(procs)
		if _, err := Generate(context.Background(), dirs[k], cfg, false); err != nil {
			t.Fatal(err)
		}
	}
	runtime.GOMAXPROCS(prev)
	for _, name := range []string{AnalysisFile, TruthBinningFile, RecoBinningFile, SimulationParquet, DataParquet, TruthFile, ScenarioFile} {
		a, err := os.ReadFile(filepath.Join(dirs[0], name))
		if err != nil {
			t.Fatal(err)
		}
		b, err := os.ReadFile(filepath.Join(dirs[1], name))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(a, b) {
			t.Errorf("%s differs between GOMAXPROCS=1 and 2", name)
		}
	}
	for _, pair := range [][2]string{{SimulationROOT, SimulationParquet}, {DataROOT, DataParquet}} {
		r1 := readAll(t, filepath.Join(dirs[0], pair[0]))
		r2 := readAll(t, filepath.Join(dirs[1], pair[0]))
		pq := readAll(t, filepath.Join(dirs[0], pair[1]))
		if len(r1) == 0 || len(r1) != len(pq) {
			t.Fatalf("%s has columns %d, %s %d", pair[0], len(r1), pair[1], len(pq))
		}
		for c, v := range r1 {
			if !sameBits(v, r2[c]) {
				t.Errorf("%s: column %s differs between GOMAXPROCS=1 and 2", pair[0], c)
			}
			if !sameBits(v, pq[c]) {
				t.Errorf("column %s differs between %s and %s", c, pair[0], pair[1])
			}
		}
	}
	other, err := Generate(context.Background(), filepath.Join(base, "three"), Config{Events: 150_000, Seed: 8}, false)
	if err != nil {
		t.Fatal(err)
	}
	a, _ := os.ReadFile(filepath.Join(dirs[0], DataParquet))
	b, _ := os.ReadFile(other.Path(DataParquet))
	if bytes.Equal(a, b) {
		t.Error("seeds 7 and 8 gave the same pseudo-data")
	}
}

// Generate refuses to overwrite a folder, replaces an old demo folder
// only when asked, never touches a folder that is not a demo folder, and
// the known truth reads back as written.
func TestGenerateFolderRules(t *testing.T) {
	base := t.TempDir()
	dir := filepath.Join(base, "demo")
	cfg := Config{Events: MinEvents, Seed: 3}
	in, err := Generate(context.Background(), dir, cfg, false)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Generate(context.Background(), dir, cfg, false); !errors.Is(err, fs.ErrExist) {
		t.Errorf("second Generate without replace: %v, want fs.ErrExist", err)
	} else if want := "demo: the folder exists: " + dir; err.Error() != want {
		t.Errorf("second Generate without replace: message %q, want %q", err, want)
	}
	if _, err := Generate(context.Background(), dir, cfg, true); err != nil {
		t.Errorf("replacing a demo folder: %v", err)
	}
	tr, err := ReadTruth(dir)
	if err != nil {
		t.Fatal(err)
	}
	if !sameBits(tr.Expected, in.Truth.Expected) || !sameBits(tr.Generated, in.Truth.Generated) {
		t.Error("truth.csv does not read back as written")
	}
	foreign := filepath.Join(base, "foreign")
	os.Mkdir(foreign, 0o755)
	os.WriteFile(filepath.Join(foreign, "thesis.tex"), []byte("keep me"), 0o644)
	if _, err := Generate(context.Background(), foreign, cfg, true); !errors.Is(err, ErrNotDemoFolder) {
		t.Errorf("Generate on a folder that is not a demo folder: %v, want ErrNotDemoFolder", err)
	}
	if b, err := os.ReadFile(filepath.Join(foreign, "thesis.tex")); err != nil || string(b) != "keep me" {
		t.Error("the foreign folder was touched")
	}
	for _, bad := range []string{"", ".", base + "/..", "/"} {
		if _, err := Generate(context.Background(), bad, cfg, true); !errors.Is(err, ErrNotDemoFolder) {
			t.Errorf("Generate into %q: %v, want ErrNotDemoFolder", bad, err)
		} else if strings.HasSuffix(err.Error(), ErrNotDemoFolder.Error()) {
			// The message ends with what to do, not with the sentinel's text.
			t.Errorf("Generate into %q: message %q does not end with what to do", bad, err)
		}
	}
	if _, err := Generate(context.Background(), filepath.Join(base, "small"), Config{Events: MinEvents - 1}, false); err == nil {
		t.Error("a simulation below MinEvents was accepted")
	}
	if _, err := Generate(context.Background(), filepath.Join(base, "large"), Config{Events: MaxEvents + 1}, false); err == nil {
		t.Error("a simulation above MaxEvents was accepted")
	}
	// A file in the folder's place is never replaced; an empty folder is.
	file := filepath.Join(base, "file")
	os.WriteFile(file, []byte("keep me"), 0o644)
	if _, err := Generate(context.Background(), file, cfg, true); !errors.Is(err, ErrNotDemoFolder) {
		t.Errorf("Generate over a file: %v, want ErrNotDemoFolder", err)
	}
	if b, err := os.ReadFile(file); err != nil || string(b) != "keep me" {
		t.Error("the file in the folder's place was touched")
	}
	empty := filepath.Join(base, "empty")
	os.Mkdir(empty, 0o755)
	if _, err := Generate(context.Background(), empty, cfg, false); !errors.Is(err, fs.ErrExist) {
		t.Errorf("Generate into an empty folder without replace: %v, want fs.ErrExist", err)
	}
	if _, err := Generate(context.Background(), empty, cfg, true); err != nil {
		t.Errorf("replacing an empty folder: %v", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Generate(ctx, filepath.Join(base, "cancelled"), cfg, false); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled Generate: %v", err)
	}
	if _, err := os.Stat(filepath.Join(base, "cancelled")); !errors.Is(err, fs.ErrNotExist) {
		t.Error("a cancelled Generate left its folder")
	}
	entries, _ := os.ReadDir(base)
	for _, e := range entries {
		if e.Name() != "demo" && e.Name() != "foreign" && e.Name() != "file" && e.Name() != "empty" {
			t.Errorf("left behind: %s", e.Name())
		}
	}
}

// BenchmarkGenerateDefault measures Generate at the default size (the
// part of "desmear demo" before the analysis runs):
// go test ./unfold/demo -run '^$' -bench GenerateDefault -benchtime 3x
func BenchmarkGenerateDefault(b *testing.B) {
	base := b.TempDir()
	for i := 0; b.Loop(); i++ {
		dir := filepath.Join(base, strconv.Itoa(i))
		if _, err := Generate(context.Background(), dir, DefaultConfig(), false); err != nil {
			b.Fatal(err)
		}
		b.StopTimer()
		os.RemoveAll(dir)
		b.StartTimer()
	}
}

// ReadTruth refuses a truth.csv that does not match the folder's truth
// binning: a wrong header, a missing row, an index out of order, a value
// that is not a number.
func TestReadTruthRefusesDamagedFiles(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "demo")
	if _, err := Generate(context.Background(), dir, Config{Events: MinEvents, Seed: 4}, false); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, TruthFile)
	good, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(string(good), "\n")
	for name, text := range map[string]string{
		"header":    strings.Replace(string(good), "expected", "estimate", 1),
		"short":     strings.Join(lines[:len(lines)-2], ""),
		"order":     lines[0] + lines[2] + lines[1] + strings.Join(lines[3:], ""),
		"expected":  lines[0] + strings.Replace(lines[1], ",false,", ",false,x", 1) + strings.Join(lines[2:], ""),
		"generated": strings.TrimSuffix(string(good), "\n") + "z\n",
	} {
		if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		if _, err := ReadTruth(dir); err == nil {
			t.Errorf("%s: a damaged truth.csv was accepted", name)
		} else if !strings.Contains(err.Error(), path) {
			t.Errorf("%s: error %q does not name the file", name, err)
		}
	}
}
