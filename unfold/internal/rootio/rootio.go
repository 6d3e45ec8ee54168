package rootio

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"

	"go-hep.org/x/hep/groot"
	"go-hep.org/x/hep/groot/rbytes"
	"go-hep.org/x/hep/groot/rhist"
	"go-hep.org/x/hep/groot/riofs"
	"go-hep.org/x/hep/groot/root"
	"go-hep.org/x/hep/groot/rtypes"
	"go-hep.org/x/hep/hbook"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/internal/atomicfile"
)

// BinOf maps a ROOT cell number along an axis of n bins (0 the
// underflow, 1..n the bins, n+1 the overflow) to a bin number of package
// binning (binning.UnderflowBin, 0..n-1, binning.OverflowBin).
func BinOf(c, n int) int {
	switch {
	case c == 0:
		return binning.UnderflowBin
	case c == n+1:
		return binning.OverflowBin
	}
	return c - 1
}

// Hist1D is a one-dimensional histogram in ROOT's cell layout.
type Hist1D struct {
	Name, Title string
	Edges       []float64 // nbins+1 increasing bin edges
	SumW        []float64 // nbins+2 cells: underflow, bins, overflow
	SumW2       []float64 // nbins+2 cells: sums of squared weights
	Entries     float64   // number of fills; 0 on writing: the effective entries (ΣW)²/ΣW²
	HasSumW2    bool      // on reading: whether the file stored per-bin sums of squared weights
}

// Hist2D is a two-dimensional histogram in ROOT's cell layout.
type Hist2D struct {
	Name, Title    string
	XEdges, YEdges []float64 // nx+1 and ny+1 increasing bin edges
	SumW           []float64 // (nx+2)*(ny+2) cells, cell (ix,iy) at ix + (nx+2)*iy
	SumW2          []float64 // same layout
	Entries        float64
	HasSumW2       bool
}

// NewHist1D returns an empty histogram with the given edges.
func NewHist1D(name string, edges []float64) *Hist1D {
	n := len(edges) + 1
	return &Hist1D{Name: name, Edges: append([]float64(nil), edges...), SumW: make([]float64, n), SumW2: make([]float64, n), HasSumW2: true}
}

// NewHist2D returns an empty histogram with the given edges.
func NewHist2D(name string, xedges, yedges []float64) *Hist2D {
	n := (len(xedges) + 1) * (len(yedges) + 1)
	return &Hist2D{Name: name, XEdges: append([]float64(nil), xedges...), YEdges: append([]float64(nil), yedges...),
		SumW: make([]float64, n), SumW2: make([]float64, n), HasSumW2: true}
}

// NBins returns the number of bins, flows excluded.
func (h *Hist1D) NBins() int { return len(h.Edges) - 1 }

// NBins returns the numbers of bins along x and y, flows excluded.
func (h *Hist2D) NBins() (nx, ny int) { return len(h.XEdges) - 1, len(h.YEdges) - 1 }

// Index returns the global cell index of cell (ix, iy), 0 <= ix <= nx+1,
// 0 <= iy <= ny+1.
func (h *Hist2D) Index(ix, iy int) int { return ix + (len(h.XEdges)+1)*iy }

// Fill adds weight w at x, in the cell ROOT's TAxis::FindBin chooses: a
// value equal to an inner edge goes to the bin above it, x < first edge to
// the underflow, x >= last edge and NaN to the overflow (from memory of
// ROOT's TAxis source: the test is !(x < xmax)).
func (h *Hist1D) Fill(x, w float64) {
	i := cellOf(h.Edges, x)
	h.SumW[i] += w
	h.SumW2[i] += w * w
	h.Entries++
}

// Fill adds weight w at (x, y) as Hist1D.Fill does along each axis.
func (h *Hist2D) Fill(x, y, w float64) {
	i := h.Index(cellOf(h.XEdges, x), cellOf(h.YEdges, y))
	h.SumW[i] += w
	h.SumW2[i] += w * w
	h.Entries++
}

func cellOf(edges []float64, x float64) int {
	n := len(edges) - 1
	if x < edges[0] {
		return 0
	}
	if !(x < edges[n]) {
		return n + 1
	}
	lo, hi := 0, n // edges[lo] <= x < edges[hi]
	for hi-lo > 1 {
		m := (lo + hi) / 2
		if x >= edges[m] {
			lo = m
		} else {
			hi = m
		}
	}
	return lo + 1
}

