package analysis

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/inputs/tables"
	"github.com/desmear/desmear/unfold/internal/eventfile"
	"github.com/desmear/desmear/unfold/internal/rootio"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/response"
	"github.com/desmear/desmear/unfold/result"
)

var simColumns = []string{"x_true", "x_reco", "w", "ok_true", "ok_reco"}

// simEvents returns n simulated events: x_true falling exponentially
// over [0, 3.5), x_reco smeared, about 90% of events reconstructed and
// 97% passing the truth selection, weights around 1.
func simEvents(n int, seed uint64) [][]float64 {
	rng := rand.New(rand.NewPCG(seed, 2))
	cols := make([][]float64, len(simColumns))
	for c := range cols {
		cols[c] = make([]float64, n)
	}
	for k := 0; k < n; k++ {
		xt := rng.ExpFloat64() * 1.2
		cols[0][k] = xt
		cols[1][k] = xt + 0.25*rng.NormFloat64()
		cols[2][k] = 0.5 + rng.Float64()
		cols[3][k] = b2f(rng.Float64() < 0.97)
		cols[4][k] = b2f(rng.Float64() < 0.9)
	}
	return cols
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// writeSample writes the columns in the format of name's extension.
func writeSample(t *testing.T, path string, names []string, cols [][]float64) {
	t.Helper()
	var err error
	switch filepath.Ext(path) {
	case ".csv":
		err = eventfile.WriteCSV(path, names, cols)
	case ".parquet":
		err = eventfile.WriteParquet(path, names, cols)
	case ".root":
		err = eventfile.WriteROOT(path, "events", names, cols)
	}
	if err != nil {
		t.Fatal(err)
	}
}

const analysisTemplate = `title: closure of a falling spectrum
binning:
  truth:
    regions:
      - name: all
        axes:
          - {name: x, edges: [0, 0.5, 1, 1.5, 2, 3], overflow: true}
  reco:
    regions:
      - name: all
        axes:
          - {name: x, edges: [0, 0.25, 0.5, 0.75, 1, 1.25, 1.5, 2, 2.5, 3], underflow: true, overflow: true}
observables:
  truth: {x: x_true}
  reco: {x: x_reco}
simulation:
  - file: SIM
    tree: events
    weight: w
    truth_selection: ok_true
    reco_selection: ok_reco > 0.5
data:
  events: DATA
  tree: events
  observables: {x: x}
unfolding:
  iterations: 4
uncertainty:
  covariance: full
output:
  folder: result
  luminosity: 2
`

func writeAnalysis(t *testing.T, dir, sim, data string) string {
	t.Helper()
	src := strings.NewReplacer("SIM", sim, "DATA", data).Replace(analysisTemplate)
	p := filepath.Join(dir, "analysis.yaml")
	if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// The same events in ROOT, Parquet and CSV files give the same response,
// bit for bit, with 1 and 2 workers.
func TestSameResponseFromEveryFormat(t *testing.T) {
	dir := t.TempDir()
	sim := simEvents(20000, 1)
	data := [][]float64{simEvents(3000, 9)[1]}
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, data)
	var ref *response.Built
	for _, ext := range []string{".csv", ".parquet", ".root"} {
		writeSample(t, filepath.Join(dir, "sim"+ext), simColumns, sim)
		a, err := Decode([]byte(strings.NewReplacer("SIM", "sim"+ext, "DATA", "data.csv").Replace(analysisTemplate)), filepath.Join(dir, "a.yaml"))
		if err != nil {
			t.Fatal(err)
		}
		a.BatchSize = 1000
		for _, workers := range []int{1, 2} {
			r, info, err := a.BuildResponse(context.Background(), &Options{Workers: workers})
			if err != nil {
				t.Fatalf("%s: %v", ext, err)
			}
			if len(info.Inputs) != 1 || info.Inputs[0].Bytes == 0 {
				t.Errorf("%s: inputs %+v", ext, info.Inputs)
			}
			if len(info.Samples) != 1 || info.Samples[0].Summary.Events != 20000 || info.Samples[0].Summary.Misses != r.Summary.Misses {
				t.Errorf("%s: per-sample summary %+v", ext, info.Samples)
			}
			if ref == nil {
				ref = r
				if r.Summary.Entries == 0 || r.Summary.Misses == 0 || r.Summary.OutsideTruth != 0 {
					t.Fatalf("unexpected summary %+v", r.Summary)
				}
				continue
			}
			m, g := ref.Migrations, r.Migrations
			if !slices.Equal(m.ColPtr(), g.ColPtr()) || !slices.Equal(m.RowIdx(), g.RowIdx()) ||
				!slices.Equal(m.Values(), g.Values()) || !slices.Equal(m.SumW2(), g.SumW2()) ||
				!slices.Equal(ref.Generated, r.Generated) || !slices.Equal(ref.Fakes, r.Fakes) ||
				!slices.Equal(ref.Diagonal, r.Diagonal) || ref.Summary.Events != r.Summary.Events {
				t.Errorf("%s with %d workers: response differs from the CSV one", ext, workers)
			}
		}
	}
}

// Closure (common practice): unfolding the simulation's own reco
// spectrum, with the simulation's truth as prior, returns that truth at
// every iteration. With n = A·1 + fakes and the fakes as background, the
// truth G is a fixed point of the EM update (D'Agostini, NIM A362 (1995)
// 487, eq. 4: with the prior equal to the truth, the posterior shares out
// n exactly back to it).
func TestClosure(t *testing.T) {
	dir := t.TempDir()
	sim := simEvents(20000, 3)
	writeSample(t, filepath.Join(dir, "sim.parquet"), simColumns, sim)
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{{1}})
	a, err := Load(writeAnalysis(t, dir, "sim.parquet", "data.csv"))
	if err != nil {
		t.Fatal(err)
	}
	r, _, err := a.BuildResponse(context.Background(), nil)
	if err != nil {
		t.Fatal(err)
	}
	n := make([]float64, a.Reco.Len())
	r.Migrations.RowSums(n)
	for i := range n {
		n[i] += r.Fakes[i]
	}
	bkg, err := a.Background(context.Background(), r, nil)
	if err != nil {
		t.Fatal(err)
	}
	p, err := a.Problem(r, &Measured{Values: n}, bkg)
	if err != nil {
		t.Fatal(err)
	}
	for k := 1; k <= 5; k++ {
		res, err := unfold.Unfold(context.Background(), p, nil, &bayes.Settings{Iterations: k})
		if err != nil {
			t.Fatal(err)
		}
		for j, g := range r.Generated {
			if math.Abs(res.Estimate[j]-g) > 1e-6*g {
				t.Errorf("iteration %d, bin %d: %v, truth %v", k, j, res.Estimate[j], g)
			}
		}
	}
}

