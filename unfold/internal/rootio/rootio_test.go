package rootio

import (
	"bufio"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"

	"go-hep.org/x/hep/groot"
	"go-hep.org/x/hep/groot/rhist"
	"go-hep.org/x/hep/groot/riofs"
)

// hepDir locates the go-hep module, whose test files were written by ROOT
// itself; the test is skipped when the module is not in the module cache.
func hepDir(t *testing.T) string {
	t.Helper()
	hepOnce.Do(func() {
		out, err := exec.Command("go", "list", "-m", "-f", "{{.Dir}}", "go-hep.org/x/hep").Output()
		hepPath, hepErr = strings.TrimSpace(string(out)), err
		if err == nil && hepPath != "" {
			_, hepErr = os.Stat(hepPath)
		}
	})
	if hepErr != nil || hepPath == "" {
		t.Skipf("go-hep module not found in the module cache (run go mod download): %v", hepErr)
	}
	dir := hepPath
	return filepath.Join(dir, "hbook", "rootcnv", "testdata")
}

var (
	hepOnce sync.Once
	hepPath string
	hepErr  error
)

// readData reads the whitespace-separated numbers of a go-hep data file,
// one event per line.
func readData(t *testing.T, path string) [][]float64 {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out [][]float64
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var row []float64
		for _, s := range strings.Fields(sc.Text()) {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatal(err)
			}
			row = append(row, v)
		}
		out = append(out, row)
	}
	return out
}

// refill32 accumulates like a TH1F/TH2F: contents summed in float32
// (TArrayF fArray), squared weights in float64 (TArrayD fSumw2); this is
// ROOT's storage (from memory of TH1F/TArrayF).
type refill32 struct{ sumw []float32 }

func close32(a, b float64) bool { return math.Abs(a-b) <= 1e-6*math.Max(1, math.Abs(b)) }

