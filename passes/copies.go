package passes

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// The copies method (Method Copies) is the block method over a sum of
// shifted copies of a sparse input. When only the slots L of the input may
// be nonzero and the shifts S (0 ∈ S) keep the sets L + σ disjoint, the
// sum x̃ = Σ_{σ∈S} rot_{−σ}(x) holds x[p] at every slot p + σ, exactly:
// the other copies put zeros there. Entry (t, c) of the matrix can then be
// read at any of the |S| slots c + σ, that is on folded diagonal
// (c + σ − t) mod B of the block method, so a small set H of folded
// diagonals that meets every entry's |S| choices (a covering of the
// residues (c − t) mod B by H − S) does the work of all B: |S| − 1
// rotations of x in one hoisted set, then the baby-step giant-step product
// over |H| diagonals of x̃, and the log2(D/B) folds. Each entry is read
// from exactly one copy. It is common practice in hand-tuned packings of
// sparse vectors (from memory); a convolution's spread output (spread.go)
// is such a vector.

// errNoCopies says that the copies method does not apply to a layer: its
// input's zeros are not proven, or no two copies fit.
var errNoCopies = errors.New("the copies method does not apply: no two shifted copies of the input fit in its provably zero slots")

// copyPlan is the copies method for one layer.
type copyPlan struct {
	shifts []int             // S, 0 first: x̃ = Σ rot_{−σ}(x)
	diags  map[int][]float64 // the folded diagonals h_k of x̃, k ∈ H
	B      int               // the block
	cover  map[int]int       // residue (c − t) mod B → the shift it is read through
}

// knownZeros returns which slots of the vector the given layers make, in
// a period of D, hold exactly zero whatever matrix method each of them
// takes, given the zero slots of their input (nil: nothing known); nil
// when nothing is known. The program's own input is never trusted to be
// zero anywhere (the client pads it, but the evaluator cannot check that),
// so lower starts from nil.
//
// A dense or linear layer's output slot s is zero when the row it holds
// is zero with a zero bias, or holds no row: with the block method of block
// B = nextPow2(Out) < D, slot s holds row s mod B (the result repeats with
// period B), otherwise row s, and no row beyond Out. An activation keeps
// the zeros when it maps zero to zero (square, a polynomial with p(0) = 0:
// keep says so for each layer); any other layer, or a vector wider than one
// ciphertext, forgets everything.
func knownZeros(zero []bool, layers []*ir.Layer, D int, keep func(*ir.Layer) bool) []bool {
	for _, l := range layers {
		if l.In > D || l.Out > D {
			return nil
		}
		switch l.Kind {
		case ir.Dense, ir.Linear:
			zero = linearZeros(l, D)
		case ir.Activation:
			if !keep(l) {
				zero = nil
			}
		default:
			zero = nil
		}
	}
	return zero
}

// linearZeros is the zero slots of a linear layer's output (knownZeros).
func linearZeros(l *ir.Layer, D int) []bool {
	rowZero := make([]bool, l.Out)
	for t := range l.Out {
		z := l.Bias == nil || l.Bias[t] == 0
		if l.Kind == ir.Dense {
			for _, v := range l.Weights[t] {
				z = z && v == 0
			}
		} else {
			for _, e := range l.Map.Row[t] {
				z = z && e.Val == 0
			}
		}
		rowZero[t] = z
	}
	period := D
	if B := nextPow2(l.Out); B < D {
		period = B
	}
	zero := make([]bool, D)
	for s := range zero {
		r := s % period
		zero[s] = r >= l.Out || rowZero[r]
	}
	return zero
}

// zeroAtZero reports whether an activation maps an exact zero to zero:
// square, or a polynomial whose value at zero is zero (in the Chebyshev
// basis over [-1, 1], Σ c_k T_k(0) with T_k(0) = 0 for odd k and (−1)^(k/2)
// for even k).
func zeroAtZero(a *ir.Act) bool {
	if a == nil {
		return false
	}
	if a.Func == ir.Square {
		return true
	}
	if len(a.Coeffs) == 0 {
		return false
	}
	switch a.Basis {
	case ir.Monomial:
		return a.Coeffs[0] == 0
	case ir.Chebyshev:
		if a.Interval != [2]float64{-1, 1} {
			return false // zero is not the interpolant's t = 0 until the interval is folded
		}
		sum := 0.0
		for k := 0; k < len(a.Coeffs); k += 2 {
			if k%4 == 0 {
				sum += a.Coeffs[k]
			} else {
				sum -= a.Coeffs[k]
			}
		}
		return sum == 0
	}
	return false
}

