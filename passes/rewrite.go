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