// h1Reader is what ReadHist1D needs from a ROOT 1-D histogram.
type h1Reader interface {
	rhist.H1
	NbinsX() int
	XAxis() rhist.Axis
	XBinContent(i int) float64
}

// h2Reader is what ReadHist2D needs from a ROOT 2-D histogram.
type h2Reader interface {
	rhist.H2
	NbinsX() int
	NbinsY() int
	XAxis() rhist.Axis
	YAxis() rhist.Axis
	XBinContent(i int) float64
}

// ReadHist1D reads the 1-D histogram at key ("h" or "dir/sub/h") of a ROOT file.
func ReadHist1D(path, key string) (h *Hist1D, err error) {
	r, closeFn, err := getAs[h1Reader](path, key, "a 1-D histogram (TH1D, TH1F, TH1I)")
	if err != nil {
		return nil, err
	}
	defer closeFn()
	defer recoverDamaged(path, key, &err)
	n := r.NbinsX()
	edges, err := axisEdges(r.XAxis(), n)
	if err != nil {
		return nil, fmt.Errorf("rootio: %s: %q: x axis: %w", path, key, err)
	}
	h = &Hist1D{Name: r.Name(), Title: r.Title(), Edges: edges, Entries: r.Entries()}
	if h.SumW, h.SumW2, h.HasSumW2, err = cells(r, n+2); err != nil {
		return nil, fmt.Errorf("rootio: %s: %q: %w", path, key, err)
	}
	return h, nil
}

// ReadHist2D reads the 2-D histogram at key of a ROOT file.
func ReadHist2D(path, key string) (h *Hist2D, err error) {
	r, closeFn, err := getAs[h2Reader](path, key, "a 2-D histogram (TH2D, TH2F, TH2I)")
	if err != nil {
		return nil, err
	}
	defer closeFn()
	defer recoverDamaged(path, key, &err)
	nx, ny := r.NbinsX(), r.NbinsY()
	xe, err := axisEdges(r.XAxis(), nx)
	if err != nil {
		return nil, fmt.Errorf("rootio: %s: %q: x axis: %w", path, key, err)
	}
	ye, err := axisEdges(r.YAxis(), ny)
	if err != nil {
		return nil, fmt.Errorf("rootio: %s: %q: y axis: %w", path, key, err)
	}
	h = &Hist2D{Name: r.Name(), Title: r.Title(), XEdges: xe, YEdges: ye, Entries: r.Entries()}
	if h.SumW, h.SumW2, h.HasSumW2, err = cells(r, (nx+2)*(ny+2)); err != nil {
		return nil, fmt.Errorf("rootio: %s: %q: %w", path, key, err)
	}
	return h, nil
}

// cellReader is what cells needs from a ROOT histogram.
type cellReader interface {
	XBinContent(i int) float64
	SumW2s() []float64
}

// cells reads the n cells (flow cells included, in ROOT's order) of a
// histogram: the sums of weights (fArray) and the sums of squared
// weights, which are fSumw2 when the histogram stores it (stored true)
// and |fArray| otherwise.
func cells(r cellReader, n int) (sumw, sumw2 []float64, stored bool, err error) {
	sumw = make([]float64, n)
	for i := range sumw {
		sumw[i] = r.XBinContent(i)
	}
	sumw2 = make([]float64, n)
	switch s := r.SumW2s(); len(s) {
	case 0:
		for i, v := range sumw {
			sumw2[i] = math.Abs(v)
		}
		return sumw, sumw2, false, nil
	case n:
		copy(sumw2, s)
		return sumw, sumw2, true, nil
	default:
		return nil, nil, false, fmt.Errorf("fSumw2 has %d cells, fArray has %d", len(s), n)
	}
}

