package result

import (
	"bytes"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/internal/rootio"
)

// writeFolder writes r with the default formats into a new result folder
// under parent and returns its path and the files written.
func writeFolder(t *testing.T, parent, name string, r *Result, s *binning.Scheme) (string, []string) {
	t.Helper()
	dir := filepath.Join(parent, name)
	f, err := New(dir, false)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	files, err := Write(f, r, s, DefaultFormats())
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	return dir, files
}

// notReportFiles returns files without those of the report: the plots
// folder and report.html (tested in plots_test.go and html_test.go).
func notReportFiles(files []string) []string {
	var out []string
	for _, f := range files {
		if !strings.HasPrefix(f, PlotsFolder+"/") && f != ReportFile {
			out = append(out, f)
		}
	}
	return out
}

// The region tables and the ROOT histograms of a result are the same
// whether the document carries its densities (an analysis run, which
// fills them with Densities) or not (the plain-table mode, whose writers
// compute them from the bin volumes): both modes write through the same
// writers. The histograms are read back with rootio; the density of a
// bin is its estimate over its volume (common practice), 0 for flow
// bins.
func TestWritersSameForBothModes(t *testing.T) {
	s, err := binning.Decode(strings.NewReader(`regions:
  - name: c
    axes:
      - {name: y, edges: [0, 1, 3]}
      - {name: pt, edges: [0, 10, 30], overflow: true}
`), "s.yaml")
	if err != nil {
		t.Fatal(err)
	}
	n := s.Len()
	plain := &Result{Format: Format, FormatVersion: FormatVersion, TruthBins: n, Estimate: make([]float64, n), Uncertainty: make([]float64, n),
		Determined: make([]bool, n), Efficiency: make([]float64, n)}
	for g := range n {
		plain.Estimate[g], plain.Uncertainty[g] = float64(7*g+3), float64(g+1)
		plain.Determined[g], plain.Efficiency[g] = true, 0.5
	}
	analysis := *plain
	analysis.Density, analysis.DensityUncertainty = Densities(s, plain.Estimate, plain.Uncertainty, 0)
	analysis.Analysis = &Analysis{File: "a.yaml"}
	parent := t.TempDir()
	pdir, pfiles := writeFolder(t, parent, "plain", plain, s)
	adir, afiles := writeFolder(t, parent, "analysis", &analysis, s)
	want := []string{JSONFile, CSVFile, TruthBinsFile, SubmissionFile, RecordFolder + "/c_y0.yaml", RecordFolder + "/c_y1.yaml", RegionFile("c"), RootFile}
	pfiles, afiles = notReportFiles(pfiles), notReportFiles(afiles)
	if !reflect.DeepEqual(pfiles, want) || !reflect.DeepEqual(afiles, want) {
		t.Fatalf("files %v and %v, want %v", pfiles, afiles, want)
	}
	p, _ := os.ReadFile(filepath.Join(pdir, RegionFile("c")))
	a, _ := os.ReadFile(filepath.Join(adir, RegionFile("c")))
	if len(p) == 0 || !bytes.Equal(p, a) {
		t.Errorf("region tables differ:\nplain\n%s\nanalysis\n%s", p, a)
	}
	for _, key := range []string{"c/counts_y0", "c/counts_y1", "c/density_y0", "c/density_y1"} {
		hp, err := rootio.ReadHist1D(filepath.Join(pdir, RootFile), key)
		if err != nil {
			t.Fatal(err)
		}
		ha, err := rootio.ReadHist1D(filepath.Join(adir, RootFile), key)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(hp.SumW, ha.SumW) || !reflect.DeepEqual(hp.SumW2, ha.SumW2) || !reflect.DeepEqual(hp.Edges, ha.Edges) {
			t.Errorf("%s differs: %v %v, %v %v", key, hp.SumW, hp.SumW2, ha.SumW, ha.SumW2)
		}
	}
	for _, key := range []string{"c/counts2d", "c/density2d"} {
		hp, err := rootio.ReadHist2D(filepath.Join(pdir, RootFile), key)
		if err != nil {
			t.Fatal(err)
		}
		ha, err := rootio.ReadHist2D(filepath.Join(adir, RootFile), key)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(hp.SumW, ha.SumW) || !reflect.DeepEqual(hp.SumW2, ha.SumW2) {
			t.Errorf("%s differs", key)
		}
	}
	// Bin (y1, pt1) has volume 2 × 20: its density is its estimate / 40.
	h, err := rootio.ReadHist1D(filepath.Join(pdir, RootFile), "c/density_y1")
	if err != nil {
		t.Fatal(err)
	}
	g := s.Global(0, 1, 1)
	if h.SumW[2] != plain.Estimate[g]/40 || h.SumW[3] != 0 {
		t.Errorf("density_y1 = %v, want bin 2 = %v and no density in the overflow", h.SumW, plain.Estimate[g]/40)
	}
	// Without a truth binning the regions and root formats are left out.
	_, files := writeFolder(t, parent, "unbinned", plain, nil)
	if files = notReportFiles(files); !reflect.DeepEqual(files, []string{JSONFile, CSVFile, TruthBinsFile}) {
		t.Errorf("without a truth binning: %v", files)
	}
}