// copyEntry is one nonzero matrix entry read by the copies method.
type copyEntry struct {
	t, c int
	v    float64
}

// planCopies finds the shifts and the folded diagonals of the copies
// method for the entries of an Out×D matrix (rows below B = nextPow2(Out)
// < D) reading an input whose slots zero[s] are exactly zero. Entries on
// zero columns are dropped (they multiply zeros). It fails when fewer than
// two copies fit. The shifts are chosen greedily, each the one that most
// lowers copyScore; the diagonals by coverResidues.
func planCopies(entries []copyEntry, zero []bool, B, D int) (*copyPlan, error) {
	if zero == nil || B >= D || len(zero) != D {
		return nil, errNoCopies
	}
	var live []int
	for s, z := range zero {
		if !z {
			live = append(live, s)
		}
	}
	if len(live) == 0 || 2*len(live) > D {
		return nil, errNoCopies
	}
	// apart[d]: L and L + d are disjoint (1), or not (2); 0 not known yet.
	apart := make([]int8, D)
	disjoint := func(d int) bool {
		d = ((d % D) + D) % D
		if d == 0 {
			return false
		}
		if apart[d] == 0 {
			apart[d] = 1
			for _, a := range live {
				if !zero[(a+d)%D] {
					apart[d] = 2
					break
				}
			}
		}
		return apart[d] == 1
	}
	residues := make([]bool, B)
	var kept []copyEntry
	for _, e := range entries {
		if e.v == 0 || zero[e.c] {
			continue
		}
		kept = append(kept, e)
		residues[((e.c-e.t)%B+B)%B] = true
	}
	if len(kept) == 0 {
		return nil, errNoCopies
	}
	shifts := []int{0}
	score := copyScore(1, len(coverResidues(residues, shifts, B, false)))
	// fits tells whether the shifts add keep every copy apart from the
	// others and from the shifts so far.
	fits := func(add []int) bool {
		for i, a := range add {
			for _, o := range shifts {
				if !disjoint(a - o) {
					return false
				}
			}
			for _, o := range add[:i] {
				if !disjoint(a - o) {
					return false
				}
			}
		}
		return true
	}
	// Each round adds one shift, or doubles the set with S + σ (the sums
	// of a few shifts tile best, see coverResidues), whichever lowers the
	// score most; for each residue of σ mod min(B, maxCoverPeriod) (all
	// that the covers see), the smallest σ that fits.
	for {
		var bestAdd []int
		bestScore := score
		for double := range 2 {
			if n := len(shifts) + max(1, double*len(shifts)); n*len(live) > D {
				continue // the copies would not fit
			}
			classes := min(B, maxCoverPeriod)
			for rho := 1; rho < classes; rho++ {
				var add []int
				for sigma := rho; sigma < D; sigma += classes {
					add = []int{sigma}
					if double == 1 {
						add = add[:0]
						for _, o := range shifts {
							add = append(add, (o+sigma)%D)
						}
					}
					if fits(add) {
						break
					}
					add = nil
				}
				if add == nil {
					continue
				}
				h := coverResidues(residues, append(slices.Clone(shifts), add...), B, false)
				if sc := copyScore(len(shifts)+len(add), len(h)); sc < bestScore {
					bestAdd, bestScore = add, sc
				}
			}
		}
		if bestAdd == nil {
			break
		}
		shifts = append(shifts, bestAdd...)
		score = bestScore
	}
	if len(shifts) < 2 {
		return nil, errNoCopies
	}
	H := coverResidues(residues, shifts, B, true)
	inH := make([]bool, B)
	for _, k := range H {
		inH[k] = true
	}
	cp := &copyPlan{shifts: shifts, diags: map[int][]float64{}, B: B, cover: map[int]int{}}
	for r := range B {
		if !residues[r] {
			continue
		}
		for _, s := range shifts {
			if inH[(r+s)%B] {
				cp.cover[r] = s
				break
			}
		}
	}
	for _, e := range kept {
		s, ok := cp.cover[((e.c-e.t)%B+B)%B]
		if !ok {
			return nil, fmt.Errorf("internal error: copies: residue of entry (%d, %d) not covered", e.t, e.c)
		}
		K := ((e.c+s-e.t)%D + D) % D
		k := K % B
		d, ok := cp.diags[k]
		if !ok {
			d = make([]float64, D)
			cp.diags[k] = d
		}
		d[K/B*B+e.t] += e.v
	}
	for k, d := range cp.diags {
		if allZero(d) {
			delete(cp.diags, k)
		}
	}
	return cp, nil
}