// TestReadGaussH2 reads hbook/rootcnv/testdata/gauss-h2.root, written by
// ROOT with go-hep's make-root-h2.py: TH2F/TH2D h2f, h2d (3x3 uniform bins
// on [0,3]x[0,3]) and h2f-var, h2d-var (edges 0, 1.5, 2, 3 on both axes),
// each filled with the 10000 (x, y, w) lines of gauss-2d-data.dat and then
// once in each of the eight flow regions with weights 101..108. The
// reference is an independent refill of the same events with ROOT's bin
// rule (a bin holds [low, high); below the first edge is underflow, at or
// above the last overflow: TAxis::FindBin, common practice). Every cell,
// the 16 flow cells included, must match; the eight flow fills put
// distinct weights in all eight flow regions, so any misplaced flow cell
// shows.
func TestReadGaussH2(t *testing.T) {
	dir := hepDir(t)
	data := readData(t, filepath.Join(dir, "gauss-2d-data.dat"))
	flows := [][3]float64{{5, 5, 101}, {0, 5, 102}, {-5, 5, 103}, {-5, 0, 104}, {-5, -5, 105}, {0, -5, 106}, {5, -5, 107}, {5, 0, 108}}
	for _, tc := range []struct {
		key    string
		edges  []float64
		single bool // TH2F
	}{
		{"h2d", []float64{0, 1, 2, 3}, false},
		{"h2f", []float64{0, 1, 2, 3}, true},
		{"h2d-var", []float64{0, 1.5, 2, 3}, false},
		{"h2f-var", []float64{0, 1.5, 2, 3}, true},
	} {
		h, err := ReadHist2D(filepath.Join(dir, "gauss-h2.root"), tc.key)
		if err != nil {
			t.Fatal(err)
		}
		if fmt.Sprint(h.XEdges) != fmt.Sprint(tc.edges) || fmt.Sprint(h.YEdges) != fmt.Sprint(tc.edges) {
			t.Fatalf("%s: edges %v %v, want %v", tc.key, h.XEdges, h.YEdges, tc.edges)
		}
		ref := NewHist2D(tc.key, tc.edges, tc.edges)
		sum32 := make([]float32, len(ref.SumW))
		fill := func(x, y, w float64) {
			ref.Fill(x, y, w)
			sum32[ref.Index(cellOf(tc.edges, x), cellOf(tc.edges, y))] += float32(w)
		}
		for _, ev := range data {
			fill(ev[0], ev[1], ev[2])
		}
		for _, ev := range flows {
			fill(ev[0], ev[1], ev[2])
		}
		if h.Entries != 10008 || ref.Entries != 10008 {
			t.Errorf("%s: entries %v, reference %v, want 10008", tc.key, h.Entries, ref.Entries)
		}
		if !h.HasSumW2 {
			t.Errorf("%s: Sumw2 not found", tc.key)
		}
		for iy := 0; iy <= 4; iy++ {
			for ix := 0; ix <= 4; ix++ {
				i := h.Index(ix, iy)
				want := ref.SumW[i]
				if tc.single {
					want = float64(sum32[i])
				}
				if h.SumW[i] != want {
					t.Errorf("%s: cell (%d,%d): sumw %v, want %v", tc.key, ix, iy, h.SumW[i], want)
				}
				if !close32(h.SumW2[i], ref.SumW2[i]) {
					t.Errorf("%s: cell (%d,%d): sumw2 %v, want %v", tc.key, ix, iy, h.SumW2[i], ref.SumW2[i])
				}
			}
		}
		// The flow fills by name (make-root-h2.py): NE lands in (4,4), N in (1,4) since
		// x=0 is the first bin's low edge, NW (0,4), W (0,1), SW (0,0), S (1,0), SE (4,0), E (4,1).
		for _, c := range []struct {
			ix, iy int
			w      float64
		}{{4, 4, 101}, {1, 4, 102}, {0, 4, 103}, {0, 1, 104}, {0, 0, 105}, {1, 0, 106}, {4, 0, 107}, {4, 1, 108}} {
			if h.SumW2[h.Index(c.ix, c.iy)] < c.w*c.w {
				t.Errorf("%s: flow cell (%d,%d) lacks the fill of weight %v: sumw2 %v", tc.key, c.ix, c.iy, c.w, h.SumW2[h.Index(c.ix, c.iy)])
			}
		}
	}
}

// TestReadGaussH1 reads hbook/rootcnv/testdata/gauss-h1.root, written by
// ROOT with go-hep's make-root-h1.py: h1d (TH1D) and h1f (TH1F) with 10
// uniform bins on [-4, 4], h1d-var and h1f-var (both TH1F) with edges
// -4, -3.2, ..., 4, each filled with the 10004 (x, w) lines of
// gauss-1d-data.dat. The reference is an independent refill.
func TestReadGaussH1(t *testing.T) {
	dir := hepDir(t)
	data := readData(t, filepath.Join(dir, "gauss-1d-data.dat"))
	uni := make([]float64, 11)
	for i := range uni {
		uni[i] = -4 + float64(i)*0.8
	}
	uni[10] = 4
	vare := []float64{-4.0, -3.2, -2.4, -1.6, -0.8, 0, +0.8, +1.6, +2.4, +3.2, +4.0}
	for _, tc := range []struct {
		key    string
		edges  []float64
		single bool
	}{
		{"h1d", uni, false}, {"h1f", uni, true}, {"h1d-var", vare, true}, {"h1f-var", vare, true},
	} {
		h, err := ReadHist1D(filepath.Join(dir, "gauss-h1.root"), tc.key)
		if err != nil {
			t.Fatal(err)
		}
		for i, e := range h.Edges {
			if math.Abs(e-tc.edges[i]) > 1e-6 { // h1f-var stores float32 edges
				t.Fatalf("%s: edges %v, want %v", tc.key, h.Edges, tc.edges)
			}
		}
		ref := NewHist1D(tc.key, h.Edges)
		sum32 := make([]float32, len(ref.SumW))
		for _, ev := range data {
			ref.Fill(ev[0], ev[1])
			sum32[cellOf(h.Edges, ev[0])] += float32(ev[1])
		}
		if h.Entries != 10004 {
			t.Errorf("%s: entries %v, want 10004", tc.key, h.Entries)
		}
		for i := range h.SumW {
			want := ref.SumW[i]
			if tc.single {
				want = float64(sum32[i])
			}
			if !close32(h.SumW[i], want) || (!tc.single && h.SumW[i] != want) {
				t.Errorf("%s: cell %d: sumw %v, want %v", tc.key, i, h.SumW[i], want)
			}
			if !close32(h.SumW2[i], ref.SumW2[i]) {
				t.Errorf("%s: cell %d: sumw2 %v, want %v", tc.key, i, h.SumW2[i], ref.SumW2[i])
			}
		}
		// The generating data end with two underflow fills of weight 1 and
		// two overflow fills of weight 2 (ecosystem check: 2±1.414, 4±2.828).
		if h.SumW[0] != 2 || h.SumW2[0] != 2 || h.SumW[11] != 4 || h.SumW2[11] != 8 {
			t.Errorf("%s: flows %v±%v, %v±%v; want 2±√2, 4±√8", tc.key, h.SumW[0], h.SumW2[0], h.SumW[11], h.SumW2[11])
		}
	}
}

