package passes

import (
	"fmt"
	"math"

	"github.com/lanthorn/lanthorn/ir"
)

// lower turns the graph into a program. Layout: every vector of length n
// sits in slots [0, n) of a period D (the smallest power of two holding the
// widest layer), zero-padded, replicated over all slots; a rotation of the
// slot vector is then a cyclic rotation of length D.
func lower(s *State) error {
	g := s.Graph
	p := &ir.Program{
		Name: g.Name, SpecFile: g.SpecFile,
		InputName: g.Input.Name, InputSize: g.Input.Size,
		OutputName: g.OutputName, OutputSize: g.OutSize(),
	}
	widest := g.Input.Size
	for _, l := range g.Layers {
		widest = max(widest, l.Out)
	}
	p.Period = nextPow2(widest)

	x := p.NewValue(identifier(g.Input.Name), ir.Cipher, -1)
	p.Ops = append(p.Ops, &ir.Op{Kind: ir.OpInput, Results: []ir.ValueID{x}, Const: -1, Layer: -1})
	for i, l := range g.Layers {
		info := &ir.LayerInfo{Name: l.Name, Pos: l.Pos}
		p.Layers = append(p.Layers, info)
		b := &builder{p: p, layer: i, prefix: identifier(l.Name)}
		var err error
		switch l.Kind {
		case ir.Dense:
			info.Kind = fmt.Sprintf("dense %d→%d", l.In, l.Out)
			x, err = b.dense(l, x, info)
		case ir.Activation:
			x, err = b.activation(l, x, info)
		default:
			err = fmt.Errorf("%s: %s: cannot lower a %s layer", l.Pos, l.Name, l.Kind)
		}
		if err != nil {
			return err
		}
	}
	p.Ops = append(p.Ops, &ir.Op{Kind: ir.OpOutput, Args: []ir.ValueID{x}, Const: -1, Layer: len(p.Layers) - 1})
	s.Prog = p
	return nil
}

// builder appends the ops of one layer.
type builder struct {
	p      *ir.Program
	layer  int
	prefix string
}

func (b *builder) op(kind ir.OpKind, name string, args ...ir.ValueID) ir.ValueID {
	v := b.p.NewValue(b.prefix+name, ir.Cipher, b.layer)
	b.p.Ops = append(b.p.Ops, &ir.Op{Kind: kind, Args: args, Results: []ir.ValueID{v}, Const: -1, Layer: b.layer})
	return v
}

func (b *builder) withConst(kind ir.OpKind, name string, arg ir.ValueID, c *ir.Const) ir.ValueID {
	v := b.op(kind, name, arg)
	op := b.p.Ops[len(b.p.Ops)-1]
	op.Const = len(b.p.Consts)
	b.p.Consts = append(b.p.Consts, c)
	return v
}