// copyScore weighs a plan with n copies and h diagonals: a rotation (the
// n − 1 shifts, and about 2√h − 2 for the baby-step giant-step split)
// counted as 8 plaintext products, about the ratio of their times at the
// middle levels of the default profile. It only ranks shifts; the
// selection prices the lowered layer.
func copyScore(n, h int) float64 {
	bsgs := math.MaxInt
	for n1 := 1; n1 <= h; n1++ {
		bsgs = min(bsgs, n1-1+(h+n1-1)/n1-1)
	}
	if h == 0 {
		bsgs = 0
	}
	return 8*float64(n-1+bsgs) + float64(h)
}

// maxCoverPeriod bounds the periods m of the covers coverResidues tries,
// so that the search stays near B² steps per candidate at most: a greedy
// cover of ℤ_m takes about m² steps, and the shifts are chosen from about
// m candidates.
const maxCoverPeriod = 128

// coverResidues returns, in ascending order, a small set H of folded
// diagonals such that every residue r with need[r] has a shift σ with
// (r + σ) mod B in H. It tries, for each power of two m dividing B up to
// maxCoverPeriod, the periodic sets H = T + mℤ_B, where T covers the
// residues mod m with the shifts mod m: a shift set such as {0, 1, 28, 29}
// tiles ℤ_8 with T = {0, 2}, so H has B/4 diagonals, which a greedy cover
// of ℤ_B alone misses.
// T is greedy (greedyCover: the diagonal that meets the most residues not
// yet met, ties to the smallest); with thorough set, also the greedy
// covers started from each diagonal and those that meet the smallest
// residue not yet met first, keeping the smallest. Ties go to the
// smallest m.
func coverResidues(need []bool, shifts []int, B int, thorough bool) []int {
	var best []int
	for m := 1; m <= min(B, maxCoverPeriod); m *= 2 {
		needM := make([]bool, m)
		for r, n := range need {
			if n {
				needM[r%m] = true
			}
		}
		var sm []int
		for _, s := range shifts {
			if r := s % m; !slices.Contains(sm, r) {
				sm = append(sm, r)
			}
		}
		T := greedyCover(needM, sm, m, -1, false)
		if thorough {
			for first := range m {
				for _, smallest := range []bool{false, true} {
					if c := greedyCover(needM, sm, m, first, smallest); len(c) < len(T) {
						T = c
					}
				}
			}
		}
		if best != nil && len(T)*(B/m) >= len(best) {
			continue
		}
		best = best[:0]
		for a := 0; a < B; a += m {
			for _, t := range T {
				best = append(best, a+t)
			}
		}
	}
	slices.Sort(best)
	return best
}

// greedyCover is one greedy cover (coverResidues): first (≥ 0) is taken
// first; with smallest, each step meets the smallest residue not yet met
// by the diagonal among its |S| that meets the most others.
func greedyCover(need []bool, shifts []int, B, first int, smallest bool) []int {
	met := make([]bool, B)
	left := 0
	for r := range B {
		if need[r] {
			left++
		}
	}
	gain := func(k int) int {
		n := 0
		for _, s := range shifts {
			if r := ((k-s)%B + B) % B; need[r] && !met[r] {
				n++
			}
		}
		return n
	}
	take := func(k int) {
		for _, s := range shifts {
			if r := ((k-s)%B + B) % B; need[r] && !met[r] {
				met[r] = true
				left--
			}
		}
	}
	var H []int
	if first >= 0 && gain(first) > 0 {
		H = append(H, first)
		take(first)
	}
	for left > 0 {
		bestK, bestG := -1, 0
		if smallest {
			r := 0
			for met[r] || !need[r] {
				r++
			}
			for _, s := range shifts {
				k := (r + s) % B
				if g := gain(k); g > bestG || g == bestG && k < bestK {
					bestK, bestG = k, g
				}
			}
		} else {
			for k := range B {
				if g := gain(k); g > bestG {
					bestK, bestG = k, g
				}
			}
		}
		H = append(H, bestK)
		take(bestK)
	}
	// Drop diagonals whose residues the others meet too.
	count := make([]int, B)
	for _, k := range H {
		for _, s := range shifts {
			if r := ((k-s)%B + B) % B; need[r] {
				count[r]++
			}
		}
	}
	var out []int
	for i := len(H) - 1; i >= 0; i-- {
		k, redundant := H[i], true
		for _, s := range shifts {
			if r := ((k-s)%B + B) % B; need[r] && count[r] < 2 {
				redundant = false
			}
		}
		if redundant {
			for _, s := range shifts {
				if r := ((k-s)%B + B) % B; need[r] {
					count[r]--
				}
			}
			continue
		}
		out = append(out, k)
	}
	slices.Sort(out)
	return out
}
