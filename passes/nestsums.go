package passes

import (
	"cmp"
	"fmt"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// rotationSum is a sum Σ rot_{k_i}(b_i) + Σ c_j made of additions whose
// inner values have no other use, with at least two rotated terms, such as
// the giant-step accumulation of a baby-step giant-step product. Rotation
// is linear, so with the steps in ascending order it equals
//
//	rot_{k_1}(b_1 + rot_{k_2−k_1}(b_2 + … rot_{k_m−k_{m−1}}(b_m))) + Σ c_j,
//
// the same number of rotations by the differences of the steps, which a
// small key set often holds (a giant step's multiples all differ by it).
type rotationSum struct {
	root      int          // index in Program.Ops of the outermost addition
	adds      []int        // indices of its additions, the root included
	rotations []int        // indices of the rotations of its rotated terms, in the order of steps
	steps     []int        // k_i, ascending (ties in op order)
	srcs      []ir.ValueID // b_i, in the order of steps
	others    []ir.ValueID // c_j, in op order
	level     int
}

// nested returns the steps of the nested form: k_1, then each nonzero
// difference k_{i+1} − k_i.
func (r rotationSum) nested() []int {
	out := []int{r.steps[0]}
	for i := 1; i < len(r.steps); i++ {
		if d := r.steps[i] - r.steps[i-1]; d > 0 {
			out = append(out, d)
		}
	}
	return out
}

// rotationSums finds the program's sums of rotations.
func rotationSums(p *ir.Program) []rotationSum {
	def := map[ir.ValueID]int{}
	useCount := map[ir.ValueID]int{}
	user := map[ir.ValueID]int{}
	for i, op := range p.Ops {
		for _, r := range op.Results {
			def[r] = i
		}
		for _, a := range op.Args {
			useCount[a]++
			user[a] = i
		}
	}
	// inner reports whether v is an addition whose only use is another
	// addition, so that it belongs to the sum that addition is in.
	inner := func(v ir.ValueID) bool {
		d, ok := def[v]
		return ok && p.Ops[d].Kind == ir.OpAdd && useCount[v] == 1 && p.Ops[user[v]].Kind == ir.OpAdd
	}
	type term struct {
		op   int
		step int
		src  ir.ValueID
	}
	var sums []rotationSum
	for i, op := range p.Ops {
		if op.Kind != ir.OpAdd || inner(op.Results[0]) {
			continue
		}
		r := rotationSum{root: i, adds: []int{i}, level: p.Values[op.Results[0]].Level}
		var terms []term
		var walk func(v ir.ValueID)
		walk = func(v ir.ValueID) {
			d, ok := def[v]
			switch {
			case ok && inner(v):
				r.adds = append(r.adds, d)
				walk(p.Ops[d].Args[0])
				walk(p.Ops[d].Args[1])
			case ok && p.Ops[d].Kind == ir.OpRotate && useCount[v] == 1:
				terms = append(terms, term{d, p.Ops[d].Steps[0], p.Ops[d].Args[0]})
			default:
				r.others = append(r.others, v)
			}
		}
		walk(op.Args[0])
		walk(op.Args[1])
		if len(terms) < 2 {
			continue
		}
		slices.SortStableFunc(terms, func(a, b term) int { return cmp.Compare(a.step, b.step) })
		for _, t := range terms {
			r.rotations = append(r.rotations, t.op)
			r.steps = append(r.steps, t.step)
			r.srcs = append(r.srcs, t.src)
		}
		sums = append(sums, r)
	}
	return sums
}

// nestSums rewrites in nested form every sum whose nested steps take fewer
// rotations with g's keys (g holds their search) than its own steps, and
// returns how many it rewrote. The sum's result keeps its value.
func nestSums(p *ir.Program, g *stepGraph, sums []rotationSum) int {
	replace := map[int][]*ir.Op{}
	drop := map[int]bool{}
	for _, r := range sums {
		if g.hops(r.nested()) >= g.hops(r.steps) {
			continue
		}
		root := p.Ops[r.root]
		result := root.Results[0]
		var ops []*ir.Op
		last := len(r.srcs) + len(r.others) // ops to emit: a rotation per step kept, an addition per other term
		for i := 1; i < len(r.steps); i++ {
			if r.steps[i] > r.steps[i-1] {
				last++
			}
		}
		emit := func(kind ir.OpKind, steps []int, args ...ir.ValueID) ir.ValueID {
			v := result
			if len(ops) < last-1 {
				v = newLike(p, result, fmt.Sprintf("Nest%d", len(ops)))
			}
			ops = append(ops, &ir.Op{Kind: kind, Args: args, Results: []ir.ValueID{v}, Steps: steps, Const: -1, Layer: root.Layer})
			return v
		}
		m := len(r.steps)
		h := r.srcs[m-1]
		for i := m - 2; i >= 0; i-- {
			if d := r.steps[i+1] - r.steps[i]; d > 0 {
				h = emit(ir.OpRotate, []int{d}, h)
			}
			h = emit(ir.OpAdd, nil, r.srcs[i], h)
		}
		h = emit(ir.OpRotate, []int{r.steps[0]}, h)
		for _, c := range r.others {
			h = emit(ir.OpAdd, nil, h, c)
		}
		replace[r.root] = ops
		for _, i := range append(slices.Clone(r.adds), r.rotations...) {
			if i != r.root {
				drop[i] = true
			}
		}
		p.Layers[root.Layer].Rotations -= len(r.steps) - len(r.nested())
	}
	if len(replace) == 0 {
		return 0
	}
	var out []*ir.Op
	for i, op := range p.Ops {
		switch {
		case replace[i] != nil:
			out = append(out, replace[i]...)
		case !drop[i]:
			out = append(out, op)
		}
	}
	p.Ops = out
	return len(replace)
}