// The whole job: result folder with every format; the result agrees
// bit for bit with the plain-table path on the tables of the same
// response (the two paths interoperate).
func TestRunAndTables(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.root"), simColumns, simEvents(20000, 5))
	writeSample(t, filepath.Join(dir, "data.parquet"), []string{"x"}, [][]float64{simEvents(4000, 6)[1]})
	path := writeAnalysis(t, dir, "sim.root", "data.parquet")
	a, err := Load(path)
	if err != nil {
		t.Fatal(err)
	}
	var stages []string
	opt := &Options{Version: "test", Progress: func(stage string, done, total int64) {
		if len(stages) == 0 || stages[len(stages)-1] != stage {
			stages = append(stages, stage)
		}
	}}
	out, err := a.Run(context.Background(), opt, false)
	if err != nil {
		t.Fatal(err)
	}
	if len(stages) != 2 || !strings.HasPrefix(stages[0], "simulation ") || !strings.HasPrefix(stages[1], "data ") {
		t.Errorf("progress stages %q", stages)
	}
	for _, f := range []string{"result.json", "result.csv", "region-all.csv", "result.root"} {
		if _, err := os.Stat(filepath.Join(out.Folder, f)); err != nil {
			t.Errorf("missing %s: %v", f, err)
		}
	}
	if _, err := a.Run(context.Background(), nil, false); err == nil {
		t.Error("an existing result folder was replaced without asking")
	}

	var doc map[string]any
	b, _ := os.ReadFile(filepath.Join(out.Folder, "result.json"))
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"estimate", "uncertainty", "covariance", "efficiency", "purity", "stability", "density", "inputs", "program", "settings", "truth_binning", "response_summary"} {
		if _, ok := doc[k]; !ok {
			t.Errorf("result.json has no %q", k)
		}
	}
	ins := doc["inputs"].([]any)
	roles := map[string]bool{}
	for _, in := range ins {
		m := in.(map[string]any)
		roles[m["role"].(string)] = true
		if len(m["sha256"].(string)) != 64 {
			t.Errorf("input %v without a SHA-256", m)
		}
	}
	if !roles["analysis"] || !roles["simulation"] || !roles["data"] {
		t.Errorf("input roles %v", roles)
	}

	// Density = estimate / width / luminosity for an in-range bin.
	dens := doc["density"].([]any)
	if got, want := dens[1].(float64), out.Result.Estimate[1]/0.5/2; math.Abs(got-want) > 1e-12*want {
		t.Errorf("density of bin 1: %v, want %v", got, want)
	}

	// The ROOT file holds the counts slice with its overflow cell.
	h, err := rootio.ReadHist1D(filepath.Join(out.Folder, "result.root"), "all/counts")
	if err != nil {
		t.Fatal(err)
	}
	if h.NBins() != 5 || h.SumW[2] != out.Result.Estimate[1] || h.SumW[6] != out.Result.Estimate[5] || h.SumW[0] != 0 {
		t.Errorf("ROOT counts %v, estimate %v", h.SumW, out.Result.Estimate)
	}
	if want := out.Result.Uncertainty[1] * out.Result.Uncertainty[1]; h.SumW2[2] != want {
		t.Errorf("ROOT sumw2 %v, want %v", h.SumW2[2], want)
	}

	// The plain-table path on the same response gives the same bits.
	var rb, gb, bb, nb bytes.Buffer
	r := out.Response
	if err := tables.WriteResponse(&rb, r.Migrations); err != nil {
		t.Fatal(err)
	}
	tables.WriteVector(&gb, tables.Generated, r.Generated, r.GeneratedSumW2)
	tables.WriteVector(&bb, tables.Background, out.Background.Values, out.Background.Variance)
	tables.WriteVector(&nb, tables.Data, out.Data.Values, nil)
	var set tables.Set
	if set.Response, err = tables.ReadResponse(&rb, "response.csv"); err != nil {
		t.Fatal(err)
	}
	set.Generated, _ = tables.ReadVector(&gb, "generated.csv", tables.Generated)
	set.Background, _ = tables.ReadVector(&bb, "background.csv", tables.Background)
	set.Data, _ = tables.ReadVector(&nb, "data.csv", tables.Data)
	p, err := set.Assemble(tables.Sizes{Reco: a.Reco.Len(), Truth: a.Truth.Len()})
	if err != nil {
		t.Fatal(err)
	}
	s, m, _ := a.Settings()
	res, err := unfold.Unfold(context.Background(), p, s, m)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(res.Estimate, out.Result.Estimate) || !slices.Equal(res.Uncertainty, out.Result.Uncertainty) {
		t.Errorf("plain tables give %v ± %v, the analysis %v ± %v", res.Estimate, res.Uncertainty, out.Result.Estimate, out.Result.Uncertainty)
	}
}

