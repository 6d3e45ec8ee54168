package tikhonov

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/unfold"
)

// The explicit normal matrix equals Rᵀ W R and Lᵀ L formed densely with
// gonum, entry by entry over the lower triangle, on a random 2-D problem
// with an undetermined bin (whose row holds only its unit diagonal).
func TestNormalMatrixAgainstDense(t *testing.T) {
	s := readScheme(t, "scheme2d.yaml")
	nt := s.Len()
	a, gen := randomResponse(t, 3, nt, 2*nt, 5, 2)
	truth := make([]float64, nt)
	for j := range truth {
		truth[j] = 400 + 100*math.Cos(float64(j))
	}
	pr, err := unfold.Prepare(noisyProblem(a, gen, truth, 2), unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	det := pr.Determined()
	l, err := newPenalty(s, nt, det, Curvature, false)
	if err != nil {
		t.Fatal(err)
	}
	sy := newSystem(pr, l, nil, 1e-10, 0)
	nm := newNormalMatrix(sy)
	// Dense references: R (reco × truth), W, L.
	nr := pr.RecoBins()
	r := mat.NewDense(nr, nt, nil)
	for j := range nt {
		for k := a.ColPtr()[j]; k < a.ColPtr()[j+1]; k++ {
			r.Set(a.RowIdx()[k], j, a.Values()[k]*pr.InvGenerated()[j])
		}
	}
	var wr, m mat.Dense
	wr.Mul(mat.NewDiagDense(nr, sy.w), r)
	m.Mul(r.T(), &wr)
	lm := mat.NewDense(l.rows(), nt, nil)
	for p, j := range l.idx {
		lm.Set(p/l.width, j, l.coef[p])
	}
	var ltl mat.Dense
	ltl.Mul(lm.T(), lm)
	seen := 0
	for j := range nt {
		last := -1
		for p := nm.rowPtr[j]; p < nm.rowPtr[j+1]; p++ {
			c := nm.col[p]
			if c <= last || c > j {
				t.Fatalf("row %d: columns not increasing or above the diagonal", j)
			}
			last = c
			wantM, wantL := m.At(j, c), ltl.At(j, c)
			if !det[j] {
				wantM, wantL = 1, 0
			}
			if math.Abs(nm.m[p]-wantM) > 1e-12*math.Abs(m.At(j, j)) || math.Abs(nm.l[p]-wantL) > 1e-12 {
				t.Errorf("(%d,%d): %v, %v; dense %v, %v", j, c, nm.m[p], nm.l[p], wantM, wantL)
			}
			seen++
		}
		if last != j {
			t.Errorf("row %d does not end with its diagonal", j)
		}
	}
	// Every non-zero of the dense lower triangle over determined bins is
	// on the pattern.
	nonzero := 0
	for j := range nt {
		for c := 0; c <= j; c++ {
			if det[j] && det[c] && (m.At(j, c) != 0 || ltl.At(j, c) != 0) || j == c && !det[j] {
				nonzero++
			}
		}
	}
	if seen < nonzero {
		t.Errorf("the pattern holds %d entries, the dense lower triangle %d non-zeros", seen, nonzero)
	}
}

// On a pattern that Cholesky does not fill (a tridiagonal matrix), the
// incomplete factorisation is the complete one: it equals gonum's
// Cholesky factor, and the preconditioner solves the system exactly
// (common practice: the Cholesky factor of a banded matrix stays inside
// the band; G. H. Golub and C. F. Van Loan, Matrix Computations, §4.3).
func TestIncompleteCholeskyExactWithoutFill(t *testing.T) {
	const n = 9
	nm := &normalMatrix{rowPtr: []int{0}}
	dense := mat.NewSymDense(n, nil)
	for i := range n {
		if i > 0 {
			off := -1 - 0.1*float64(i)
			nm.col, nm.m, nm.l = append(nm.col, i-1), append(nm.m, off), append(nm.l, 0.5)
			dense.SetSym(i, i-1, off+0.25*0.5)
		}
		d := 4 + float64(i%3)
		nm.col, nm.m, nm.l = append(nm.col, i), append(nm.m, d), append(nm.l, 1)
		dense.SetSym(i, i, d+0.25)
		nm.rowPtr = append(nm.rowPtr, len(nm.col))
	}
	ic := newIchol(nm, 0.5) // τ² = 0.25
	if ic == nil || ic.shift != 0 {
		t.Fatalf("factorisation failed or needed a shift: %+v", ic)
	}
	var chol mat.Cholesky
	if !chol.Factorize(dense) {
		t.Fatal("gonum: not positive definite")
	}
	var lt mat.TriDense
	chol.LTo(&lt)
	for i := range n {
		for p := nm.rowPtr[i]; p < nm.rowPtr[i+1]; p++ {
			if c := nm.col[p]; math.Abs(ic.f[p]-lt.At(i, c)) > 1e-14*lt.At(i, i) {
				t.Errorf("L(%d,%d) = %v, gonum %v", i, c, ic.f[p], lt.At(i, c))
			}
		}
	}
	rhs := make([]float64, n)
	for i := range rhs {
		rhs[i] = float64(i*i) - 3
	}
	z := make([]float64, n)
	ic.apply(z, rhs)
	var want mat.VecDense
	if err := chol.SolveVecTo(&want, mat.NewVecDense(n, rhs)); err != nil {
		t.Fatal(err)
	}
	for i := range z {
		if math.Abs(z[i]-want.AtVec(i)) > 1e-12*math.Abs(want.AtVec(i))+1e-14 {
			t.Errorf("z[%d] = %v, gonum %v", i, z[i], want.AtVec(i))
		}
	}
}

// A matrix whose factorisation meets a non-positive pivot is factorised
// with a shifted diagonal (Manteuffel 1980), and the shift is recorded:
// [[1, 1.1], [1.1, 1]] has the pivot 1 − 1.21 < 0 unshifted and needs a
// relative shift above 0.1.
func TestIncompleteCholeskyShift(t *testing.T) {
	nm := &normalMatrix{rowPtr: []int{0, 1, 3}, col: []int{0, 0, 1}, m: []float64{1, 1.1, 1}, l: []float64{0, 0, 0}}
	ic := newIchol(nm, 1)
	if ic == nil || !(ic.shift > 0.1) {
		t.Fatalf("want a factorisation shifted by more than 0.1, got %+v", ic)
	}
	if want := math.Sqrt(2 - 1.21/2); math.Abs(ic.f[2]-want) > 1e-15 {
		t.Errorf("last pivot %v, want %v", ic.f[2], want)
	}
}