// TestReadDirs reads the TH1F at dir1/dir11/h1 of groot/testdata/
// dirs-6.14.00.root, written by ROOT 6.14 with go-hep's gen-dir.go macro:
// TH1F("h1", "h1", 100, 0, 100) filled by FillRandom("gaus", 5), so 5
// entries of weight 1 and uniform unit bins.
func TestReadDirs(t *testing.T) {
	path := filepath.Join(hepDir(t), "..", "..", "..", "groot", "testdata", "dirs-6.14.00.root")
	keys, err := Keys(path)
	if err != nil {
		t.Fatal(err)
	}
	if len(keys) != 1 || keys[0] != (Key{Path: "dir1/dir11/h1", Class: "TH1F"}) {
		t.Errorf("keys %v", keys)
	}
	h, err := ReadHist1D(path, "dir1/dir11/h1")
	if err != nil {
		t.Fatal(err)
	}
	if h.NBins() != 100 || h.Name != "h1" || h.Title != "h1" {
		t.Fatalf("nbins %d name %q title %q", h.NBins(), h.Name, h.Title)
	}
	for i, e := range h.Edges {
		if e != float64(i) {
			t.Fatalf("edge %d = %v", i, e)
		}
	}
	var sum float64
	for _, v := range h.SumW {
		sum += v
	}
	if h.Entries != 5 || sum != 5 {
		t.Errorf("entries %v, sum of cells %v; want 5 and 5", h.Entries, sum)
	}
	// The macro does not call Sumw2(): the variances are the counts.
	if h.HasSumW2 {
		t.Errorf("HasSumW2 true for a histogram filled without Sumw2")
	}
	for i := range h.SumW {
		if h.SumW2[i] != h.SumW[i] {
			t.Errorf("cell %d: sumw2 %v, want the count %v", i, h.SumW2[i], h.SumW[i])
		}
	}
	if _, err := ReadHist2D(path, "dir1/dir11/h1"); err == nil || !strings.Contains(err.Error(), "not a 2-D histogram") {
		t.Errorf("TH1F read as 2-D: %v", err)
	}
	// A missing key: what the file holds, not the ROOT library's message
	// (which names the file by the temporary path it was written under).
	if _, err := ReadHist1D(path, "dir1/h9"); err == nil || !strings.Contains(err.Error(), `no object "dir1/h9" (the file holds `) ||
		!strings.Contains(err.Error(), "dir1/dir11/h1") || strings.Contains(err.Error(), "riofs") {
		t.Errorf("missing key: %v", err)
	}
}

