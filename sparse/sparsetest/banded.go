// Package sparsetest makes synthetic sparse matrices for the tests and
// benchmarks of package sparse and of the packages that use it, and holds
// the memory-bandwidth yardstick (Triad) their benchmarks compare with.
// It does not import package sparse, so that package's own tests can use
// it: a matrix comes as its compressed-column arrays, the arguments of
// sparse.NewMatrix.
package sparsetest

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// Matrix is a matrix in compressed-column form: column j has the rows
// RowIdx[ColPtr[j]:ColPtr[j+1]] (strictly increasing) with the values
// Val[ColPtr[j]:ColPtr[j+1]], as sparse.NewMatrix takes them.
type Matrix struct {
	Rows, Cols     int
	ColPtr, RowIdx []int
	Val            []float64
}

// Banded3D returns a synthetic response matrix with the structure of a
// fine three-dimensional analysis, for benchmarks and tests: columns are
// the cells of a truth grid of truth[0]×truth[1]×truth[2] bins, rows the
// cells of a reco grid of reco[0]×reco[1]×reco[2] bins (the first axis
// varies fastest in both global indices). Truth cell t along an axis maps
// to the reco cell c = ⌊(t+½)·nreco/ntruth⌋; its migrations go to perCol
// distinct reco cells drawn at random from the hood[0]×hood[1]×hood[2]
// neighbourhood starting at c−⌊hood/2⌋ on each axis (clipped at the grid
// edges; all of them if fewer than perCol remain). The weights follow a
// Gaussian profile in the distance from c, times a random factor, and sum
// in each column to an efficiency drawn uniformly from [0.6, 0.95].
//
// The matrix depends only on the arguments (the random numbers come from
// a PCG generator seeded with seed). Banded3D returns an error for
// non-positive sizes or a matrix too large to index.
//
// With truth {100,100,50}, reco {100,100,100}, hood {3,3,4} and perCol 20
// it is the 500,000×1,000,000 matrix of about 10 million non-zeros used by
// the benchmarks of package sparse.
func Banded3D(truth, reco, hood [3]int, perCol int, seed uint64) (*Matrix, error) {
	nt, nr, nh := 1, 1, 1
	for a := 0; a < 3; a++ {
		if truth[a] <= 0 || reco[a] <= 0 || hood[a] <= 0 {
			return nil, fmt.Errorf("sparsetest: Banded3D sizes must be positive (truth %v, reco %v, hood %v)", truth, reco, hood)
		}
		nt *= truth[a]
		nr *= reco[a]
		nh *= hood[a]
	}
	if perCol <= 0 {
		return nil, fmt.Errorf("sparsetest: Banded3D needs a positive number of entries per column, not %d", perCol)
	}
	if nt > math.MaxInt32 || nr > math.MaxInt32 || float64(nt)*float64(min(perCol, nh)) > 1<<40 {
		return nil, fmt.Errorf("sparsetest: Banded3D matrix %d×%d is too large", nr, nt)
	}
	rng := rand.New(rand.NewPCG(seed, 0x62616e646564)) // stream "banded"
	colPtr := make([]int, nt+1)
	rowIdx := make([]int, 0, nt*min(perCol, nh))
	val := make([]float64, 0, cap(rowIdx))
	cand := make([]int, 0, nh)
	dist := make([]float64, 0, nh)
	var t [3]int
	for j := 0; j < nt; j++ {
		t[0], t[1], t[2] = j%truth[0], (j/truth[0])%truth[1], j/(truth[0]*truth[1])
		var c, s [3]int
		var center [3]float64
		for a := 0; a < 3; a++ {
			center[a] = (float64(t[a]) + 0.5) * float64(reco[a]) / float64(truth[a])
			c[a] = int(center[a])
			s[a] = c[a] - hood[a]/2
		}
		// Candidates in increasing global row order (axis 2 slowest).
		cand, dist = cand[:0], dist[:0]
		for dz := 0; dz < hood[2]; dz++ {
			z := s[2] + dz
			if z < 0 || z >= reco[2] {
				continue
			}
			for dy := 0; dy < hood[1]; dy++ {
				y := s[1] + dy
				if y < 0 || y >= reco[1] {
					continue
				}
				for dx := 0; dx < hood[0]; dx++ {
					x := s[0] + dx
					if x < 0 || x >= reco[0] {
						continue
					}
					cand = append(cand, x+reco[0]*(y+reco[1]*z))
					d := 0.0
					for a, v := range [3]int{x, y, z} {
						u := (float64(v) + 0.5 - center[a]) / (0.5 * float64(hood[a]))
						d += u * u
					}
					dist = append(dist, d)
				}
			}
		}
		// Keep perCol of them: a partial Fisher-Yates shuffle picks the
		// subset, which is then put back in increasing row order.
		k := min(perCol, len(cand))
		for i := 0; i < k; i++ {
			r := i + rng.IntN(len(cand)-i)
			cand[i], cand[r] = cand[r], cand[i]
			dist[i], dist[r] = dist[r], dist[i]
		}
		cand, dist = cand[:k], dist[:k]
		for i := 1; i < k; i++ {
			for q := i; q > 0 && cand[q] < cand[q-1]; q-- {
				cand[q], cand[q-1] = cand[q-1], cand[q]
				dist[q], dist[q-1] = dist[q-1], dist[q]
			}
		}
		eps := 0.6 + 0.35*rng.Float64()
		start := len(val)
		var sum float64
		for i := range cand {
			w := math.Exp(-dist[i]) * (0.5 + rng.Float64())
			rowIdx = append(rowIdx, cand[i])
			val = append(val, w)
			sum += w
		}
		for i := start; i < len(val); i++ {
			val[i] *= eps / sum
		}
		colPtr[j+1] = len(val)
	}
	return &Matrix{Rows: nr, Cols: nt, ColPtr: colPtr, RowIdx: rowIdx, Val: val}, nil
}
