package tables

import (
	"errors"
	"fmt"
	"slices"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
)

// EfficiencyTolerance is the relative allowance for rounding in the check
// Σ_i A_ij ≤ G_j (an efficiency of at most 1): the kernel's, so that the
// tables refuse, at their file and line, exactly what the kernel would.
const EfficiencyTolerance = unfold.EfficiencyTolerance

// Set is the tables of one unfolding problem. Response, Generated and
// Data are required; Background and Prior may be nil.
type Set struct {
	Response   *Response
	Generated  *Vector
	Data       *Vector
	Background *Vector
	Prior      *Vector
}

// Sizes are the numbers of reco and truth bins of a problem, with the
// origin of each for messages (for example "the truth binning T.yaml");
// an empty origin means the sizes were found in the tables.
type Sizes struct {
	Reco, Truth             int
	RecoOrigin, TruthOrigin string
}

// Sizes returns the sizes found in the tables: 1 + the largest reco
// index in the response, data and background tables, and 1 + the largest
// truth index in the response, generated and prior tables.
func (s *Set) Sizes() Sizes {
	var z Sizes
	if s.Response != nil {
		z.Reco, z.Truth = s.Response.Dims()
	}
	for _, v := range []*Vector{s.Data, s.Background} {
		if v != nil {
			z.Reco = max(z.Reco, v.Len())
		}
	}
	for _, v := range []*Vector{s.Generated, s.Prior} {
		if v != nil {
			z.Truth = max(z.Truth, v.Len())
		}
	}
	return z
}

// Assemble checks the tables against each other and against the sizes
// and returns the unfolding problem they describe, with the response as
// a reco × truth sparse matrix (entries with value 0 are not stored).
// Every problem found is an *Error naming a file, line and column (see
// the package documentation for the checks). Background and Prior of the
// problem are nil when the set has no such table; DataVariance is nil
// when the data table has no variance column (Poisson data). It panics
// if Response, Generated or Data is nil (a programming error: those
// tables are required).
func (s *Set) Assemble(z Sizes) (*unfold.Problem, error) {
	if s.Response == nil || s.Generated == nil || s.Data == nil {
		panic("tables: Assemble needs the response, generated and data tables")
	}
	a, err := s.Response.Matrix(z)
	if err != nil {
		return nil, err
	}
	p := &unfold.Problem{Migrations: a}
	// The sumw2 column of the generated table gives the simulation's
	// effective counts (the sampling of the response); nil without it.
	if p.Generated, p.GeneratedSumW2, err = s.Generated.Dense(z.Truth, z.TruthOrigin); err != nil {
		return nil, err
	}
	if p.Data, p.DataVariance, err = s.Data.Dense(z.Reco, z.RecoOrigin); err != nil {
		return nil, err
	}
	if s.Background != nil {
		if p.Background, p.BackgroundVariance, err = s.Background.Dense(z.Reco, z.RecoOrigin); err != nil {
			return nil, err
		}
	}
	if s.Prior != nil {
		if p.Prior, _, err = s.Prior.Dense(z.Truth, z.TruthOrigin); err != nil {
			return nil, err
		}
	}

	// Generated counts against the response columns.
	colPtr, val := a.ColPtr(), a.Values()
	first := s.Response.firstLines(z.Truth)
	for j := 0; j < z.Truth; j++ {
		var sum float64
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			sum += val[k]
		}
		if sum == 0 {
			continue
		}
		g := p.Generated[j]
		if g == 0 {
			where := "has no row for it"
			if l := s.Generated.lineOf(j); l > 0 {
				where = fmt.Sprintf("gives 0 on line %d", l)
			}
			return nil, errorf(s.Response.File, first[j], "truth",
				"truth bin %d has response entries (Σ value = %g) but no generated count: %s %s; every truth bin with entries needs its generated count (events generated in the bin, reconstructed or not)",
				j, sum, s.Generated.File, where)
		}
		if sum > g*(1+EfficiencyTolerance) {
			return nil, errorf(s.Generated.File, s.Generated.lineOf(j), "value",
				"truth bin %d: generated count %g is below the sum %g of its entries in %s (efficiency %.6g > 1); the generated count must include every event generated in the bin, reconstructed or not",
				j, g, sum, s.Response.File, sum/g)
		}
	}
	return p, nil
}

