package passes

import (
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
)

// A hand-built program for the sum rewrites: ops appended in order, each
// result a fresh value.
type progBuilder struct{ p *ir.Program }

func newProgBuilder() *progBuilder {
	return &progBuilder{p: &ir.Program{Period: 16}}
}

func (b *progBuilder) op(kind ir.OpKind, args []ir.ValueID, steps []int, c int) ir.ValueID {
	v := b.p.NewValue("v", ir.Cipher, 0)
	b.p.Ops = append(b.p.Ops, &ir.Op{Kind: kind, Args: args, Results: []ir.ValueID{v}, Steps: steps, Const: c})
	return v
}

func (b *progBuilder) input() ir.ValueID { return b.op(ir.OpInput, nil, nil, -1) }
func (b *progBuilder) rot(x ir.ValueID, k int) ir.ValueID {
	return b.op(ir.OpRotate, []ir.ValueID{x}, []int{k}, -1)
}
func (b *progBuilder) add(x, y ir.ValueID) ir.ValueID {
	return b.op(ir.OpAdd, []ir.ValueID{x, y}, nil, -1)
}
func (b *progBuilder) mul(x ir.ValueID) ir.ValueID {
	b.p.Consts = append(b.p.Consts, &ir.Const{Name: "c", Kind: ir.Vector, Data: make([]float64, 16)})
	return b.op(ir.OpMulPlain, []ir.ValueID{x}, nil, len(b.p.Consts)-1)
}

// opsOf lists p's ops of one kind.
func opsOf(p *ir.Program, kind ir.OpKind) []*ir.Op {
	var out []*ir.Op
	for _, op := range p.Ops {
		if op.Kind == kind {
			out = append(out, op)
		}
	}
	return out
}

func kinds(p *ir.Program) []ir.OpKind {
	var out []ir.OpKind
	for _, op := range p.Ops {
		out = append(out, op.Kind)
	}
	return out
}

// Giant steps merge into one rotate-sum, the unrotated block as a term of
// step 0; a fold (one rotation added to its own source) and a rotation
// read twice stay as they are.
func TestMergeRotationSums(t *testing.T) {
	b := newProgBuilder()
	x := b.input()
	s0, s4, s8 := b.add(b.mul(x), b.mul(x)), b.mul(x), b.mul(x)
	acc := b.add(b.add(s0, b.rot(s4, 4)), b.rot(s8, 8))
	fold := b.add(acc, b.rot(acc, 2)) // a fold: one rotation
	shared := b.rot(fold, 1)
	out := b.add(shared, b.rot(b.mul(fold), 3))
	b.op(ir.OpOutput, []ir.ValueID{out, shared}, nil, -1) // shared is read twice
	mergeRotationSums(b.p)
	sums := opsOf(b.p, ir.OpRotSum)
	require.Len(t, sums, 1, "%v", kinds(b.p))
	require.Equal(t, []ir.ValueID{s0, s4, s8}, sums[0].Args, "the unrotated block stays whole, one term")
	require.Equal(t, []int{0, 4, 8}, sums[0].Steps)
	require.Equal(t, []ir.ValueID{acc}, sums[0].Results)
	require.Len(t, opsOf(b.p, ir.OpRotate), 3, "the fold, the shared rotation and the last one stay: %v", kinds(b.p))
}

// A sum whose leaves are all products read once becomes one dot; a sum
// with another leaf, or a product read twice, does not.
func TestFuseDots(t *testing.T) {
	b := newProgBuilder()
	x := b.input()
	p1, p2, p3 := b.mul(x), b.mul(x), b.mul(x)
	dot := b.add(b.add(p1, p2), p3)
	twice := b.mul(x)
	mixed := b.add(b.add(twice, b.mul(dot)), x) // x is not a product
	b.op(ir.OpOutput, []ir.ValueID{mixed, twice}, nil, -1)
	consts := []int{b.p.Ops[1].Const, b.p.Ops[2].Const, b.p.Ops[3].Const}
	fuseDots(b.p)
	dots := opsOf(b.p, ir.OpDot)
	require.Len(t, dots, 1, "%v", kinds(b.p))
	require.Equal(t, []ir.ValueID{x, x, x}, dots[0].Args)
	require.Equal(t, consts, dots[0].Consts)
	require.Equal(t, []ir.ValueID{dot}, dots[0].Results)
	require.Equal(t, []ir.OpKind{ir.OpInput, ir.OpDot, ir.OpMulPlain, ir.OpMulPlain, ir.OpAdd, ir.OpAdd, ir.OpOutput}, kinds(b.p))
}
