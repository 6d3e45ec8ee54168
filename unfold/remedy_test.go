package unfold_test

import (
	"context"
	"errors"
	"slices"
	"strings"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

// cscOf builds a reco × truth matrix from its cells, column by column.
func cscOf(t *testing.T, nr, nt int, cells []unfold.Cell) *sparse.Matrix {
	t.Helper()
	colPtr := make([]int, nt+1)
	var rowIdx []int
	var val []float64
	for j := range nt {
		for _, c := range cells {
			if c.Truth == j {
				rowIdx = append(rowIdx, c.Reco)
				val = append(val, c.Value)
			}
		}
		colPtr[j+1] = len(rowIdx)
	}
	m, err := sparse.NewMatrix(nr, nt, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// The remedies on a small problem checked by hand: 5 reco × 2 truth
// bins, one negative cell (reco 2, truth 0, weight −1) and two reco bins
// (3 and 4) that no truth bin reaches, holding 5 and 2 of the 34 data
// counts. Clipping reports exactly that cell and a removed weight equal
// to its value; dropping reports both bins with 7 counts, 7/34 of the
// data; and the unfolding of the remedied problem is, bit for bit, the
// unfolding of the same problem with the cell and the two bins' data
// removed by hand (common practice: clipping negative cells and dropping
// unreachable bins are the two usual remedies; the comparison is with
// the same method on the problem edited by hand).
func TestRemedyByHand(t *testing.T) {
	cells := []unfold.Cell{{0, 0, 10}, {1, 0, 4}, {2, 0, -1}, {0, 1, 2}, {1, 1, 8}, {2, 1, 3}}
	p := &unfold.Problem{
		Migrations: cscOf(t, 5, 2, cells),
		Generated:  []float64{20, 20},
		Data:       []float64{12, 12, 3, 5, 2},
	}
	labels := func(b int) string { return "b" + string(rune('A'+b)) }

	// Refused by default, every cell and every bin listed.
	_, _, err := unfold.Remedy(p, nil, labels, labels)
	var ie *unfold.InputError
	if !errors.As(err, &ie) || !strings.Contains(err.Error(), "reco bin 2 (bC) × truth bin 0 (bA): -1") {
		t.Errorf("negative cell refused with %v", err)
	}
	_, _, err = unfold.Remedy(p, &unfold.Settings{NegativeCells: unfold.ClipNegative}, labels, labels)
	// 7 of 34 counts: 20.6 % (by hand).
	for _, want := range []string{"2 reco bins", "reco bin 3 (bD): 5", "reco bin 4 (bE): 2", "7 in all (20.6% of the data)"} {
		if err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("unexplained data refused with %v, want %q", err, want)
		}
	}

	s := &unfold.Settings{NegativeCells: unfold.ClipNegative, Unexplained: unfold.DropUnexplained}
	q, rem, err := unfold.Remedy(p, s, labels, labels)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(rem.ClippedCells, []unfold.Cell{{2, 0, -1}}) || rem.ClippedWeight != -1 {
		t.Errorf("clipped %v, weight %v; want the one cell (2, 0) of -1", rem.ClippedCells, rem.ClippedWeight)
	}
	var sum float64
	for _, c := range rem.ClippedCells {
		sum += c.Value
	}
	if sum != rem.ClippedWeight {
		t.Errorf("reported removed weight %v, sum of the clipped cells %v", rem.ClippedWeight, sum)
	}
	if !slices.Equal(rem.Dropped, []unfold.RecoCount{{3, 5}, {4, 2}}) || rem.DroppedCount != 7 || rem.DroppedFraction != 7.0/34 {
		t.Errorf("dropped %v, count %v, fraction %v; want bins 3 and 4, 7, 7/34", rem.Dropped, rem.DroppedCount, rem.DroppedFraction)
	}
	if p.Data[3] != 5 || p.Migrations.Values()[2] != -1 {
		t.Error("Remedy modified its input")
	}

	hand := &unfold.Problem{
		Migrations: cscOf(t, 5, 2, []unfold.Cell{{0, 0, 10}, {1, 0, 4}, {0, 1, 2}, {1, 1, 8}, {2, 1, 3}}),
		Generated:  []float64{20, 20},
		Data:       []float64{12, 12, 3, 0, 0},
	}
	m := &bayes.Settings{Iterations: 3}
	cov := &unfold.Settings{Covariance: unfold.Full}
	got, err := unfold.Unfold(context.Background(), q, cov, m)
	if err != nil {
		t.Fatal(err)
	}
	want, err := unfold.Unfold(context.Background(), hand, cov, m)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(got.Estimate, want.Estimate) || !slices.Equal(got.Uncertainty, want.Uncertainty) {
		t.Errorf("remedied problem gives %v ± %v, the problem edited by hand %v ± %v", got.Estimate, got.Uncertainty, want.Estimate, want.Uncertainty)
	}

	// Nothing to remedy: the problem itself comes back.
	if q2, rem2, err := unfold.Remedy(hand, s, nil, nil); err != nil || q2 != hand || !rem2.Empty() {
		t.Errorf("Remedy of a clean problem: %p (%p), %+v, %v", q2, hand, rem2, err)
	}
}
