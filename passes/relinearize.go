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
		insertAfterDef(p, v, ir.OpRelinearize, "Relin", nil)
		p.Layers[op.Layer].Relins++
		i++
	}
	p.InferDegrees()
	return nil
}