// Locate turns an *unfold.InputError about a problem built by Assemble
// into an *Error naming the file and line of the table row concerned,
// when there is one. Other errors are returned unchanged.
func (s *Set) Locate(err error) error {
	var ie *unfold.InputError
	if !errors.As(err, &ie) {
		return err
	}
	var v *Vector
	col, bin := "", -1
	switch ie.Field {
	case "Generated":
		v, bin = s.Generated, ie.Truth
	case "GeneratedSumW2":
		if s.Generated != nil && s.Generated.Err2 == nil {
			return &Error{File: s.Generated.File, Field: "sumw2", Msg: "the table has no sumw2 column (the sum of squared weights of the events generated in each truth bin): without it the statistics of the simulation are unknown (the table may be normalised) and the response cannot be sampled; add the column"}
		}
		v, bin = s.Generated, ie.Truth
	case "Prior":
		v, bin = s.Prior, ie.Truth
	case "Data", "DataVariance":
		v, bin = s.Data, ie.Reco
	case "Background", "BackgroundVariance":
		v, bin = s.Background, ie.Reco
	case "Migrations":
		if s.Response != nil {
			line := 0
			if ie.Reco >= 0 && ie.Truth >= 0 {
				line = s.Response.lineOf(ie.Reco, ie.Truth)
			}
			return &Error{File: s.Response.File, Line: line, Field: "value", Msg: ie.Reason}
		}
		return err
	}
	if v == nil {
		return err
	}
	col = "value"
	switch ie.Field {
	case "DataVariance", "BackgroundVariance":
		col = "variance"
	case "GeneratedSumW2":
		col = "sumw2"
	}
	msg := ie.Reason
	if bin >= 0 {
		msg = fmt.Sprintf("%s bin %d: %s", v.Kind.IndexColumn(), bin, ie.Reason)
	}
	line := 0
	if bin >= 0 {
		line = v.lineOf(bin)
	}
	if line == 0 {
		col = ""
	}
	return &Error{File: v.File, Line: line, Field: col, Msg: msg}
}

// lineOf returns the line of the row for bin i, 0 if none.
func (v *Vector) lineOf(i int) int {
	if v == nil {
		return 0
	}
	for k, x := range v.Index {
		if x == i {
			return v.Line[k]
		}
	}
	return 0
}

// lineOf returns the line of the entry for cell (i, j), 0 if none.
func (r *Response) lineOf(i, j int) int {
	for k := range r.Reco {
		if r.Reco[k] == i && r.Truth[k] == j {
			return r.Line[k]
		}
	}
	return 0
}

// firstLines returns, per truth bin, the line of its first entry with a
// non-zero value (0 if none).
func (r *Response) firstLines(nt int) []int {
	first := make([]int, nt)
	for k, j := range r.Truth {
		if j < nt && first[j] == 0 && r.Value[k] != 0 {
			first[j] = r.Line[k]
		}
	}
	return first
}

// Matrix returns the response as a z.Reco × z.Truth compressed-column
// matrix, entries with value 0 left out, carrying the sums of squared
// weights when the table has them. It returns an *Error for an index
// beyond the sizes, a cell given twice, or a table without any positive
// entry.
func (r *Response) Matrix(z Sizes) (*sparse.Matrix, error) {
	n := len(r.Value)
	// Counting sort by truth column, then by reco row within each column;
	// the order is fixed by the indices alone.
	count := make([]int, z.Truth+1)
	nonzero := 0
	for k := 0; k < n; k++ {
		if r.Reco[k] >= z.Reco {
			return nil, beyond(r.File, r.Line[k], "reco", r.Reco[k], z.Reco, z.RecoOrigin)
		}
		if r.Truth[k] >= z.Truth {
			return nil, beyond(r.File, r.Line[k], "truth", r.Truth[k], z.Truth, z.TruthOrigin)
		}
		count[r.Truth[k]+1]++
		if r.Value[k] != 0 {
			nonzero++
		}
	}
	if nonzero == 0 {
		what := "no entries"
		if n > 0 {
			what = fmt.Sprintf("%d entries, all zero", n)
		}
		return nil, errorf(r.File, 0, "", "the response is empty (%s); it needs at least one cell with a positive value", what)
	}
	for j := 0; j < z.Truth; j++ {
		count[j+1] += count[j]
	}
	order := make([]int, n)
	next := slices.Clone(count[:z.Truth])
	for k := 0; k < n; k++ {
		j := r.Truth[k]
		order[next[j]] = k
		next[j]++
	}
	colPtr := make([]int, z.Truth+1)
	rowIdx := make([]int, 0, nonzero)
	val := make([]float64, 0, nonzero)
	var sumw2 []float64
	if r.SumW2 != nil {
		sumw2 = make([]float64, 0, nonzero)
	}
	for j := 0; j < z.Truth; j++ {
		col := order[count[j]:count[j+1]]
		slices.SortFunc(col, func(a, b int) int {
			if c := r.Reco[a] - r.Reco[b]; c != 0 {
				return c
			}
			return r.Line[a] - r.Line[b]
		})
		for c, k := range col {
			if c > 0 && r.Reco[col[c-1]] == r.Reco[k] {
				return nil, errorf(r.File, r.Line[k], "", "cell reco %d, truth %d is given twice (first on line %d); give one row per cell (rows are not summed)",
					r.Reco[k], j, r.Line[col[c-1]])
			}
			if r.Value[k] == 0 {
				continue
			}
			rowIdx = append(rowIdx, r.Reco[k])
			val = append(val, r.Value[k])
			if sumw2 != nil {
				sumw2 = append(sumw2, r.SumW2[k])
			}
		}
		colPtr[j+1] = len(val)
	}
	m, err := sparse.NewMatrix(z.Reco, z.Truth, colPtr, rowIdx, val, sumw2)
	if err != nil {
		// Cannot happen: the arrays are built valid above.
		return nil, fmt.Errorf("%s: %w", r.File, err)
	}
	return m, nil
}