// distinct2D returns a histogram whose every cell, flows included, holds
// a different content and a different sum of squared weights.
func distinct2D(name string, xe, ye []float64) *Hist2D {
	h := NewHist2D(name, xe, ye)
	for i := range h.SumW {
		h.SumW[i] = float64(i+1) * 1.25
		h.SumW2[i] = float64(i+1)*0.5 + 1000
	}
	h.Title = "distinct cells"
	h.Entries = 1234
	return h
}

func TestWriteReadRoundTrip(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out.root")
	h2u := distinct2D("resp", []float64{0, 1, 2, 3, 4}, []float64{-1, 0, 1})
	h2v := distinct2D("sub/var", []float64{0, 0.5, 2, 10}, []float64{1, 2, 4, 8, 16})
	h2v.Entries = 0
	h1 := NewHist1D("unfolded", []float64{0, 10, 20, 50, 100})
	for i := range h1.SumW {
		h1.SumW[i] = float64(10 - i)
		h1.SumW2[i] = float64(i * i)
	}
	if err := WriteFile(path, []*Hist1D{h1}, []*Hist2D{h2u, h2v}); err != nil {
		t.Fatal(err)
	}
	// Readable by others, like any other result file (not the 0600 of
	// the temporary file it was written as).
	if st, err := os.Stat(path); err != nil {
		t.Fatal(err)
	} else if st.Mode().Perm() != 0o644 {
		t.Errorf("written file has mode %v; want -rw-r--r--", st.Mode())
	}
	keys, err := Keys(path)
	if err != nil {
		t.Fatal(err)
	}
	if fmt.Sprint(keys) != "[{unfolded TH1D} {resp TH2D} {sub/var TH2D}]" {
		t.Errorf("keys %v", keys)
	}
	for _, want := range []*Hist2D{h2u, h2v} {
		got, err := ReadHist2D(path, want.Name)
		if err != nil {
			t.Fatal(err)
		}
		if fmt.Sprint(got.XEdges, got.YEdges) != fmt.Sprint(want.XEdges, want.YEdges) {
			t.Errorf("%s: edges %v %v", want.Name, got.XEdges, got.YEdges)
		}
		for i := range want.SumW {
			if got.SumW[i] != want.SumW[i] || got.SumW2[i] != want.SumW2[i] {
				nx := len(want.XEdges) + 1
				t.Errorf("%s: cell (%d,%d): %v/%v, want %v/%v", want.Name, i%nx, i/nx, got.SumW[i], got.SumW2[i], want.SumW[i], want.SumW2[i])
			}
		}
	}
	g1, err := ReadHist1D(path, "unfolded")
	if err != nil {
		t.Fatal(err)
	}
	if fmt.Sprint(g1.SumW, g1.SumW2, g1.Edges) != fmt.Sprint(h1.SumW, h1.SumW2, h1.Edges) {
		t.Errorf("1-D round trip: %v %v %v", g1.SumW, g1.SumW2, g1.Edges)
	}
	if tmp, _ := filepath.Glob(filepath.Join(dir, ".*tmp*")); len(tmp) > 0 {
		t.Errorf("temporary files left: %v", tmp)
	}
}

