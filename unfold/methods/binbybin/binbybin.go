// Package binbybin is the bin-by-bin correction of the data behind the
// seam of package unfold, for contrast only: μ_j = (n_j − b_j) C_j with
// the correction factor C_j = G_j / Σ_k A_jk (the simulated count
// generated in bin j over the simulated count reconstructed in bin j),
// for a truth and a reco binning that are the same. It is a biased
// shortcut: the factors carry the simulated truth spectrum and ignore
// the migrations between bins, so the result leans towards the
// simulation and its uncertainty is too small wherever bins migrate
// (cmd/desmear/help/method.md §15 Inversion and bin-by-bin factors). It
// is linear in the data; its Jacobian is the diagonal of the factors.
package binbybin

import (
	"context"
	"fmt"

	"github.com/desmear/desmear/unfold"
)

// Name is the method's name in unfold.Result.Method and in the method
// choice of the analysis file and the command line.
const Name = "bin-by-bin"

// Caution is the label of every bin-by-bin result.
const Caution = "bin-by-bin correction factors are a biased shortcut: they carry the simulated truth spectrum and ignore migrations between bins; use them for contrast only"

// Settings are the settings of the bin-by-bin correction (it has none);
// *Settings is the method (unfold.Method).
type Settings struct{}

// Details are what the correction reports besides the estimate.
type Details struct {
	// Factors are C_j per truth bin (0 where bin j has no reconstructed
	// simulated count).
	Factors []float64
	// Caution is the label Caution.
	Caution string
}

// DetailsOf returns the details of a result of this method, or nil.
func DetailsOf(r *unfold.Result) *Details {
	d, _ := r.Details.(*Details)
	return d
}

// Name returns the method's name.
func (s *Settings) Name() string { return Name }

// Validate checks the settings (there are none to check).
func (s *Settings) Validate() error { return nil }

// Fit forms the factors and corrects the data. It refuses a problem
// whose reco bins are not one per truth bin.
func (s *Settings) Fit(ctx context.Context, p *unfold.Prepared) (unfold.Fit, error) {
	nt, nr := p.TruthBins(), p.RecoBins()
	if nt != nr {
		return nil, &unfold.InputError{Field: "Migrations", Reco: -1, Truth: -1, Reason: fmt.Sprintf("bin-by-bin factors need the same truth and reco binning, one reco bin per truth bin (here %d reco and %d truth bins); use an unfolding method", nr, nt)}
	}
	reco := make([]float64, nr)
	p.Migrations().RowSums(reco)
	d := &Details{Factors: make([]float64, nt), Caution: Caution}
	for j, r := range reco {
		if r > 0 && p.Determined()[j] {
			d.Factors[j] = 1 / (r * p.InvGenerated()[j])
		}
	}
	return unfold.NewLinearFit(ctx, p, func() unfold.Solver { return factors(d.Factors) }, nil, d)
}

// factors is K = diag(C).
type factors []float64

func (c factors) Solve(_ context.Context, dst, y []float64) error {
	for j, f := range c {
		dst[j] = f * y[j]
	}
	return nil
}
