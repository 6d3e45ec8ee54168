package validate

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"testing"

	"github.com/desmear/desmear/unfold"
)

// perK hides the Scanner of a method: the ensemble then re-runs the
// method for every k.
type perK struct{ unfold.Method }

// A toy ensemble of the iterative method unfolds each toy once, keeping
// its iterations (Scanner); its moments are, bit for bit, those of
// re-running every toy with k = 1..K fixed iterations, for the exact and
// the probes' per-bin variances.
func TestScanEnsembleIsPerKEnsemble(t *testing.T) {
	p, _ := band(t, 12)
	for i := range p.Data {
		p.Data[i] = math.Round(p.Data[i] * 0.02)
	}
	truth, err := ScaledGenerated(p)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range []*unfold.Settings{nil, {DiagonalMethod: unfold.DiagonalProbes, Probes: 12, Seed: 3}} {
		var docs [2][]byte
		for i, m := range []func(int) unfold.Method{iterations, func(k int) unfold.Method { return perK{iterations(k)} }} {
			if _, ok := m(4).(Scanner); ok != (i == 0) {
				t.Fatalf("method %d: Scanner %v", i, ok)
			}
			e, err := Run(context.Background(), &Config{Problem: p, Settings: s, Method: m, MaxK: 4, Truth: truth, Toys: 60, Seed: 8}, 0, 0)
			if err != nil {
				t.Fatal(err)
			}
			if docs[i], err = json.Marshal(e); err != nil {
				t.Fatal(err)
			}
		}
		if !bytes.Equal(docs[0], docs[1]) {
			t.Errorf("settings %+v: the ensemble of one scanning run per toy differs from one run per k", s)
		}
	}
}
