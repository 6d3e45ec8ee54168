package analysis

import (
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// A response from a TTree written by ROOT itself: go-hep's
// groot/testdata/small-flat-tree.root (ROOT 6.08) holds 100 entries whose
// scalar branches Int32, UInt32, Float32 and Float64 all equal the entry
// number i (as listed by go-hep's dump of the file,
// groot/rcmd/testdata/small-flat-tree.root.txt); Float32 is a float32
// branch, converted on reading. With x_true = Float64, x_reco = Float32 +
// 10, truth selection Int32 % 10 != 0 and weight 1 + UInt32 % 2, every
// event's fate is known and checked against a plain loop over i.
func TestResponseFromROOTWrittenTree(t *testing.T) {
	out, err := exec.Command("go", "list", "-m", "-f", "{{.Dir}}", "go-hep.org/x/hep").Output()
	dir := strings.TrimSpace(string(out))
	if err != nil || dir == "" {
		t.Skipf("go-hep module not in the module cache: %v", err)
	}
	path := filepath.Join(dir, "groot", "testdata", "small-flat-tree.root")
	if _, err := os.Stat(path); err != nil {
		t.Skip(err)
	}
	src := `binning:
  truth: {regions: [{name: r, axes: [{name: x, edges: [0, 25, 50, 75, 100]}]}]}
  reco: {regions: [{name: r, axes: [{name: x, edges: [0, 25, 50, 75, 100]}]}]}
observables:
  truth: {x: Float64}
  reco: {x: Float32 + 10}
simulation:
  - file: ` + path + `
    weight: 1 + UInt32 % 2
    truth_selection: Int32 % 10 != 0
data:
  table: n.csv
output:
  folder: out
`
	a, err := Decode([]byte(src), filepath.Join(t.TempDir(), "a.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	r, _, err := a.BuildResponse(context.Background(), &Options{Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	gen := make([]float64, 4)
	fakes := make([]float64, 4)
	cells := map[[2]int]float64{}
	var entries, misses, nfakes, outsideReco int64
	for i := 0; i < 100; i++ {
		w := float64(1 + i%2)
		ti, ri := -1, -1
		if i%10 != 0 {
			ti = i / 25
		}
		if i+10 < 100 {
			ri = (i + 10) / 25
		} else {
			outsideReco++
		}
		switch {
		case ti >= 0 && ri >= 0:
			entries++
			gen[ti] += w
			cells[[2]int{ri, ti}] += w
		case ti >= 0:
			misses++
			gen[ti] += w
		case ri >= 0:
			nfakes++
			fakes[ri] += w
		}
	}
	s := r.Summary
	if s.Events != 100 || s.Entries != entries || s.Misses != misses || s.Fakes != nfakes || s.OutsideReco != outsideReco || s.OutsideTruth != 0 {
		t.Errorf("summary %+v, want %d entries, %d misses, %d fakes, %d outside reco", s, entries, misses, nfakes, outsideReco)
	}
	for j := range gen {
		if r.Generated[j] != gen[j] || r.Fakes[j] != fakes[j] {
			t.Errorf("bin %d: generated %v fakes %v, want %v %v", j, r.Generated[j], r.Fakes[j], gen[j], fakes[j])
		}
	}
	if r.Migrations.NNZ() != len(cells) {
		t.Errorf("%d cells, want %d", r.Migrations.NNZ(), len(cells))
	}
	for rc, v := range cells {
		if got := r.Migrations.At(rc[0], rc[1]); got != v {
			t.Errorf("A%v = %v, want %v", rc, got, v)
		}
	}
}
