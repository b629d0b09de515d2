package passes

import "github.com/lanthorn/lanthorn/ir"

// fuseProducts turns each tree of additions whose every leaf is a
// plaintext product read nowhere else (the diagonals of one giant step, a
// convolution's taps) into one dot op, Σ_i x_i ⊙ c_i: the runtime then
// accumulates the products in one ciphertext instead of making and adding
// each. The naive lowering keeps its separate products.
//
// The snapshot of the exact key set under a budget is fused the same way.
func fuseProducts(s *State) error {
	rewriteSums(s, fuseDots)
	return nil
}

// fuseDots rewrites p's sums of plaintext products as dot ops, with new
// ops (a snapshot may share the old ones).
func fuseDots(p *ir.Program) {
	f := newDataflow(p)
	def, reader, uses := f.def, f.reader, f.uses
	product := func(v ir.ValueID) bool {
		d := def[v]
		return d != nil && d.Kind == ir.OpMulPlain && uses[v] == 1
	}
	// sumOfProducts: v is an addition read once whose leaves are all
	// products read once.
	memo := map[ir.ValueID]bool{}
	var sumOfProducts func(v ir.ValueID) bool
	sumOfProducts = func(v ir.ValueID) bool {
		d := def[v]
		if d == nil || d.Kind != ir.OpAdd {
			return false
		}
		if r, ok := memo[v]; ok {
			return r
		}
		r := true
		for _, a := range d.Args {
			r = r && (product(a) || uses[a] == 1 && sumOfProducts(a))
		}
		memo[v] = r
		return r
	}
	drop := map[*ir.Op]bool{}
	for i, op := range p.Ops {
		if op.Kind != ir.OpAdd || !sumOfProducts(op.Results[0]) {
			continue
		}
		// A root: no reader addition absorbs it.
		if r := op.Results[0]; uses[r] == 1 && reader[r].Kind == ir.OpAdd && sumOfProducts(reader[r].Results[0]) {
			continue
		}
		var args []ir.ValueID
		var consts []int
		var walk func(v ir.ValueID)
		walk = func(v ir.ValueID) {
			d := def[v]
			drop[d] = true
			if d.Kind == ir.OpMulPlain {
				args, consts = append(args, d.Args[0]), append(consts, d.Const)
				return
			}
			walk(d.Args[0])
			walk(d.Args[1])
		}
		walk(op.Results[0])
		delete(drop, op)
		p.Ops[i] = &ir.Op{Kind: ir.OpDot, Args: args, Consts: consts, Results: op.Results, Const: -1, Layer: op.Layer}
	}
	dropOps(p, drop)
}
