package passes

import (
	"fmt"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// The naive lowering (Options.Naive) is the yardstick the optimisations are
// measured against (the benchmark in package bench, `lanthorn build -naive`).
// It keeps the graph passes, the slot layout and the selection, and gives up
// every ciphertext-level saving:
//
//   - a linear layer is the plain diagonal method over the whole period D:
//     for each nonzero diagonal k, one rotation of the input by k with its
//     own key switch (no baby-step giant-step split, no hoisting, no block
//     folding), then one plaintext product (naiveMatVec; naiveBlockMatVec
//     where vectors span several ciphertexts);
//   - every product is rescaled as soon as it is formed, before it is
//     summed: one rescale per plaintext product instead of one per layer
//     (naiveRescale, called by placeRescale);
//   - every ciphertext product is relinearized right after it is formed,
//     which is what placeRelinearize does today (TestNaiveLowering checks
//     it, so that a lazier placeRelinearize keeps an eager form for this
//     option).
//
// Activations are lowered as usual: their polynomials are evaluated by the
// runtime.

// naiveMatVec emits y = Σ_k diag_k ⊙ rot_k(x) + b over the nonzero
// diagonals k in ascending order, with diag_k[t] = W[t][(t+k) mod D]: one
// rotation and one plaintext product per diagonal, summed in a chain.
func (b *builder) naiveMatVec(l *ir.Layer, diags map[int][]float64, x ir.ValueID, info *ir.LayerInfo) (ir.ValueID, error) {
	D := b.p.Period
	ks := make([]int, 0, len(diags))
	for k := range diags {
		ks = append(ks, k)
	}
	slices.Sort(ks)
	if len(ks) == 0 {
		return 0, fmt.Errorf("%s: %s: every weight is zero; the layer is a constant and need not be encrypted", l.Pos, l.Name)
	}
	info.Kind += " (naive: one rotation per diagonal)"
	var acc ir.ValueID
	for n, k := range ks {
		r := x
		if k != 0 {
			r = b.rotate(x, k, fmt.Sprintf("Diag%d", k))
			info.Rotations++
		}
		prod := b.withConst(ir.OpMulPlain, fmt.Sprintf("Prod%d", k), r,
			&ir.Const{Name: fmt.Sprintf("%s.diag%d", l.Name, k), Kind: ir.Vector, Data: slices.Clone(diags[k])})
		info.PlainMuls++
		if n == 0 {
			acc = prod
		} else {
			acc = b.op(ir.OpAdd, fmt.Sprintf("Sum%d", k), acc, prod)
		}
	}
	bias := make([]float64, D)
	copy(bias, l.Bias)
	if !allZero(bias) {
		acc = b.withConst(ir.OpAddPlain, "Out", acc,
			&ir.Const{Name: l.Name + ".bias", Kind: ir.Vector, Data: bias})
	}
	return acc, nil
}

// naiveBlockMatVec is naiveMatVec for a layer whose input or output spans
// several ciphertexts of D = Period values: block (j, i) of the matrix maps
// input chunk i to output chunk j, and
//
//	y_j = Σ_i Σ_k diag^{ji}_k ⊙ rot_k(x_i) + b_j
//
// over the nonzero diagonals k of each block, with one rotation per
// nonzero diagonal k of each input chunk (made once, for the first output
// chunk that needs it) and one plaintext product per block diagonal.
func (b *builder) naiveBlockMatVec(l *ir.Layer, xs []ir.ValueID, info *ir.LayerInfo, entries func(func(r, c int, v float64))) ([]ir.ValueID, error) {
	D := b.p.Period
	in, out := (l.In+D-1)/D, (l.Out+D-1)/D
	if len(xs) != in {
		return nil, fmt.Errorf("%s: %s: input in %d ciphertexts, the layer reads %d values (%d chunks of %d)", l.Pos, l.Name, len(xs), l.In, in, D)
	}
	type key struct{ j, i, k int } // output chunk, input chunk, diagonal
	diags := map[key][]float64{}
	entries(func(r, c int, v float64) {
		if v == 0 {
			return
		}
		t := r % D
		k := key{r / D, c / D, ((c%D-t)%D + D) % D}
		if diags[k] == nil {
			diags[k] = make([]float64, D)
		}
		diags[k][t] += v
	})
	var keys []key
	for k, d := range diags {
		if !allZero(d) {
			keys = append(keys, k)
		}
	}
	slices.SortFunc(keys, func(a, b key) int {
		if a.j != b.j {
			return a.j - b.j
		}
		if a.i != b.i {
			return a.i - b.i
		}
		return a.k - b.k
	})
	rot := map[[2]int]ir.ValueID{}
	ys := make([]ir.ValueID, out)
	for j := range out {
		var acc ir.ValueID
		have := false
		for _, k := range keys {
			if k.j != j {
				continue
			}
			r, ok := rot[[2]int{k.i, k.k}]
			switch {
			case ok:
			case k.k == 0:
				r = xs[k.i]
			default:
				r = b.rotate(xs[k.i], k.k, fmt.Sprintf("In%dDiag%d", k.i, k.k))
				rot[[2]int{k.i, k.k}] = r
				info.Rotations++
			}
			prod := b.withConst(ir.OpMulPlain, fmt.Sprintf("Out%dIn%dProd%d", j, k.i, k.k), r,
				&ir.Const{Name: fmt.Sprintf("%s.out%d.in%d.diag%d", l.Name, j, k.i, k.k), Kind: ir.Vector, Data: diags[k]})
			info.PlainMuls++
			if have {
				acc = b.op(ir.OpAdd, fmt.Sprintf("Out%dSum%d_%d", j, k.i, k.k), acc, prod)
			} else {
				acc, have = prod, true
			}
		}
		if !have {
			return nil, fmt.Errorf("%s: %s: every weight of outputs %d..%d is zero; they are constants and need not be encrypted", l.Pos, l.Name, j*D, min(l.Out, (j+1)*D)-1)
		}
		bias := make([]float64, D)
		for t := range bias {
			if r := j*D + t; r < len(l.Bias) {
				bias[t] = l.Bias[r]
			}
		}
		if !allZero(bias) {
			acc = b.withConst(ir.OpAddPlain, fmt.Sprintf("Out%d", j), acc,
				&ir.Const{Name: fmt.Sprintf("%s.out%d.bias", l.Name, j), Kind: ir.Vector, Data: bias})
		}
		ys[j] = acc
	}
	info.Kind += fmt.Sprintf(" (%d×%d blocks of %d; naive: one rotation per diagonal)", out, in, D)
	return ys, nil
}

// naiveRescale reports whether, under Options.Naive, the product made by
// op is rescaled at once whatever its uses: every product except a
// ciphertext product, which is rescaled after its relinearization.
func naiveRescale(s *State, op *ir.Op) bool {
	return s.Opts.Naive && op.Kind != ir.OpMul
}
