package result

import (
	"io"
	"strconv"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// The iteration scan's format and files.
const (
	IterationsFormat   = "iterations"
	IterationsFile     = "iterations.csv"
	IterationsBinsFile = "iterations-bins.csv"
)

func init() {
	Register(Writer{Name: IterationsFormat, Write: writeIterations})
}

// IterationScan is the iteration scan of the iterative method: per
// iteration k = 0..Iterations (0 the start) the estimate, the per-bin
// variance (with an uncertainty computation) and the folded chi-square
// against the data; the chi-square between iterations, the change and
// the log-likelihood are in History.
type IterationScan struct {
	// Estimates[k] is μ(k) per truth bin (0 where not determined).
	Estimates [][]float64
	// Variances[k] is the per-bin variance of μ(k), by the uncertainty
	// computation of the result; nil without one.
	Variances [][]float64
	// FoldedChi2[k] is Σ_i (n_i − ν_i(k))² / (var n_i + var b_i) over the
	// FoldedBins reco bins of positive variance, ν(k) = R μ(k) + b (as
	// FoldedChi2 of the result; method.md §16 Folded comparison); set by
	// SetProblem, nil before.
	FoldedChi2 []float64
}

// newIterationScan returns the scan of the kept estimates and step
// variances, 0 where not determined; nil when no estimates were kept.
func newIterationScan(est, vars [][]float64, det []bool) *IterationScan {
	if len(est) == 0 {
		return nil
	}
	clean := func(v []float64) []float64 {
		out := make([]float64, len(v))
		for j, x := range v {
			if det[j] {
				out[j] = x
			}
		}
		return out
	}
	sc := &IterationScan{}
	for _, e := range est {
		sc.Estimates = append(sc.Estimates, clean(e))
	}
	for _, v := range vars {
		sc.Variances = append(sc.Variances, clean(v))
	}
	return sc
}

// foldedChi2 computes FoldedChi2 for every iteration from the problem's
// response and background and the data and variances recorded in r.
func (sc *IterationScan) foldedChi2(r *Result, p *unfold.Problem) {
	nr, nt := p.Migrations.Dims()
	x := make([]float64, nt)
	nu := make([]float64, nr)
	sc.FoldedChi2 = make([]float64, len(sc.Estimates))
	for k, mu := range sc.Estimates {
		for j, m := range mu {
			x[j] = 0
			if g := p.Generated[j]; m != 0 && g > 0 {
				x[j] = m / g
			}
		}
		p.Migrations.Fold(nu, x)
		var c float64
		for i, n := range r.Data {
			v := nu[i]
			if r.Background != nil {
				v += r.Background[i]
			}
			if w := r.PullVariance(i); w > 0 {
				c += (n - v) * (n - v) / w
			}
		}
		sc.FoldedChi2[k] = c
	}
}

// writeIterations writes iterations.csv (one row per iteration) and
// iterations-bins.csv (one row per iteration and truth bin); nothing
// without a scan.
func writeIterations(f *Folder, r *Result, truth *binning.Scheme) ([]string, error) {
	sc := r.Scan
	if sc == nil || len(r.History) != len(sc.Estimates) {
		return nil, nil
	}
	if err := writeFile(f, IterationsFile, func(w io.Writer) error {
		return writeTable(w, []string{"k", "chi2", "change", "log_likelihood", "folded_chi2", "folded_bins", "sum", "variance_sum"}, len(sc.Estimates), func(k int, rec []string) []string {
			st := r.History[k]
			var sum, v float64
			for j, x := range sc.Estimates[k] {
				sum += x
				if sc.Variances != nil {
					v += sc.Variances[k][j]
				}
			}
			fc, vs := "", ""
			if sc.FoldedChi2 != nil {
				fc = formatFloat(sc.FoldedChi2[k])
			}
			if sc.Variances != nil {
				vs = formatFloat(v)
			}
			return append(rec, strconv.Itoa(k), formatFloat(st.Chi2), formatFloat(st.Change), formatFloat(st.LogLikelihood), fc, strconv.Itoa(r.FoldedBins), formatFloat(sum), vs)
		})
	}); err != nil {
		return nil, err
	}
	var bins []int
	for j, d := range r.Determined {
		if d {
			bins = append(bins, j)
		}
	}
	if err := writeFile(f, IterationsBinsFile, func(w io.Writer) error {
		return writeTable(w, []string{"k", "bin", "label", "estimate", "variance"}, len(sc.Estimates)*len(bins), func(q int, rec []string) []string {
			k, j := q/len(bins), bins[q%len(bins)]
			label, v := "", ""
			if truth != nil {
				label = truth.Label(j)
			}
			if sc.Variances != nil {
				v = formatFloat(sc.Variances[k][j])
			}
			return append(rec, strconv.Itoa(k), strconv.Itoa(j), label, formatFloat(sc.Estimates[k][j]), v)
		})
	}); err != nil {
		return nil, err
	}
	return []string{IterationsFile, IterationsBinsFile}, nil
}