// dense lowers y = Wx + b with the diagonal method and a baby-step
// giant-step split: with diag_k[t] = W[t][(t+k) mod D],
//
//	y = Σ_j rot_{n1·j}( Σ_i rot_{-n1·j}(diag_{n1·j+i}) ⊙ rot_i(x) ) + b,
//
// so the baby rotations rot_i(x) share one hoisted decomposition and each
// giant block costs one rotation. Zero diagonals and empty blocks are
// skipped; n1 minimises the number of rotations.
func (b *builder) dense(l *ir.Layer, x ir.ValueID, info *ir.LayerInfo) (ir.ValueID, error) {
	D := b.p.Period
	diags := map[int][]float64{}
	for k := 0; k < D; k++ {
		d := make([]float64, D)
		nonzero := false
		for t := 0; t < l.Out; t++ {
			c := (t + k) % D
			if c < l.In && l.Weights[t][c] != 0 {
				d[t] = l.Weights[t][c]
				nonzero = true
			}
		}
		if nonzero {
			diags[k] = d
		}
	}
	n1 := bestBabySteps(diags, D)
	info.BabySteps, info.GiantSteps = n1, (D+n1-1)/n1

	var babies []int
	for i := 1; i < n1; i++ {
		for k := range diags {
			if k%n1 == i {
				babies = append(babies, i)
				break
			}
		}
	}
	rot := map[int]ir.ValueID{0: x}
	if len(babies) > 0 {
		op := &ir.Op{Kind: ir.OpRotHoisted, Args: []ir.ValueID{x}, Steps: babies, Const: -1, Layer: b.layer}
		for _, i := range babies {
			v := b.p.NewValue(fmt.Sprintf("%sRot%d", b.prefix, i), ir.Cipher, b.layer)
			op.Results = append(op.Results, v)
			rot[i] = v
		}
		b.p.Ops = append(b.p.Ops, op)
		info.Rotations += len(babies)
		if len(babies) > 1 {
			info.Hoisted += len(babies)
		}
	}
	var acc ir.ValueID
	haveAcc := false
	for j := 0; j*n1 < D; j++ {
		var sum ir.ValueID
		haveSum := false
		for i := 0; i < n1 && j*n1+i < D; i++ {
			k := j*n1 + i
			d, ok := diags[k]
			if !ok {
				continue
			}
			shifted := make([]float64, D) // rot_{-n1·j}(diag_k)
			for t := range shifted {
				shifted[t] = d[((t-j*n1)%D+D)%D]
			}
			prod := b.withConst(ir.OpMulPlain, fmt.Sprintf("Prod%d", k), rot[i],
				&ir.Const{Name: fmt.Sprintf("%s.diag%d", l.Name, k), Kind: ir.Vector, Data: shifted})
			info.PlainMuls++
			if haveSum {
				sum = b.op(ir.OpAdd, fmt.Sprintf("Block%dSum", j), sum, prod)
			} else {
				sum, haveSum = prod, true
			}
		}
		if !haveSum {
			continue
		}
		if j > 0 {
			sum = b.rotate(sum, j*n1, fmt.Sprintf("Block%d", j))
			info.Rotations++
		}
		if haveAcc {
			acc = b.op(ir.OpAdd, fmt.Sprintf("Acc%d", j), acc, sum)
		} else {
			acc, haveAcc = sum, true
		}
	}
	if !haveAcc {
		return 0, fmt.Errorf("%s: %s: every weight is zero; the layer is a constant and need not be encrypted", l.Pos, l.Name)
	}
	bias := make([]float64, D)
	copy(bias, l.Bias)
	if !allZero(bias) {
		acc = b.withConst(ir.OpAddPlain, "Out", acc,
			&ir.Const{Name: l.Name + ".bias", Kind: ir.Vector, Data: bias})
	}
	return acc, nil
}

func (b *builder) rotate(v ir.ValueID, k int, name string) ir.ValueID {
	r := b.op(ir.OpRotate, name+"Rot", v)
	b.p.Ops[len(b.p.Ops)-1].Steps = []int{k}
	return r
}

// bestBabySteps picks the baby-step count n1 that minimises the rotations
// of the split: distinct nonzero i = k mod n1 plus distinct nonzero j = k/n1.
func bestBabySteps(diags map[int][]float64, D int) int {
	best, bestCost := 1, math.MaxInt
	for n1 := 1; n1 <= D; n1++ {
		babies, giants := map[int]bool{}, map[int]bool{}
		for k := range diags {
			if k%n1 != 0 {
				babies[k%n1] = true
			}
			if k/n1 != 0 {
				giants[k/n1] = true
			}
		}
		if cost := len(babies) + len(giants); cost < bestCost {
			best, bestCost = n1, cost
		}
	}
	return best
}

func (b *builder) activation(l *ir.Layer, x ir.ValueID, info *ir.LayerInfo) (ir.ValueID, error) {
	a := l.Act
	if a.Func == ir.Square {
		info.Kind = "square"
		info.CtMuls = 1
		sq := b.op(ir.OpMul, "Sq", x, x)
		b.p.Values[sq].Degree = 2
		return sq, nil
	}
	if a.Basis == ir.Chebyshev && a.Interval != [2]float64{-1, 1} {
		return 0, fmt.Errorf("%s: %s: interval not folded", l.Pos, l.Name)
	}
	if len(a.Coeffs) < 2 {
		return 0, fmt.Errorf("%s: %s: polynomial of degree below 1", l.Pos, l.Name)
	}
	d := len(a.Coeffs) - 1
	info.Kind = fmt.Sprintf("%s (%s, degree %d)", a.Func, a.Basis, d)
	info.Depth = ir.PolyDepth(d)
	return b.withConst(ir.OpPoly, "Out", x,
		&ir.Const{Name: l.Name + ".poly", Kind: ir.Polynomial, Data: append([]float64(nil), a.Coeffs...), Basis: a.Basis}), nil
}

func nextPow2(n int) int {
	p := 1
	for p < n {
		p <<= 1
	}
	return p
}

func allZero(v []float64) bool {
	for _, x := range v {
		if x != 0 {
			return false
		}
	}
	return true
}
