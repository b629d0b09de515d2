package passes

import (
	"fmt"

	"github.com/lanthorn/lanthorn/ir"
)

// assignLevels walks the program once from the fresh input at the top level
// and the default scale Δ = 2^logScale, giving every value its level and
// exact scale:
//
//   - a plaintext multiplier meets its ciphertext at its level l and is
//     encoded at scale q_l·Δ/s, where s is the ciphertext's scale and q_l
//     the prime the next rescale drops, so the product returns to exactly
//     Δ after that rescale whatever s was;
//   - a plaintext addend is encoded at the ciphertext's level and scale;
//   - a polynomial consumes ceil(log2(d+1)) levels and returns Δ;
//   - where two operands meet at different levels the higher one is
//     dropped (a DropLevel op is inserted).
func assignLevels(s *State) error {
	p := s.Prog
	delta := ir.Pow2Scale(p.Params.LogScale)
	for i := 0; i < len(p.Ops); i++ {
		op := p.Ops[i]
		if op.Kind == ir.OpAdd || op.Kind == ir.OpMul {
			a, b := p.Values[op.Args[0]], p.Values[op.Args[1]]
			if a.Level != b.Level {
				hi := 0
				if b.Level > a.Level {
					hi = 1
				}
				drop := p.Values[op.Args[hi]].Level - p.Values[op.Args[1-hi]].Level
				dv := p.NewValue(p.Values[op.Args[hi]].Name+"Dropped", ir.Cipher, op.Layer)
				*p.Values[dv] = ir.Value{ID: dv, Name: p.Values[dv].Name, Kind: ir.Cipher,
					Level: p.Values[op.Args[1-hi]].Level, Scale: p.Values[op.Args[hi]].Scale, Degree: p.Values[op.Args[hi]].Degree, Layer: op.Layer}
				d := &ir.Op{Kind: ir.OpDropLevel, Args: []ir.ValueID{op.Args[hi]}, Results: []ir.ValueID{dv}, Drop: drop, Const: -1, Layer: op.Layer}
				op.Args[hi] = dv
				p.Ops = append(p.Ops[:i], append([]*ir.Op{d}, p.Ops[i:]...)...)
				i++
			}
		}
		in := func(k int) *ir.Value { return p.Values[op.Args[k]] }
		set := func(level int, scale ir.Scale) {
			for _, r := range op.Results {
				p.Values[r].Level, p.Values[r].Scale = level, scale
			}
		}
		switch op.Kind {
		case ir.OpInput:
			set(p.Params.MaxLevel(), delta)
		case ir.OpRotate, ir.OpRotHoisted, ir.OpRelinearize:
			set(in(0).Level, in(0).Scale)
		case ir.OpAdd:
			if !in(0).Scale.Equal(in(1).Scale) {
				return fmt.Errorf("%s: operands at scales %s and %s", p.FormatOp(op), in(0).Scale, in(1).Scale)
			}
			set(in(0).Level, in(0).Scale)
		case ir.OpMul:
			set(in(0).Level, in(0).Scale.Mul(in(1).Scale))
		case ir.OpMulPlain:
			c := p.Consts[op.Const]
			c.Level = in(0).Level
			c.Scale = ir.Prime(c.Level).Mul(delta).Div(in(0).Scale)
			set(c.Level, in(0).Scale.Mul(c.Scale))
		case ir.OpAddPlain:
			c := p.Consts[op.Const]
			c.Level, c.Scale = in(0).Level, in(0).Scale
			set(c.Level, c.Scale)
		case ir.OpRescale:
			if in(0).Level == 0 {
				return fmt.Errorf("%s: no level left to rescale (the chain is too short)", p.FormatOp(op))
			}
			set(in(0).Level-1, in(0).Scale.Div(ir.Prime(in(0).Level)))
		case ir.OpDropLevel:
			set(in(0).Level-op.Drop, in(0).Scale)
		case ir.OpPoly:
			depth := ir.PolyDepth(len(p.Consts[op.Const].Data) - 1)
			if in(0).Level < depth {
				return fmt.Errorf("%s: polynomial needs %d levels, %d left", p.FormatOp(op), depth, in(0).Level)
			}
			set(in(0).Level-depth, delta)
		case ir.OpOutput:
		default:
			return fmt.Errorf("levels: unknown op %q", op.Kind)
		}
	}
	// Record levels per layer for trace comments.
	for _, l := range p.Layers {
		l.LevelIn, l.LevelOut = -1, -1
	}
	for _, op := range p.Ops {
		if op.Layer < 0 || op.Layer >= len(p.Layers) {
			continue
		}
		l := p.Layers[op.Layer]
		for _, a := range op.Args {
			if v := p.Values[a]; v.Layer != op.Layer && (l.LevelIn < 0 || v.Level > l.LevelIn) {
				l.LevelIn = v.Level
			}
		}
		for _, r := range op.Results {
			l.LevelOut = p.Values[r].Level
		}
	}
	return nil
}
