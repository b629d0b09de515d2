package passes

import (
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// collectKeys lists exactly the rotation steps the program uses, and whether
// it needs a relinearization key (ciphertext products and polynomials).
func collectKeys(s *State) error {
	p := s.Prog
	seen := map[int]bool{}
	p.Rotations = nil
	p.Relinearize = false
	for _, op := range p.Ops {
		switch op.Kind {
		case ir.OpRotate, ir.OpRotHoisted:
			for _, k := range op.Steps {
				if !seen[k] {
					seen[k] = true
					p.Rotations = append(p.Rotations, k)
				}
			}
		case ir.OpRelinearize, ir.OpPoly:
			p.Relinearize = true
		}
	}
	slices.Sort(p.Rotations)
	return nil
}