func TestExpressionErrors(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(10, 1))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{{1}})
	src := strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv", "weight: w", "weight: 2*wt").Replace(analysisTemplate)
	a, err := Decode([]byte(src), filepath.Join(dir, "a.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	_, _, err = a.BuildResponse(context.Background(), nil)
	want := filepath.Join(dir, "a.yaml") + ":19: simulation[0].weight: "
	if err == nil || !strings.HasPrefix(err.Error(), want) || !strings.Contains(err.Error(), "wt") || !strings.Contains(err.Error(), "x_true, x_reco, w, ok_true, ok_reco") {
		t.Errorf("got %v, want an error starting %q naming the column and listing the file's columns", err, want)
	}

	// A missing events file names the analysis file, line and field.
	src = strings.NewReplacer("SIM", "nowhere.csv", "DATA", "data.csv").Replace(analysisTemplate)
	a, err = Decode([]byte(src), filepath.Join(dir, "a.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	_, _, err = a.BuildResponse(context.Background(), nil)
	if err == nil || !strings.Contains(err.Error(), "a.yaml:17: simulation[0].file: cannot open the events file") {
		t.Errorf("missing file: got %v", err)
	}
}

// A saved response bundle, named by the analysis file's response key,
// gives the same result as building the response again; a bundle built
// for other schemes is refused.
func TestSavedResponse(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(5000, 8))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(1000, 9)[1]})
	a, err := Load(writeAnalysis(t, dir, "sim.csv", "data.csv"))
	if err != nil {
		t.Fatal(err)
	}
	built, err := a.Run(context.Background(), nil, false)
	if err != nil {
		t.Fatal(err)
	}
	if err := built.Response.Save(filepath.Join(dir, "saved"), *built.ResponseInfo, false); err != nil {
		t.Fatal(err)
	}
	src, _ := os.ReadFile(filepath.Join(dir, "analysis.yaml"))
	with := strings.Replace(string(src), "simulation:", "response: saved\nsimulation:", 1)
	with = strings.Replace(with, "folder: result", "folder: result2", 1)
	b, err := Decode([]byte(with), filepath.Join(dir, "analysis.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	loaded, err := b.Run(context.Background(), nil, false)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(loaded.Result.Estimate, built.Result.Estimate) || !slices.Equal(loaded.Result.Uncertainty, built.Result.Uncertainty) {
		t.Errorf("loaded response gives %v, built %v", loaded.Result.Estimate, built.Result.Estimate)
	}
	// The result records both files of the loaded bundle among its inputs,
	// beside the simulation the bundle was built from.
	var doc result.Result
	if b, err := os.ReadFile(filepath.Join(loaded.Folder, "result.json")); err != nil || json.Unmarshal(b, &doc) != nil {
		t.Fatalf("result.json: %v", err)
	}
	var bundle []string
	sim := false
	for _, in := range doc.Inputs {
		switch in.Role {
		case "response":
			bundle = append(bundle, filepath.Base(in.Path))
		case "simulation":
			sim = true
		}
	}
	if !slices.Equal(bundle, []string{"response.json", "migrations.dsm"}) || !sim {
		t.Errorf("inputs %+v: want the bundle's response.json and migrations.dsm and the simulation", doc.Inputs)
	}
	other := strings.Replace(with, "edges: [0, 0.5, 1, 1.5, 2, 3]", "edges: [0, 0.5, 1, 2, 3]", 1)
	c, err := Decode([]byte(other), filepath.Join(dir, "analysis.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	// The message names the analysis file's line of the response key and
	// the level whose binning differs.
	line := 1 + strings.Count(other[:strings.Index(other, "response: saved")], "\n")
	want := fmt.Sprintf("analysis.yaml:%d: response: the saved response %s was built for another truth binning", line, filepath.Join(dir, "saved"))
	_, _, oerr := c.LoadResponse()
	if oerr == nil || !strings.Contains(oerr.Error(), want) {
		t.Errorf("a bundle of other schemes: got %v, want %q", oerr, want)
	}
	// A bundle to rebuild, and one not built yet, are ErrResponseNeeded;
	// the message says what to do without naming a command.
	missing, err := Decode([]byte(strings.Replace(with, "response: saved", "response: unbuilt", 1)), filepath.Join(dir, "analysis.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	_, _, merr := missing.LoadResponse()
	for _, err := range []error{oerr, merr} {
		if !errors.Is(err, ErrResponseNeeded) || !strings.Contains(err.Error(), "from the simulation") || strings.Contains(err.Error(), "desmear") {
			t.Errorf("got %v, want ErrResponseNeeded saying to build it from the simulation, naming no command", err)
		}
	}
}

// Backgrounds from events (scaled, with a scale uncertainty), data from
// a TH1D, and the prior and smoothing settings reach the kernel.
func TestBackgroundPriorAndTH1D(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.parquet"), simColumns, simEvents(8000, 12))
	// Background events: x uniform in [0, 3), weight 2.
	rng := rand.New(rand.NewPCG(1, 1))
	bx, bw := make([]float64, 500), make([]float64, 500)
	for k := range bx {
		bx[k], bw[k] = 3*rng.Float64(), 2
	}
	writeSample(t, filepath.Join(dir, "bkg.csv"), []string{"xb", "wb"}, [][]float64{bx, bw})
	os.WriteFile(filepath.Join(dir, "prior.csv"), []byte("truth,value\n0,5\n1,4\n2,3\n3,2\n4,1\n5,1\n"), 0o644)

	// The data: a TH1D with the reco edges (flows included).
	edges := []float64{0, 0.25, 0.5, 0.75, 1, 1.25, 1.5, 2, 2.5, 3}
	h := rootio.NewHist1D("hx", edges)
	for c := range h.SumW {
		h.SumW[c] = float64(200 - 10*c)
		h.SumW2[c] = h.SumW[c]
	}
	if err := rootio.WriteFile(filepath.Join(dir, "data.root"), []*rootio.Hist1D{h}, nil); err != nil {
		t.Fatal(err)
	}
	src := strings.NewReplacer("SIM", "sim.parquet",
		"data:\n  events: DATA\n  tree: events\n  observables: {x: x}\n",
		"data:\n  histogram: data.root\n  name: hx\nbackgrounds:\n  - {name: flat, events: bkg.csv, weight: wb, observables: {x: xb}, scale: 0.5, scale_uncertainty: 0.2}\n",
		"iterations: 4", "iterations: 4\n  prior: file\n  prior_file: prior.csv\n  smoothing: 0.5").Replace(analysisTemplate)
	a, err := Decode([]byte(src), filepath.Join(dir, "a.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	r, _, err := a.BuildResponse(ctx, nil)
	if err != nil {
		t.Fatal(err)
	}
	data, err := a.FillData(ctx, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Reco bins: 9 in range, then the underflow and the overflow
	// (ROOT cells 0 and 10).
	if data.Values[0] != 190 || data.Values[8] != 110 || data.Values[9] != 200 || data.Values[10] != 100 || data.Outside != 0 {
		t.Errorf("data from the TH1D: %v (outside %d)", data.Values, data.Outside)
	}
	bkg, err := a.Background(ctx, r, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Expected: fakes + 0.5 × 2 per background event; variance: fakes'
	// Σw² + Σ(0.5·2)² (the scale uncertainty is a source of its own,
	// method.md §21 Systematic variations).
	count := make([]float64, a.Reco.Len())
	for _, x := range bx {
		count[a.Reco.Locate([]float64{x})]++
	}
	for i := range count {
		want := r.Fakes[i] + count[i]
		wantVar := r.FakesSumW2[i] + count[i]
		if math.Abs(bkg.Values[i]-want) > 1e-9 || math.Abs(bkg.Variance[i]-wantVar) > 1e-9 {
			t.Errorf("reco bin %d: background %v ± %v, want %v ± %v", i, bkg.Values[i], bkg.Variance[i], want, wantVar)
		}
	}
	p, err := a.Problem(r, data, bkg)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(p.Prior, []float64{5, 4, 3, 2, 1, 1}) {
		t.Errorf("prior %v", p.Prior)
	}
	s, mm, _ := a.Settings()
	m, ok := mm.(*bayes.Settings)
	if !ok || m.Smoothing == nil || m.Smoothing.Strength != 0.5 || s.Covariance != unfold.Full || m.Iterations != 4 {
		t.Errorf("settings %+v %+v", s, m)
	}
	if _, err := unfold.Unfold(ctx, p, s, m); err != nil {
		t.Fatal(err)
	}
	a.Unfolding.Prior = "flat"
	if p, _ := a.Prior(); !slices.Equal(p, []float64{1, 1, 1, 1, 1, 1}) {
		t.Errorf("flat prior %v", p)
	}
}

// A misspelt column in the data is reported before any simulated event
// is read.
func TestInputsCheckedFirst(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(1000, 1))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{{1}})
	src := strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv", "observables: {x: x}", "observables: {x: xx}").Replace(analysisTemplate)
	a, err := Decode([]byte(src), filepath.Join(dir, "a.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	read := false
	_, err = a.Run(context.Background(), &Options{Progress: func(string, int64, int64) { read = true }}, false)
	if err == nil || !strings.Contains(err.Error(), `data.observables.x: unknown column "xx"`) {
		t.Errorf("got %v", err)
	}
	if read {
		t.Error("events were read before the inputs were checked")
	}
}

// An unknown column with no close name lists the file's columns once,
// after the position in the expression, not a second time from the
// expression compiler.
func TestUnknownColumnListedOnce(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(100, 1))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{{1}})
	src := strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv", "observables: {x: x}", "observables: {x: zzzz}").Replace(analysisTemplate)
	a, err := Decode([]byte(src), filepath.Join(dir, "a.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	_, err = a.Run(context.Background(), nil, false)
	if err == nil {
		t.Fatal("no error for an unknown column")
	}
	msg := err.Error()
	want := `data.observables.x: unknown column "zzzz" (at column 1 of "zzzz"); `
	if !strings.Contains(msg, want) || !strings.HasSuffix(msg, "data.csv has the columns x") || strings.Contains(msg, "(columns:") {
		t.Errorf("got %q, want it to contain %q and no second column list", msg, want)
	}
}

func TestWithoutColumnList(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{`unknown column "wgt" (columns: pt, weight)`, `unknown column "wgt"`},
		{`unknown column "a (columns: b)" (12 columns; first: a, b, ...)`, `unknown column "a (columns: b)"`},
		{`unknown column "weigh"; did you mean "weight"?`, `unknown column "weigh"; did you mean "weight"?`},
		{`hypot takes 2 arguments, got 1`, `hypot takes 2 arguments, got 1`},
	} {
		if got := withoutColumnList(c.in); got != c.want {
			t.Errorf("withoutColumnList(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}

// An input problem found by the unfolding kernel (here negative data from
// negative data weights, and an empty response from a selection no event
// passes) is reported at the analysis file's key, with the bin's label.
func TestKernelErrorsPlaced(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(2000, 3))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(500, 4)[1]})
	for _, c := range []struct {
		old, new string
		want     string
	}{
		{"  observables: {x: x}\n", "  observables: {x: x}\n  weight: \"-1\"\n",
			`a.yaml:23: data: reco bin 0 (all x[0,0.25)): value -`},
		{"    truth_selection: ok_true\n    reco_selection: ok_reco > 0.5\n", "    truth_selection: \"0\"\n    reco_selection: \"0\"\n",
			`a.yaml:17: simulation: the response is empty`},
	} {
		src := strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv").Replace(analysisTemplate)
		if !strings.Contains(src, c.old) {
			t.Fatalf("template lacks %q", c.old)
		}
		a, err := Decode([]byte(strings.Replace(src, c.old, c.new, 1)), filepath.Join(dir, "a.yaml"))
		if err != nil {
			t.Fatal(err)
		}
		_, err = a.Run(context.Background(), nil, false)
		var ae *Error
		var ue *unfold.InputError
		if !errors.As(err, &ae) || !errors.As(err, &ue) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("got %v (%T), want an *Error wrapping an *unfold.InputError, containing %q", err, err, c.want)
		}
	}
}

// A negative expected background made by negative fake weights alone
// points to the simulation, at its line, not to backgrounds the file does
// not have.
func TestNegativeFakesPlaced(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(2000, 5))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(500, 6)[1]})
	src := strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv", "    weight: w\n", "    weight: \"where(ok_true, w, -w)\"\n").Replace(analysisTemplate)
	a, err := Decode([]byte(src), filepath.Join(dir, "a.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	_, err = a.Run(context.Background(), nil, false)
	want := "a.yaml:17: simulation: the expected background in reco bin "
	if err == nil || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), "check negative weights in the simulated fakes") {
		t.Errorf("got %v, want a message containing %q", err, want)
	}
}

// A generated count left negative by negative event weights is reported
// at the simulation's line.
func TestNegativeGeneratedPlaced(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(2000, 5))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(500, 6)[1]})
	src := strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv", "    weight: w\n", "    weight: \"where(ok_true && x_true > 2, -w, w)\"\n").Replace(analysisTemplate)
	a, err := Decode([]byte(src), filepath.Join(dir, "a.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	_, err = a.Run(context.Background(), nil, false)
	want := "a.yaml:17: simulation: the generated count of truth bin "
	if err == nil || !strings.Contains(err.Error(), want) {
		t.Errorf("got %v, want a message containing %q", err, want)
	}
}

// A bad event is reported at the key of the file it comes from, with the
// events file and the event's position; a cancelled run returns the
// context's error unchanged.
func TestEventErrorPlaced(t *testing.T) {
	dir := t.TempDir()
	sim := simEvents(2000, 5)
	sim[2][1234] = math.NaN()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, sim)
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(500, 6)[1]})
	a, err := Decode([]byte(strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv").Replace(analysisTemplate)), filepath.Join(dir, "a.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	_, err = a.Run(context.Background(), nil, false)
	want := fmt.Sprintf("%s:17: simulation[0]: %s: event 1234: weight is NaN", filepath.Join(dir, "a.yaml"), filepath.Join(dir, "sim.csv"))
	var e *Error
	if !errors.As(err, &e) || err.Error() != want {
		t.Errorf("got %v, want %q", err, want)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := a.Run(ctx, nil, false); !errors.Is(err, context.Canceled) || errors.As(err, &e) {
		t.Errorf("cancelled: got %T %v, want context.Canceled unwrapped", err, err)
	}
}