// TestWrittenStatistics checks the statistics members of written TH2D and
// TH1D objects, read back through go-hep's rhist accessors, against sums
// over the in-range bins at their centres (ROOT's TH1::GetStats recomputes
// them that way from the bins, from memory of ROOT's TH1 documentation),
// and fEntries against the given count or, when 0, the effective entries
// (ΣW)²/ΣW² (TH1::GetEffectiveEntries, ROOT documentation).
func TestWrittenStatistics(t *testing.T) {
	path := filepath.Join(t.TempDir(), "stats.root")
	xe, ye := []float64{0, 1, 3}, []float64{10, 20, 40}
	h := distinct2D("h", xe, ye)
	h.Entries = 0
	h1 := NewHist1D("g", []float64{-1, 0, 2})
	copy(h1.SumW, []float64{100, 3, 5, 200})
	copy(h1.SumW2, []float64{1, 2, 4, 8})
	h1.Entries = 77
	if err := WriteFile(path, []*Hist1D{h1}, []*Hist2D{h}); err != nil {
		t.Fatal(err)
	}
	f, err := groot.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r2, err := riofs.Get[*rhist.H2D](f, "h")
	if err != nil {
		t.Fatal(err)
	}
	// In-range cells of the 2x2 grid with centres x = 0.5, 2 and y = 15, 30.
	var sw, sw2, swx, swx2, swy, swy2, swxy, all, all2 float64
	xc, yc := []float64{0.5, 2}, []float64{15, 30}
	for iy := 1; iy <= 2; iy++ {
		for ix := 1; ix <= 2; ix++ {
			w := h.SumW[h.Index(ix, iy)]
			x, y := xc[ix-1], yc[iy-1]
			sw += w
			sw2 += h.SumW2[h.Index(ix, iy)]
			swx += w * x
			swx2 += w * x * x
			swy += w * y
			swy2 += w * y * y
			swxy += w * x * y
		}
	}
	for i := range h.SumW {
		all += h.SumW[i]
		all2 += h.SumW2[i]
	}
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"fTsumw", r2.SumW(), sw}, {"fTsumw2", r2.SumW2(), sw2}, {"fTsumwx", r2.SumWX(), swx},
		{"fTsumwx2", r2.SumWX2(), swx2}, {"fTsumwy", r2.SumWY(), swy}, {"fTsumwy2", r2.SumWY2(), swy2},
		{"fTsumwxy", r2.SumWXY(), swxy}, {"fEntries", r2.Entries(), all * all / all2},
	} {
		if math.Abs(c.got-c.want) > 1e-12*math.Abs(c.want) {
			t.Errorf("TH2D %s = %v, want %v", c.name, c.got, c.want)
		}
	}
	// go-hep's own global-index accessor agrees with our layout.
	for i := range h.SumW {
		if r2.XBinContent(i) != h.SumW[i] {
			t.Errorf("XBinContent(%d) = %v, want %v", i, r2.XBinContent(i), h.SumW[i])
		}
	}
	r1, err := riofs.Get[*rhist.H1D](f, "g")
	if err != nil {
		t.Fatal(err)
	}
	if r1.Entries() != 77 || r1.SumW() != 8 || r1.SumW2() != 6 || r1.SumWX() != -0.5*3+1*5 || r1.SumWX2() != 0.25*3+1*5 {
		t.Errorf("TH1D stats: entries %v sumw %v sumw2 %v sumwx %v sumwx2 %v", r1.Entries(), r1.SumW(), r1.SumW2(), r1.SumWX(), r1.SumWX2())
	}
	if r1.XBinContent(0) != 100 || r1.XBinContent(3) != 200 {
		t.Errorf("TH1D flows %v %v", r1.XBinContent(0), r1.XBinContent(3))
	}
}

func TestWriteErrors(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "bad.root")
	good := NewHist1D("a", []float64{0, 1})
	for _, tc := range []struct {
		h1   []*Hist1D
		h2   []*Hist2D
		want string
	}{
		{[]*Hist1D{{Name: "x", Edges: []float64{0, 1}, SumW: []float64{1, 2}, SumW2: []float64{1, 2, 3}}}, nil, "need 3 cells"},
		{[]*Hist1D{NewHist1D("x", []float64{0, 2, 1})}, nil, "not increasing"},
		{[]*Hist1D{NewHist1D("x", []float64{0})}, nil, "need at least 2"},
		{[]*Hist1D{good, good}, nil, "used twice"},
		{[]*Hist1D{NewHist1D("", []float64{0, 1})}, nil, "bad histogram name"},
		{nil, []*Hist2D{{Name: "m", XEdges: []float64{0, 1}, YEdges: []float64{0, 1}, SumW: make([]float64, 9), SumW2: make([]float64, 8)}}, "need 9 cells"},
		{nil, []*Hist2D{NewHist2D("m", []float64{0, 1}, []float64{0, math.Inf(1)})}, "finite"},
		{nil, []*Hist2D{NewHist2D("m", []float64{0}, []float64{0, 1})}, "need at least 2 edges per axis"},
		{nil, []*Hist2D{NewHist2D("m", []float64{1, 0}, []float64{0, 1})}, "x: edges not increasing"},
		{[]*Hist1D{good}, []*Hist2D{NewHist2D("a", []float64{0, 1}, []float64{0, 1})}, `name "a" used twice`},
		{[]*Hist1D{NewHist1D("d//h", []float64{0, 1})}, nil, "bad histogram name"},
		{[]*Hist1D{NewHist1D("/h", []float64{0, 1})}, nil, "bad histogram name"},
		{[]*Hist1D{NewHist1D("d/", []float64{0, 1})}, nil, "bad histogram name"},
		{[]*Hist1D{NewHist1D("h;1", []float64{0, 1})}, nil, "bad histogram name"},
	} {
		err := WriteFile(path, tc.h1, tc.h2)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("error %v, want %q", err, tc.want)
		}
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("failed writes left files: %v", ents)
	}
}

