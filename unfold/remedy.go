package unfold

import (
	"fmt"
	"slices"
	"strings"
)

// NegativeCells says what to do with migration cells of negative weight
// (simulations with negative event weights, such as next-to-leading-order
// samples, have them).
type NegativeCells int

const (
	// RefuseNegative refuses a response with negative cells, listing
	// them (the default).
	RefuseNegative NegativeCells = iota
	// ClipNegative sets every negative cell to zero, listing each with
	// its value and the total weight removed (Remedies).
	ClipNegative
)

// Unexplained says what to do with data in reco bins that no truth bin
// reaches and no background explains.
type Unexplained int

const (
	// RefuseUnexplained refuses such data, listing every bin with its
	// count and the fraction of the data (the default).
	RefuseUnexplained Unexplained = iota
	// DropUnexplained removes the data of those bins (count and
	// variance set to zero), with the same list in Remedies.
	DropUnexplained
)

var (
	negativeEnum    = Enum{"unfold", "NegativeCells", "negative-cell remedy", []string{RefuseNegative: "refuse", ClipNegative: "clip"}}
	unexplainedEnum = Enum{"unfold", "Unexplained", "unexplained-data remedy", []string{RefuseUnexplained: "refuse", DropUnexplained: "drop"}}
)

// NegativeCellsModes returns the remedies in order.
func NegativeCellsModes() []NegativeCells { return []NegativeCells{RefuseNegative, ClipNegative} }

// UnexplainedModes returns the remedies in order.
func UnexplainedModes() []Unexplained { return []Unexplained{RefuseUnexplained, DropUnexplained} }

// String returns the text name ("refuse" or "clip").
func (m NegativeCells) String() string { return negativeEnum.Name(int(m)) }

// MarshalText returns the text name.
func (m NegativeCells) MarshalText() ([]byte, error) { return negativeEnum.Text(int(m)) }

// UnmarshalText sets m from its text name.
func (m *NegativeCells) UnmarshalText(text []byte) error {
	v, err := negativeEnum.Parse(text)
	*m = NegativeCells(v)
	return err
}

// String returns the text name ("refuse" or "drop").
func (m Unexplained) String() string { return unexplainedEnum.Name(int(m)) }

// MarshalText returns the text name.
func (m Unexplained) MarshalText() ([]byte, error) { return unexplainedEnum.Text(int(m)) }

// UnmarshalText sets m from its text name.
func (m *Unexplained) UnmarshalText(text []byte) error {
	v, err := unexplainedEnum.Parse(text)
	*m = Unexplained(v)
	return err
}

// Cell is one migration cell: reco bin, truth bin and its weight.
type Cell struct {
	Reco  int     `json:"reco"`
	Truth int     `json:"truth"`
	Value float64 `json:"value"`
}

// RecoCount is the data count of one reco bin.
type RecoCount struct {
	Reco  int     `json:"reco"`
	Count float64 `json:"count"`
}

// Remedies reports what Remedy changed in a problem.
type Remedies struct {
	// ClippedCells are the negative migration cells set to zero, in
	// column order; ClippedWeight is the sum of their values (≤ 0),
	// the weight removed from the migrations.
	ClippedCells  []Cell  `json:"clipped_cells,omitempty"`
	ClippedWeight float64 `json:"clipped_weight,omitempty"`
	// Dropped are the reco bins whose data no truth bin reaches and no
	// background explains, removed from the data; DroppedCount is the
	// sum of their counts and DroppedFraction its fraction of the data.
	Dropped         []RecoCount `json:"dropped_bins,omitempty"`
	DroppedCount    float64     `json:"dropped_count,omitempty"`
	DroppedFraction float64     `json:"dropped_fraction,omitempty"`
}

// Empty reports whether nothing was changed.
func (r *Remedies) Empty() bool { return r == nil || len(r.ClippedCells) == 0 && len(r.Dropped) == 0 }

// Labels name bins in messages; nil prints the bin numbers only.
type Labels func(bin int) string

func (l Labels) of(kind string, bin int) string {
	if l == nil {
		return fmt.Sprintf("%s bin %d", kind, bin)
	}
	return fmt.Sprintf("%s bin %d (%s)", kind, bin, l(bin))
}

// The words of Remedy's errors naming the setting that would remedy the
// problem; front ends replace them with their flag or key.
const (
	NegativeCellsAdvice = "the negative-cell remedy: clip"
	UnexplainedAdvice   = "the unexplained-data remedy: drop"
)

// maxListed bounds the bins an error message lists one by one.
const maxListed = 50

