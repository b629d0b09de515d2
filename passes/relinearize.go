package passes

import "github.com/lanthorn/lanthorn/ir"

// placeRelinearize relinearizes each ciphertext product right after it is
// formed: rotations, multiplications, polynomials and the output need
// degree 1. (Deferring it past sums of products is not done yet.)
func placeRelinearize(s *State) error {
	p := s.Prog
	for i := 0; i < len(p.Ops); i++ {
		op := p.Ops[i]
		if op.Kind != ir.OpMul {
			continue
		}
		v := op.Results[0]
		p.Values[v].Degree = 2
		nv := insertAfterDef(p, v, ir.OpRelinearize, "Relin", nil)
		p.Values[nv].Degree = 1
		p.Layers[op.Layer].Relins++
		i++
	}
	return nil
}
