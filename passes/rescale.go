package passes

import "github.com/lanthorn/lanthorn/ir"

// placeRescale rescales a value once its scale carries two factors (a
// product) and it is about to be multiplied again, fed to a polynomial,
// returned, or rotated in a hoisted set (a layer's input: its rotations
// are cheaper a level down, and each rotated copy would otherwise need a
// rescale of its own). Sums, other rotations and bias additions happen
// before the rescale, so a dense layer rescales once, after its products
// are summed.
func placeRescale(s *State) error {
	p := s.Prog
	factors := make([]int, len(p.Values))
	for i := 0; i < len(p.Ops); i++ {
		op := p.Ops[i]
		f := 1
		switch op.Kind {
		case ir.OpMulPlain:
			f = factors[op.Args[0]] + 1
		case ir.OpMul:
			f = factors[op.Args[0]] + factors[op.Args[1]]
		case ir.OpAdd:
			f = max(factors[op.Args[0]], factors[op.Args[1]])
		case ir.OpRescale:
			f = factors[op.Args[0]] - 1
		case ir.OpInput, ir.OpPoly:
			f = 1
		case ir.OpOutput:
			continue
		default:
			f = factors[op.Args[0]]
		}
		for _, r := range op.Results {
			factors = grow(factors, len(p.Values))
			factors[r] = f
		}
		if f < 2 {
			continue
		}
		for _, r := range op.Results {
			if !needsRescale(p, r) && !naiveRescale(s, op) {
				continue
			}
			nv := insertAfterDef(p, r, ir.OpRescale, "Rescaled", nil)
			factors = grow(factors, len(p.Values))
			factors[nv] = f - 1
			p.Layers[p.Values[nv].Layer].Rescales++
			i++ // skip the inserted op; its result is checked on the next round if still a product
		}
	}
	return nil
}

func needsRescale(p *ir.Program, v ir.ValueID) bool {
	for _, u := range uses(p, v) {
		switch u.Kind {
		case ir.OpMulPlain, ir.OpMul, ir.OpPoly, ir.OpOutput, ir.OpRotHoisted:
			return true
		}
	}
	return false
}

func grow(s []int, n int) []int {
	for len(s) < n {
		s = append(s, 0)
	}
	return s
}
