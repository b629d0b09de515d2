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
//     folding), then one plaintext product (naiveMatVec);
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

// naiveRescale reports whether, under Options.Naive, the product made by
// op is rescaled at once whatever its uses: every product except a
// ciphertext product, which is rescaled after its relinearization.
func naiveRescale(s *State, op *ir.Op) bool {
	return s.Opts.Naive && op.Kind != ir.OpMul
}
