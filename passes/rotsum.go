package passes

import "github.com/lanthorn/lanthorn/ir"

// sumRotations merges each tree of additions that sums two or more
// rotations into one rotate-sum op: the rotations' key switches are added
// in the extended basis and brought down once (the giant steps of a
// baby-step giant-step product, the blocks of a product over chunks).
// A rotation joins a tree only if the tree is its only reader, and an
// interior addition only if its one reader is the next addition of the
// tree; whatever else the tree adds (an unrotated block, a bias-free
// partial sum) becomes a term with step 0. Rotate-and-add folds sum one
// rotation each and stay as they are. The naive lowering keeps its
// separate rotations.
//
// Under a key budget, the snapshot of the program with the exact key set is
// merged the same way, so that the plan prices both points alike.
func sumRotations(s *State) error {
	rewriteSums(s, mergeRotationSums)
	return nil
}

// mergeRotationSums rewrites p's sums of rotations as rotate-sums. It
// makes new ops and leaves the replaced ones untouched, since a snapshot
// may share them.
func mergeRotationSums(p *ir.Program) {
	f := newDataflow(p)
	def, uses := f.def, f.uses
	interior := func(v ir.ValueID) bool {
		d := def[v]
		return d != nil && d.Kind == ir.OpAdd && uses[v] == 1
	}
	rotation := func(v ir.ValueID) bool {
		d := def[v]
		return d != nil && d.Kind == ir.OpRotate && uses[v] == 1
	}
	// sumsRotation: v is an interior addition with a mergeable rotation
	// below it. A sum without one stays whole, as one unrotated term.
	memo := map[ir.ValueID]bool{}
	var sumsRotation func(v ir.ValueID) bool
	sumsRotation = func(v ir.ValueID) bool {
		if !interior(v) {
			return false
		}
		if r, ok := memo[v]; ok {
			return r
		}
		a, b := def[v].Args[0], def[v].Args[1]
		r := rotation(a) || rotation(b) || sumsRotation(a) || sumsRotation(b)
		memo[v] = r
		return r
	}
	// A root is an addition not absorbed by a reader addition.
	isRoot := map[*ir.Op]bool{}
	for _, op := range p.Ops {
		if op.Kind == ir.OpAdd {
			isRoot[op] = true
		}
	}
	for _, op := range p.Ops {
		if op.Kind != ir.OpAdd {
			continue
		}
		for _, a := range op.Args {
			if interior(a) {
				isRoot[def[a]] = false
			}
		}
	}
	drop := map[*ir.Op]bool{}
	for i, op := range p.Ops {
		if op.Kind != ir.OpAdd || !isRoot[op] {
			continue
		}
		var args []ir.ValueID
		var steps []int
		var absorbed []*ir.Op
		var walk func(v ir.ValueID)
		walk = func(v ir.ValueID) {
			d := def[v]
			switch {
			case sumsRotation(v):
				absorbed = append(absorbed, d)
				walk(d.Args[0])
				walk(d.Args[1])
			case rotation(v):
				absorbed = append(absorbed, d)
				args, steps = append(args, d.Args[0]), append(steps, d.Steps[0])
			default:
				args, steps = append(args, v), append(steps, 0)
			}
		}
		walk(op.Args[0])
		walk(op.Args[1])
		rotated := 0
		for _, k := range steps {
			if k != 0 {
				rotated++
			}
		}
		if rotated < 2 {
			continue
		}
		for _, a := range absorbed {
			drop[a] = true
		}
		p.Ops[i] = &ir.Op{Kind: ir.OpRotSum, Args: args, Steps: steps, Results: op.Results, Const: -1, Layer: op.Layer}
	}
	dropOps(p, drop)
}
