package response

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
)

// The truth bin that locateDiag gives for the reco observables of an
// event must be the one that locating them in the truth scheme gives
// (method.md §2 Response, efficiency, purity and stability; the shortcut:
// method.md §27 Locating events by arithmetic), for points anywhere
// in each reco bin: random ones, both edges of the bin, the truth edges
// inside it and their neighbouring floats. The schemes cover products of
// axes (the per-axis map), edges-by-bin axes (the corners), two reco
// regions, axes in another order, flows switched on and off, reco bins
// equal to, inside, straddling one and several truth bins.
func TestDiagMapAgainstLocate(t *testing.T) {
	truths := map[string]string{
		"flows on": `regions:
  - name: r
    axes:
      - {name: x, edges: [0, 0.3, 0.6, 1], underflow: true, overflow: true}
      - {name: y, edges: [0, 0.25, 0.5, 0.75, 1], underflow: true, overflow: true}
`,
		"flows off": `regions:
  - name: r
    axes:
      - {name: x, edges: [0, 0.3, 0.6, 1], overflow: true}
      - {name: y, edges: [0.1, 0.5, 1]}
`,
		"y first": `regions:
  - name: r
    axes:
      - {name: y, edges: [0, 0.5, 1], underflow: true}
      - {name: x, edges: [0, 0.1, 0.2, 0.3, 0.6, 1], underflow: true, overflow: true}
`,
		"by bin": `regions:
  - name: r
    axes:
      - {name: x, edges: [0, 0.5, 1], underflow: true, overflow: true}
      - name: y
        edges_by_bin: [[0, 0.5, 1], [0, 0.2, 0.4, 1]]
        underflow: true
        overflow: true
`,
	}
	recos := map[string]string{
		"fine": `regions:
  - name: r
    axes:
      - {name: x, edges: [-0.1, 0, 0.15, 0.25, 0.35, 0.6, 0.8, 1, 1.1], underflow: true, overflow: true}
      - {name: y, edges: [0, 0.2, 0.25, 0.45, 0.55, 0.8, 1], underflow: true, overflow: true}
`,
		"uniform": "regions:\n  - name: r\n    axes:\n      - {name: x, edges: " + edgeList(-0.2, 1.2, 14) +
			", underflow: true, overflow: true}\n      - {name: y, edges: " + edgeList(0, 1, 40) + ", overflow: true}\n",
		"coarse": `regions:
  - name: r
    axes:
      - {name: x, edges: [0, 0.6, 1]}
      - {name: y, edges: [0, 1], underflow: true, overflow: true}
`,
		"two regions, y first": `regions:
  - name: low
    axes:
      - {name: y, edges: [0, 0.3, 0.5]}
      - {name: x, edges: [0, 0.29, 0.31, 0.6, 1]}
  - name: all
    axes:
      - {name: x, edges: [0, 0.3, 0.45, 1], underflow: true, overflow: true}
      - {name: y, edges: [0, 0.5, 0.6, 1], underflow: true, overflow: true}
`,
		"by bin": `regions:
  - name: r
    axes:
      - {name: x, edges: [0, 0.3, 0.7, 1], overflow: true}
      - name: y
        edges_by_bin: [[0, 0.5, 1], [0, 0.1, 0.2, 0.5, 0.9, 1], [0, 1]]
        underflow: true
`,
	}
	for tn, tsrc := range truths {
		for rn, rsrc := range recos {
			t.Run(tn+"/"+rn, func(t *testing.T) {
				truth, reco := mustScheme(t, tsrc), mustScheme(t, rsrc)
				checkDiagMap(t, truth, reco)
			})
		}
	}
}

// edgeList returns n+1 edges from lo to hi as a YAML list, computed as
// lo + i*(hi-lo)/n.
func edgeList(lo, hi float64, n int) string {
	e := make([]string, n+1)
	for i := range e {
		e[i] = fmt.Sprint(lo + float64(i)*(hi-lo)/float64(n))
	}
	return "[" + strings.Join(e, ", ") + "]"
}

func checkDiagMap(t *testing.T, truth, reco *binning.Scheme) {
	t.Helper()
	// reco observables in the reco scheme's axis order; RecoInTruth maps
	// each truth axis to its reco observable
	axes := make([]int, len(truth.AxisNames()))
	for a, name := range truth.AxisNames() {
		axes[a] = reco.AxisIndex(name)
	}
	m := newDiagMap(truth, reco, axes)
	rng := rand.New(rand.NewPCG(5, 8))
	var obs [2][]float64
	var recoBins, want []int32
	add := func(x []float64) {
		r := reco.Locate(x)
		if r < 0 {
			return
		}
		pt := make([]float64, len(axes))
		for a, ax := range axes {
			pt[a] = x[ax]
		}
		w := truth.Locate(pt)
		if w < 0 {
			w = codeOutside
		}
		obs[0], obs[1] = append(obs[0], x[0]), append(obs[1], x[1])
		recoBins, want = append(recoBins, int32(r)), append(want, int32(w))
	}
	for g := 0; g < reco.Len(); g++ {
		bin := reco.Bin(g)
		// per reco axis, the values to combine: both edges, truth edges
		// inside with their neighbours, random values
		var vals [2][]float64
		for k, name := range bin.Axes {
			lo, hi := bin.Low[k], bin.High[k]
			j := reco.AxisIndex(name)
			v := []float64{lo, math.Nextafter(lo, math.Inf(1)), math.Nextafter(hi, math.Inf(-1))}
			for _, e := range allTruthEdges(truth, name) {
				for _, u := range []float64{math.Nextafter(e, math.Inf(-1)), e, math.Nextafter(e, math.Inf(1))} {
					if u >= lo && u < hi {
						v = append(v, u)
					}
				}
			}
			for range 4 {
				l, h := max(lo, -3), min(hi, 3)
				v = append(v, l+(h-l)*rng.Float64())
			}
			vals[j] = v // ±Inf included: they belong to the flow bins
		}
		for _, x := range vals[0] {
			for _, y := range vals[1] {
				add([]float64{x, y})
			}
		}
	}
	sc := &scratch{obs: obs[:]}
	got := make([]int32, len(recoBins))
	sc.locateDiag(got, recoBins, m, true)
	bad := 0
	for k := range got {
		// reference: the truth scheme's own location (doc.go)
		if got[k] != want[k] {
			if bad++; bad <= 5 {
				t.Errorf("reco values (%v, %v) in reco bin %d: truth bin %d, locating gives %d", obs[0][k], obs[1][k], recoBins[k], got[k], want[k])
			}
		}
	}
	if bad > 0 {
		t.Errorf("%d of %d points wrong", bad, len(got))
	}
	if len(got) < 100 {
		t.Errorf("only %d points checked", len(got))
	}
}

// allTruthEdges returns every edge of the axis called name in truth.
func allTruthEdges(truth *binning.Scheme, name string) []float64 {
	var e []float64
	for _, reg := range truth.Regions() {
		for _, a := range reg.Axes() {
			if a.Name() != name {
				continue
			}
			if a.ByBin() {
				for _, l := range a.EdgesByBin() {
					e = append(e, l...)
				}
			} else {
				e = append(e, a.Edges()...)
			}
		}
	}
	return e
}