// Remedy applies the remedies chosen in s (nil: refuse both) to p before
// it is unfolded: negative migration cells (NegativeCells) and data in
// reco bins that no truth bin reaches and no background explains
// (Unexplained), in that order (clipping can leave a reco bin
// unreached). It returns p itself when nothing needs a remedy, otherwise
// a shallow copy with new Migrations, Data and DataVariance; p is never
// modified. reco and truth label the bins in the errors, whose Reco and
// Truth are the first bin or cell listed.
//
// Errors: *SettingsError for an unknown remedy; *InputError listing every
// negative cell with its value (refuse), or every unexplained reco bin
// with its count and the fraction of the data (refuse).
func Remedy(p *Problem, s *Settings, reco, truth Labels) (*Problem, *Remedies, error) {
	rs, err := s.Resolve()
	if err != nil {
		return nil, nil, err
	}
	rem := &Remedies{}
	if p == nil || p.Migrations == nil {
		return p, rem, nil
	}
	q := p
	a := p.Migrations
	nr, nt := a.Dims()
	colPtr, rowIdx, val := a.ColPtr(), a.RowIdx(), a.Values()
	for j := range nt {
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			if val[k] < 0 {
				rem.ClippedCells = append(rem.ClippedCells, Cell{Reco: rowIdx[k], Truth: j, Value: val[k]})
				rem.ClippedWeight += val[k]
			}
		}
	}
	if len(rem.ClippedCells) > 0 {
		if rs.NegativeCells == RefuseNegative {
			var list []string
			for k, c := range rem.ClippedCells {
				if k == maxListed {
					list = append(list, fmt.Sprintf("and %d more", len(rem.ClippedCells)-maxListed))
					break
				}
				list = append(list, fmt.Sprintf("%s × %s: %.6g", reco.of("reco", c.Reco), truth.of("truth", c.Truth), c.Value))
			}
			first := rem.ClippedCells[0]
			return nil, nil, inputErr("Migrations", first.Reco, first.Truth, "%d negative migration cells, %.6g in all (negative event weights; the iteration needs a non-negative response): %s; merge bins, use more simulated events, or clip them to zero (%s)",
				len(rem.ClippedCells), rem.ClippedWeight, strings.Join(list, ", "), NegativeCellsAdvice)
		}
		v := make([]float64, len(val))
		var w2 []float64
		if sw := a.SumW2(); sw != nil {
			w2 = append([]float64(nil), sw...)
		}
		for k, x := range val {
			v[k] = max(x, 0)
			if x < 0 && w2 != nil {
				w2[k] = 0
			}
		}
		m, err := a.WithValues(v, w2)
		if err != nil {
			return nil, nil, inputErr("Migrations", -1, -1, "%v", err)
		}
		c := *p
		c.Migrations = m
		q = &c
	}
	reach := make([]float64, nr)
	q.Migrations.RowSums(reach)
	if !slices.ContainsFunc(reach, func(x float64) bool { return x > 0 }) {
		return q, rem, nil // an empty response: Prepare refuses it
	}
	var total float64
	for i, n := range q.Data {
		total += n
		b := 0.0
		if q.Background != nil {
			b = q.Background[i]
		}
		net := n
		if rs.Background == Subtract {
			net = n - b
		}
		if net > 0 && !(reach[i] > 0) && (b == 0 || rs.Background == Subtract) {
			rem.Dropped = append(rem.Dropped, RecoCount{Reco: i, Count: n})
			rem.DroppedCount += n
		}
	}
	if len(rem.Dropped) == 0 {
		return q, rem, nil
	}
	if total > 0 {
		rem.DroppedFraction = rem.DroppedCount / total
	}
	if rs.Unexplained == RefuseUnexplained {
		var list []string
		for k, d := range rem.Dropped {
			if k == maxListed {
				list = append(list, fmt.Sprintf("and %d more", len(rem.Dropped)-maxListed))
				break
			}
			list = append(list, fmt.Sprintf("%s: %.6g", reco.of("reco", d.Reco), d.Count))
		}
		return nil, nil, inputErr("Data", rem.Dropped[0].Reco, -1, "%d reco bins hold data that no truth bin reaches and no background explains, %.6g in all (%.3g%% of the data): %s; widen the truth binning or its flows, add the background, or drop those bins (%s)",
			len(rem.Dropped), rem.DroppedCount, 100*rem.DroppedFraction, strings.Join(list, ", "), UnexplainedAdvice)
	}
	c := *q
	c.Data = append([]float64(nil), q.Data...)
	if q.DataVariance != nil {
		c.DataVariance = append([]float64(nil), q.DataVariance...)
	}
	for _, d := range rem.Dropped {
		c.Data[d.Reco] = 0
		if c.DataVariance != nil {
			c.DataVariance[d.Reco] = 0
		}
	}
	return &c, rem, nil
}
