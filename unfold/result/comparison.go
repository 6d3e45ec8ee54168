package result

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// ComparisonFile is the per-bin table of the comparison with a reference
// spectrum, written with the csv format when the result has one.
const ComparisonFile = "comparison.csv"

// Comparison is the comparison of the result with a reference spectrum
// (a known truth, another measurement): per compared truth bin the
// reference and the pull, and the chi-square through the pseudo-inverse
// of the total covariance (method.md §19).
type Comparison struct {
	// Reference names the reference table.
	Reference string `json:"reference"`
	// Bins are the compared truth bins (the in-range bins with a truth
	// binning, every bin without); Values the reference per compared bin
	// and Pull (estimate − reference)/uncertainty, null where the bin is
	// not determined or has no uncertainty.
	Bins   []int      `json:"bins"`
	Values []float64  `json:"reference_values"`
	Pull   []*float64 `json:"pull"`
	// Covariance says what the chi-square uses: "total" (the total
	// covariance), "diagonal" (the squared total uncertainties, without
	// a full covariance; correlations ignored) or "none" (no uncertainty:
	// no chi-square).
	Covariance string `json:"covariance"`
	// Chi2 and NDF are the chi-square and its effective number of
	// degrees of freedom (the eigen-directions kept by the relative
	// EigenvalueCut) over Determined compared bins; Condition the
	// condition number of the covariance on them (null when singular);
	// PValue P(χ²_NDF ≥ Chi2).
	Chi2          float64  `json:"chi2"`
	NDF           int      `json:"ndf"`
	Determined    int      `json:"bins_in_chi2"`
	EigenvalueCut float64  `json:"eigenvalue_cut"`
	Condition     *float64 `json:"condition_number"`
	PValue        float64  `json:"p_value"`
}

// Compare sets r.Comparison: the comparison of the kernel's result res
// (its estimate, total uncertainty and total covariance) with the
// reference ref (one value per truth bin) read from file, over the
// in-range bins of the truth scheme truth (every bin for nil), through
// unfold.Compare. It returns unfold.Compare's error.
func (r *Result) Compare(res *unfold.Result, ref []float64, file string, truth *binning.Scheme) error {
	var bins []int
	if truth != nil {
		bins = make([]int, truth.InRange())
		for j := range bins {
			bins[j] = j
		}
	}
	var cov mat.Symmetric // a nil *mat.SymDense must stay a nil interface
	if res.Covariance != nil {
		cov = res.Covariance
	}
	c, err := unfold.Compare(ref, res.Estimate, res.Uncertainty, cov, res.Determined, bins, 0)
	if err != nil {
		return err
	}
	rc := &Comparison{Reference: file, Covariance: "total", Chi2: c.Chi2, NDF: c.NDF, Determined: c.Bins, EigenvalueCut: c.Cut, PValue: c.PValue}
	switch {
	case res.Uncertainty == nil:
		rc.Covariance = "none"
	case c.Diagonal:
		rc.Covariance = "diagonal"
	}
	if res.Uncertainty != nil && !math.IsInf(c.Condition, 0) {
		rc.Condition = &c.Condition
	}
	for _, row := range c.Rows {
		rc.Bins = append(rc.Bins, row.Bin)
		rc.Values = append(rc.Values, row.Reference)
		var p *float64
		if !math.IsNaN(row.Pull) {
			p = &row.Pull
		}
		rc.Pull = append(rc.Pull, p)
	}
	r.Comparison = rc
	return nil
}

// WriteComparison writes the comparison of r as CSV: the columns index,
// label (with a truth binning s), reference, estimate, uncertainty
// (empty without one), pull (empty where none) and determined.
func WriteComparison(w io.Writer, r *Result, s *binning.Scheme) error {
	c := r.Comparison
	if c == nil {
		return fmt.Errorf("result: no comparison")
	}
	cw := csv.NewWriter(w)
	header := []string{"index"}
	if s != nil {
		header = append(header, "label")
	}
	header = append(header, "reference", "estimate", "uncertainty", "pull", "determined")
	if err := cw.Write(header); err != nil {
		return err
	}
	for k, j := range c.Bins {
		rec := []string{strconv.Itoa(j)}
		if s != nil {
			rec = append(rec, s.Label(j))
		}
		u, p := "", ""
		if r.Uncertainty != nil {
			u = formatFloat(r.Uncertainty[j])
		}
		if c.Pull[k] != nil {
			p = formatFloat(*c.Pull[k])
		}
		rec = append(rec, formatFloat(c.Values[k]), formatFloat(r.Estimate[j]), u, p, strconv.FormatBool(r.Determined[j]))
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