// axisEdges returns the n+1 edges of an axis: fXbins if set, else n uniform
// bins from fXmin to fXmax computed as ROOT's TAxis::GetBinLowEdge does,
// xmin + i*((xmax-xmin)/n) (from memory of ROOT's TAxis source).
func axisEdges(a rhist.Axis, n int) ([]float64, error) {
	if n < 1 {
		return nil, fmt.Errorf("%d bins", n)
	}
	if xb := a.XBins(); len(xb) > 0 {
		if len(xb) != n+1 {
			return nil, fmt.Errorf("%d edges for %d bins", len(xb), n)
		}
		e := append([]float64(nil), xb...)
		return e, checkEdges(e)
	}
	lo, hi := a.XMin(), a.XMax()
	w := (hi - lo) / float64(n)
	e := make([]float64, n+1)
	for i := range n {
		e[i] = lo + float64(i)*w
	}
	e[n] = hi
	return e, checkEdges(e)
}

func checkEdges(e []float64) error {
	for i := 1; i < len(e); i++ {
		if !(e[i] > e[i-1]) {
			return fmt.Errorf("edges not increasing at %d: %g, %g", i, e[i-1], e[i])
		}
	}
	if math.IsInf(e[0], 0) || math.IsInf(e[len(e)-1], 0) || e[0] != e[0] {
		return errors.New("edges must be finite")
	}
	return nil
}

func get(path, key string) (root.Object, func(), error) {
	f, err := openFile(path)
	if err != nil {
		return nil, nil, err
	}
	// go-hep decodes an object of a class it does not know from the
	// file's streamer information, and with damaged information that can
	// hang (v0.36.0 builds the streamers of classes that refer to one
	// another under a sync.Once each): only classes it knows are read.
	for _, k := range f.Keys() {
		if k.Name() == key && !rtypes.Factory.HasKey(k.ClassName()) {
			f.Close()
			return nil, nil, fmt.Errorf("rootio: %s: %q is a %s, a class that cannot be read here", path, key, k.ClassName())
		}
	}
	obj, err := func() (obj root.Object, err error) {
		defer recoverDamaged(path, key, &err)
		return riofs.Dir(f).Get(key)
	}()
	if err != nil {
		defer f.Close()
		// go-hep's message names the file by the path it was written
		// under, which may be a temporary name: say what the file holds
		// instead, unless the key is there and its object is damaged.
		var have []string
		keys, lerr := keysOf(f)
		for _, k := range keys {
			if k.Path == key {
				return nil, nil, fmt.Errorf("rootio: %s: %q cannot be read: %w", path, key, err)
			}
			have = append(have, k.Path)
		}
		if lerr != nil || len(have) == 0 {
			return nil, nil, fmt.Errorf("rootio: %s: no object %q", path, key)
		}
		return nil, nil, fmt.Errorf("rootio: %s: no object %q (the file holds %s)", path, key, strings.Join(have, ", "))
	}
	return obj, func() { f.Close() }, nil
}

// getAs returns the object at key of the ROOT file at path as a T, and
// the function that closes the file; what names T in the message when
// the object is something else.
func getAs[T root.Object](path, key, what string) (T, func(), error) {
	var zero T
	obj, closeFn, err := get(path, key)
	if err != nil {
		return zero, nil, err
	}
	r, ok := obj.(T)
	if !ok {
		closeFn()
		return zero, nil, fmt.Errorf("rootio: %s: %q is a %s, not %s", path, key, obj.Class(), what)
	}
	return r, closeFn, nil
}

func openFile(path string) (f *riofs.File, err error) {
	defer func() {
		if p := recover(); p != nil {
			f, err = nil, fmt.Errorf("rootio: %s: damaged ROOT file: %v", path, p)
		}
	}()
	// A file that cannot be opened at all: the operating system's
	// message, as for every other input, not the ROOT library's.
	fd, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("rootio: %w", err)
	}
	st, err := fd.Stat()
	if err == nil {
		// go-hep allocates what the file declares before reading it:
		// the layout is checked first.
		err = CheckFile(fd, st.Size())
	}
	if err != nil {
		fd.Close()
		return nil, fmt.Errorf("rootio: %s: %w", path, err)
	}
	f, err = riofs.NewReader(fd)
	if err != nil {
		fd.Close()
		return nil, fmt.Errorf("rootio: %s: cannot open as a ROOT file: %w", path, err)
	}
	return f, nil
}

func recoverDamaged(path, key string, err *error) {
	if p := recover(); p != nil {
		*err = fmt.Errorf("rootio: %s: %q: damaged ROOT file: %v", path, key, p)
	}
}