func TestReadErrors(t *testing.T) {
	dir := t.TempDir()
	if _, err := ReadHist1D(filepath.Join(dir, "none.root"), "h"); err == nil || !strings.Contains(err.Error(), "none.root") {
		t.Errorf("missing file: %v", err)
	}
	path := filepath.Join(dir, "h.root")
	h := distinct2D("h", []float64{0, 1, 2}, []float64{0, 1})
	if err := WriteFile(path, nil, []*Hist2D{h}); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadHist1D(path, "h"); err == nil || !strings.Contains(err.Error(), "is a TH2D, not a 1-D histogram") {
		t.Errorf("TH2D read as 1-D: %v", err)
	}
	data, _ := os.ReadFile(path)
	for _, frac := range []float64{0.1, 0.5, 0.9} {
		cut := filepath.Join(dir, fmt.Sprintf("cut%g.root", frac))
		os.WriteFile(cut, data[:int(frac*float64(len(data)))], 0o644)
		if _, err := ReadHist2D(cut, "h"); err == nil || !strings.Contains(err.Error(), cut) {
			t.Errorf("truncated at %g: %v", frac, err)
		}
	}
}

// TestReadProfileRefused checks that a TProfile (groot/testdata/
// tprofile.root), whose cells hold sums of w*y rather than counts, is not
// read as a histogram.
func TestReadProfileRefused(t *testing.T) {
	path := filepath.Join(hepDir(t), "..", "..", "..", "groot", "testdata", "tprofile.root")
	keys, err := Keys(path)
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, k := range keys {
		var err error
		switch k.Class {
		case "TProfile":
			_, err = ReadHist1D(path, k.Path)
		case "TProfile2D":
			_, err = ReadHist2D(path, k.Path)
		default:
			continue
		}
		n++
		if err == nil || !strings.Contains(err.Error(), "is a "+k.Class+", not a") {
			t.Errorf("%s %s: error %v", k.Class, k.Path, err)
		}
	}
	if n == 0 {
		t.Errorf("no profiles found in %s: %v", path, keys)
	}
}

// TestFillCells checks Fill's cell choice against ROOT's bin rule
// (TAxis::FindBin: a bin holds [low, high), below the first edge is the
// underflow, at or above the last edge and NaN the overflow; from memory of
// ROOT's TAxis source).
func TestFillCells(t *testing.T) {
	h := NewHist1D("h", []float64{0, 1, 2})
	for _, x := range []float64{-1, 0, 0.5, 1, 2, 3, math.NaN(), math.Inf(-1), math.Inf(1)} {
		h.Fill(x, 1)
	}
	// underflow: -1, -Inf; bin 1: 0, 0.5; bin 2: 1; overflow: 2, 3, NaN, +Inf
	if fmt.Sprint(h.SumW) != "[2 2 1 4]" || h.Entries != 9 {
		t.Errorf("cells %v entries %v", h.SumW, h.Entries)
	}
}