// The registry: json first, then by name; all formats are the
// default; an unknown name is refused with the known ones; a name is
// registered once.
func TestRegistry(t *testing.T) {
	want := []string{"json", "csv", "derived", "diagnostics", "record", "regions", "report", "root", "tau-scan"}
	if got := Formats(); !reflect.DeepEqual(got, []string{"json", "csv", "derived", "diagnostics", "iterations", "record", "regions", "report", "root", "tau-scan"}) {
		t.Errorf("Formats() = %v", got)
	}
	if got := DefaultFormats(); !reflect.DeepEqual(got, want) {
		t.Errorf("DefaultFormats() = %v, want %v", got, want)
	}
	if err := CheckFormats([]string{"csv", "pdf"}); err == nil || err.Error() != `unknown format "pdf" (known: json, csv, derived, diagnostics, iterations, record, regions, report, root, tau-scan)` {
		t.Errorf("CheckFormats: %v", err)
	}
	defer func() {
		if recover() == nil {
			t.Error("a second csv format was registered")
		}
	}()
	Register(Writer{Name: "csv", Write: writeJSONFormat})
}

// The scan of tau is written as a table, one row per tau, the chosen one
// marked; without a scan nothing is written.
func TestTauScan(t *testing.T) {
	tk := &Tikhonov{Tau: 0.1, Criterion: "lcurve", Scan: []TauPoint{
		{Tau: 0.01, ResidualNorm: 5, PenaltyNorm: 100, Converged: true},
		{Tau: 0.1, ResidualNorm: 6, PenaltyNorm: 20, Curvature: 3.5, Converged: true},
		{Tau: 1, ResidualNorm: 30, PenaltyNorm: 2, Converged: false, CGIterations: 17},
	}}
	var b strings.Builder
	if err := WriteTauScan(&b, tk); err != nil {
		t.Fatal(err)
	}
	want := "tau,residual_norm,penalty_norm,curvature,average_global_correlation,converged,cg_iterations,chosen,correlation_error\n" +
		"0.01,5,100,0,,true,0,false,\n0.1,6,20,3.5,,true,0,true,\n1,30,2,0,,false,17,false,\n"
	if b.String() != want {
		t.Errorf("tau-scan.csv:\n%s\nwant\n%s", b.String(), want)
	}
	// An estimated correlation carries its standard error.
	tk.Criterion, tk.CorrelationSample = "correlation", 32
	tk.Scan = tk.Scan[1:2]
	tk.Scan[0].Correlation, tk.Scan[0].CorrelationError = 0.75, 0.02
	b.Reset()
	if err := WriteTauScan(&b, tk); err != nil {
		t.Fatal(err)
	}
	if !strings.HasSuffix(b.String(), "\n0.1,6,20,3.5,0.75,true,0,true,0.02\n") {
		t.Errorf("estimated correlation:\n%s", b.String())
	}
}
