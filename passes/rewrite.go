package passes

import "github.com/lanthorn/lanthorn/ir"

// insertAfterDef inserts a one-operand op right after the op defining v and
// makes every later use of v (for which keep reports false) read the new
// value instead. It returns the new value.
func insertAfterDef(p *ir.Program, v ir.ValueID, kind ir.OpKind, suffix string, keep func(*ir.Op) bool) ir.ValueID {
	at := -1
	for i, op := range p.Ops {
		for _, r := range op.Results {
			if r == v {
				at = i
			}
		}
	}
	old := p.Values[v]
	nv := p.NewValue(old.Name+suffix, ir.Cipher, old.Layer)
	layer := old.Layer
	if layer < 0 {
		layer = 0
	}
	op := &ir.Op{Kind: kind, Args: []ir.ValueID{v}, Results: []ir.ValueID{nv}, Const: -1, Layer: layer}
	for _, later := range p.Ops[at+1:] {
		if keep != nil && keep(later) {
			continue
		}
		for i, a := range later.Args {
			if a == v {
				later.Args[i] = nv
			}
		}
	}
	p.Ops = append(p.Ops[:at+1], append([]*ir.Op{op}, p.Ops[at+1:]...)...)
	return nv
}

// uses lists the ops that read v.
func uses(p *ir.Program, v ir.ValueID) []*ir.Op {
	var out []*ir.Op
	for _, op := range p.Ops {
		for _, a := range op.Args {
			if a == v {
				out = append(out, op)
				break
			}
		}
	}
	return out
}

// rewriteSums applies a rewrite of sums (mergeRotationSums, fuseDots) to
// the program and, under a key budget, to the snapshot of the exact key
// set, so that the plan prices both points alike; not to a naive lowering.
func rewriteSums(s *State, rewrite func(*ir.Program)) {
	if s.Opts.Naive {
		return
	}
	rewrite(s.Prog)
	if b := s.Report.Budget; b != nil && b.Exact != nil {
		rewrite(b.Exact)
	}
}

// dataflow is each value's defining op, its number of reads and its last
// reader.
type dataflow struct {
	def, reader []*ir.Op
	uses        []int
}

func newDataflow(p *ir.Program) dataflow {
	f := dataflow{def: make([]*ir.Op, len(p.Values)), reader: make([]*ir.Op, len(p.Values)), uses: make([]int, len(p.Values))}
	for _, op := range p.Ops {
		for _, r := range op.Results {
			f.def[r] = op
		}
		for _, a := range op.Args {
			f.uses[a]++
			f.reader[a] = op
		}
	}
	return f
}

// dropOps removes the ops in drop from p, keeping the others' order.
func dropOps(p *ir.Program, drop map[*ir.Op]bool) {
	if len(drop) == 0 {
		return
	}
	kept := p.Ops[:0]
	for _, op := range p.Ops {
		if !drop[op] {
			kept = append(kept, op)
		}
	}
	p.Ops = kept
}
