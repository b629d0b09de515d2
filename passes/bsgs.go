package passes

import (
	"math"
	"slices"
)

// split is a baby-step giant-step split of the diagonals of a matrix in a
// period of D slots: diagonal k is rot_{g·n1} ∘ rot_i with k ≡ g·n1 + i
// (mod D), the baby step i in the window [i0, i0 + n1) and the giant step g
// a signed integer. A window centred on zero (i0 < 0) serves matrices whose
// diagonals cluster on both sides of the main one, such as a convolution's
// taps above and left of the output: a 5×5 kernel on rows of 28 slots
// takes 4 baby and 4 giant rotations instead of 12.
type split struct {
	n1, i0    int
	signed    bool // k is read as an offset in (−D/2, D/2], not in [0, D)
	rotations int  // distinct nonzero baby steps plus distinct nonzero giant steps
}

// parts returns the baby and giant step of diagonal k ∈ [0, D), read as
// the signed offset in (−D/2, D/2] when the split is signed.
func (s split) parts(k, D int) (i, g int) {
	if s.signed && k > D/2 {
		k -= D
	}
	i = s.i0 + ((k-s.i0)%s.n1+s.n1)%s.n1
	return i, (k - i) / s.n1
}

// bestSplit picks the split with the fewest rotations, over every n1 and
// three readings: the plain one (k in [0, D), window from 0), and signed
// offsets with the window from 0 or from −⌊n1/2⌋. Ties go to the smallest
// n1, then to the readings in that order.
func bestSplit(diags map[int][]float64, D int) split {
	keys := make([]int, 0, len(diags))
	for k := range diags {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	// seenI[D+i] == round marks baby step i as counted in this round;
	// likewise seenG. Baby steps lie in (−D/2, D], giant steps in [−D, D].
	seenI, seenG := make([]int, 2*D+1), make([]int, 2*D+1)
	best := split{n1: 1, rotations: math.MaxInt}
	round := 0
	for n1 := 1; n1 <= D; n1++ {
		readings := []split{{n1: n1}, {n1: n1, signed: true}}
		if n1 > 1 {
			readings = append(readings, split{n1: n1, i0: -(n1 / 2), signed: true})
		}
		for _, s := range readings {
			round++
			for _, k := range keys {
				i, g := s.parts(k, D)
				if i != 0 && seenI[D+i] != round {
					seenI[D+i] = round
					s.rotations++
				}
				if g != 0 && seenG[D+g] != round {
					seenG[D+g] = round
					s.rotations++
				}
				if s.rotations >= best.rotations {
					break // no better than the best: ties keep the earlier split
				}
			}
			if s.rotations < best.rotations {
				best = s
			}
		}
	}
	return best
}
