package unfold

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// Methods of the sources of systematic variations (Source.Method).
const (
	// MethodShift is the source of one varied result: the shift is the
	// varied estimate minus the nominal one (method.md §21).
	MethodShift = "shift"
	// MethodHalfDifference is the source of an up/down pair: the shift
	// is half the up estimate minus the down estimate (method.md §21).
	MethodHalfDifference = "half-difference"
)

// ShiftSource returns the source of the systematic variation name from
// the nominal estimate and the estimate of the varied result: Shift =
// varied − nominal per truth bin, Variance = Shift², and with full the
// covariance Shift Shiftᵀ, fully correlated across bins (method.md §21).
// Bins not determined (determined[j] false; determined may be nil for
// all) get a zero shift. It panics if the lengths differ.
func ShiftSource(name string, nominal, varied []float64, determined []bool, full bool) Source {
	if len(varied) != len(nominal) {
		panic("unfold: ShiftSource of estimates of different lengths")
	}
	d := make([]float64, len(nominal))
	for j := range d {
		if determined == nil || determined[j] {
			d[j] = varied[j] - nominal[j]
		}
	}
	return shiftSource(name, MethodShift, d, full)
}

// PairSource returns the source of the systematic variation name from
// an up/down pair: the symmetrised shift Shift = (up − down)/2 per truth
// bin, which keeps the sign of the up variation (a bin that rises with
// the up variation has a positive shift), Variance = Shift² and with full
// the covariance Shift Shiftᵀ (method.md §21). Up and Down keep the
// one-sided shifts up − nominal and down − nominal. Bins not determined
// get zero shifts. It panics if the lengths differ.
func PairSource(name string, nominal, up, down []float64, determined []bool, full bool) Source {
	if len(up) != len(nominal) || len(down) != len(nominal) {
		panic("unfold: PairSource of estimates of different lengths")
	}
	n := len(nominal)
	d, du, dd := make([]float64, n), make([]float64, n), make([]float64, n)
	for j := range d {
		if determined == nil || determined[j] {
			d[j] = (up[j] - down[j]) / 2
			du[j], dd[j] = up[j]-nominal[j], down[j]-nominal[j]
		}
	}
	s := shiftSource(name, MethodHalfDifference, d, full)
	s.Up, s.Down = du, dd
	return s
}

func shiftSource(name, method string, d []float64, full bool) Source {
	s := Source{Name: name, Method: method, Shift: d, Variance: make([]float64, len(d))}
	for j, x := range d {
		s.Variance[j] = x * x
	}
	if full {
		c := mat.NewSymDense(len(d), nil)
		c.SymOuterK(1, mat.NewVecDense(len(d), d))
		s.Covariance = c
	}
	return s
}

// CheckSourceCovariances returns a *TooLargeError when the dense
// covariances of sources systematic sources (one truth × truth matrix
// each, and their total) would not fit under limit bytes (0 for
// DefaultMemoryLimit), for a problem of nt truth and nr reco bins; nil
// otherwise.
func CheckSourceCovariances(nt, nr, sources int, limit int64) error {
	if limit == 0 {
		limit = DefaultMemoryLimit
	}
	b := 8 * int64(nt) * int64(nt) * int64(sources+1)
	if sources == 0 || b <= limit {
		return nil
	}
	return &TooLargeError{
		What: fmt.Sprintf("the full covariance of %d systematic sources (a dense %d × %d matrix each, and their total)", sources, nt, nt), TruthBins: nt, RecoBins: nr, Columns: nr,
		Bytes: b, Limit: limit,
		Alternative: "ask for per-bin variances only (diagonal covariance; each source's shift and variance are kept), or raise the memory limit",
	}
}