// Key describes an object stored in a ROOT file.
type Key struct {
	Path  string // "h" or "dir/sub/h"
	Class string // "TH1D", "TTree", ...
}

// Keys lists the objects of a ROOT file, directories descended, in file order.
func Keys(path string) (keys []Key, err error) {
	f, err := openFile(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	if keys, err = keysOf(f); err != nil {
		return nil, fmt.Errorf("rootio: %s: %w", path, err)
	}
	return keys, nil
}

// keysOf lists the objects of the open ROOT file f, as Keys does.
func keysOf(f *riofs.File) (keys []Key, err error) {
	defer func() {
		if p := recover(); p != nil {
			keys, err = nil, fmt.Errorf("damaged ROOT file: %v", p)
		}
	}()
	var walk func(d riofs.Directory, prefix string) error
	walk = func(d riofs.Directory, prefix string) error {
		for _, k := range d.Keys() {
			p := prefix + k.Name()
			if k.ClassName() == "TDirectoryFile" || k.ClassName() == "TDirectory" {
				obj, err := k.Object()
				if err != nil {
					return err
				}
				if sub, ok := obj.(riofs.Directory); ok {
					if err := walk(sub, p+"/"); err != nil {
						return err
					}
					continue
				}
			}
			keys = append(keys, Key{Path: p, Class: k.ClassName()})
		}
		return nil
	}
	if err := walk(f, ""); err != nil {
		return nil, err
	}
	return keys, nil
}

func (h *Hist1D) check() error {
	n := len(h.Edges) - 1
	if n < 1 {
		return fmt.Errorf("histogram %q: %d edges; need at least 2", h.Name, len(h.Edges))
	}
	if err := checkEdges(h.Edges); err != nil {
		return fmt.Errorf("histogram %q: %w", h.Name, err)
	}
	if len(h.SumW) != n+2 || len(h.SumW2) != n+2 {
		return fmt.Errorf("histogram %q: %d bins need %d cells with flows; SumW has %d, SumW2 %d", h.Name, n, n+2, len(h.SumW), len(h.SumW2))
	}
	return nil
}

func (h *Hist2D) check() error {
	nx, ny := h.NBins()
	if nx < 1 || ny < 1 {
		return fmt.Errorf("histogram %q: need at least 2 edges per axis, have %d and %d", h.Name, len(h.XEdges), len(h.YEdges))
	}
	if err := checkEdges(h.XEdges); err != nil {
		return fmt.Errorf("histogram %q: x: %w", h.Name, err)
	}
	if err := checkEdges(h.YEdges); err != nil {
		return fmt.Errorf("histogram %q: y: %w", h.Name, err)
	}
	n := (nx + 2) * (ny + 2)
	if len(h.SumW) != n || len(h.SumW2) != n {
		return fmt.Errorf("histogram %q: %dx%d bins need %d cells with flows; SumW has %d, SumW2 %d", h.Name, nx, ny, n, len(h.SumW), len(h.SumW2))
	}
	return nil
}

// WriteFile writes the histograms to a new ROOT file at path, as TH1D and
// TH2D objects keyed by their names; a name "dir/h" puts h in directory dir.
// The file is written atomically: under a temporary name beside path,
// synced to disk and renamed into place; the name it records for itself
// (ROOT's file name, shown by ROOT's file browsers) is the base name of
// path, never the temporary one.
func WriteFile(path string, h1 []*Hist1D, h2 []*Hist2D) error {
	seen := map[string]bool{}
	for _, h := range h1 {
		if err := h.check(); err != nil {
			return fmt.Errorf("rootio: writing %s: %w", path, err)
		}
		if err := checkName(h.Name, seen); err != nil {
			return fmt.Errorf("rootio: writing %s: %w", path, err)
		}
	}
	for _, h := range h2 {
		if err := h.check(); err != nil {
			return fmt.Errorf("rootio: writing %s: %w", path, err)
		}
		if err := checkName(h.Name, seen); err != nil {
			return fmt.Errorf("rootio: writing %s: %w", path, err)
		}
	}
	err := atomicfile.WriteVia(path, func(tmp string) error {
		f, err := groot.Create(tmp, withName(filepath.Base(path)))
		if err != nil {
			return err
		}
		d := riofs.Dir(f)
		for _, h := range h1 {
			if err := d.Put(h.Name, toTH1D(h)); err != nil {
				f.Close()
				return fmt.Errorf("%q: %w", h.Name, err)
			}
		}
		for _, h := range h2 {
			if err := d.Put(h.Name, toTH2D(h)); err != nil {
				f.Close()
				return fmt.Errorf("%q: %w", h.Name, err)
			}
		}
		return f.Close()
	})
	if err != nil {
		return fmt.Errorf("rootio: writing %s: %w", path, err)
	}
	return nil
}

func checkName(name string, seen map[string]bool) error {
	if name == "" || strings.HasPrefix(name, "/") || strings.HasSuffix(name, "/") || strings.Contains(name, "//") || strings.ContainsAny(name, ";") {
		return fmt.Errorf("bad histogram name %q", name)
	}
	if seen[name] {
		return fmt.Errorf("histogram name %q used twice", name)
	}
	seen[name] = true
	return nil
}

// setMember sets the float64 member name of a ROOT object.
func setMember(obj rbytes.RSlicer, name string, v float64) {
	for _, m := range obj.RMembers() {
		if m.Name == name {
			*m.Value.(*float64) = v
			return
		}
	}
	panic("rootio: no member " + name) // the member list is fixed by go-hep's TH1 streamer
}

func entries(given float64, sumw, sumw2 []float64) float64 {
	if given != 0 {
		return given
	}
	var s, s2 float64
	for i := range sumw {
		s += sumw[i]
		s2 += sumw2[i]
	}
	if s2 == 0 {
		return 0
	}
	return s * s / s2
}

func toTH1D(h *Hist1D) *rhist.H1D {
	hb := hbook.NewH1DFromEdges(h.Edges) // axes only; the cells are copied below
	hb.Annotation()["name"] = h.Name[strings.LastIndexByte(h.Name, '/')+1:]
	hb.Annotation()["title"] = h.Title
	r := rhist.NewH1DFrom(hb)
	copy(r.Array().Data, h.SumW)
	copy(r.SumW2s(), h.SumW2)
	n := h.NBins()
	var sw, sw2, swx, swx2 float64
	for i := 1; i <= n; i++ {
		x := 0.5 * (h.Edges[i-1] + h.Edges[i])
		w := h.SumW[i]
		sw += w
		sw2 += h.SumW2[i]
		swx += w * x
		swx2 += w * x * x
	}
	setMember(r, "fEntries", entries(h.Entries, h.SumW, h.SumW2))
	setMember(r, "fTsumw", sw)
	setMember(r, "fTsumw2", sw2)
	setMember(r, "fTsumwx", swx)
	setMember(r, "fTsumwx2", swx2)
	return r
}

func toTH2D(h *Hist2D) *rhist.H2D {
	hb := hbook.NewH2DFromEdges(h.XEdges, h.YEdges) // axes only
	hb.Annotation()["name"] = h.Name[strings.LastIndexByte(h.Name, '/')+1:]
	hb.Annotation()["title"] = h.Title
	r := rhist.NewH2DFrom(hb)
	copy(r.Array().Data, h.SumW)
	copy(r.SumW2s(), h.SumW2)
	nx, ny := h.NBins()
	var sw, sw2, swx, swx2, swy, swy2, swxy float64
	for iy := 1; iy <= ny; iy++ {
		y := 0.5 * (h.YEdges[iy-1] + h.YEdges[iy])
		for ix := 1; ix <= nx; ix++ {
			x := 0.5 * (h.XEdges[ix-1] + h.XEdges[ix])
			i := h.Index(ix, iy)
			w := h.SumW[i]
			sw += w
			sw2 += h.SumW2[i]
			swx += w * x
			swx2 += w * x * x
			swy += w * y
			swy2 += w * y * y
			swxy += w * x * y
		}
	}
	setMember(r, "fEntries", entries(h.Entries, h.SumW, h.SumW2))
	setMember(r, "fTsumw", sw)
	setMember(r, "fTsumw2", sw2)
	setMember(r, "fTsumwx", swx)
	setMember(r, "fTsumwx2", swx2)
	setMember(r, "fTsumwy", swy)
	setMember(r, "fTsumwy2", swy2)
	setMember(r, "fTsumwxy", swxy)
	return r
}
