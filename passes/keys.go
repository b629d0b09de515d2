package passes

import (
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// collectKeys lists exactly the rotation steps the program uses, each with
// the highest level it rotates at (its key is made for that level only,
// which makes the keys of late layers several times smaller), and whether
// it needs a relinearization key (ciphertext products and polynomials).
func collectKeys(s *State) error {
	p := s.Prog
	level := map[int]int{}
	p.Rotations, p.RotationLevels = nil, nil
	p.Relinearize = false
	for _, op := range p.Ops {
		switch op.Kind {
		case ir.OpRotate, ir.OpRotHoisted:
			at := p.Values[op.Args[0]].Level
			for _, k := range op.Steps {
				if old, ok := level[k]; !ok || at > old {
					level[k] = at
				}
			}
		case ir.OpRelinearize, ir.OpPoly:
			p.Relinearize = true
		}
	}
	for k := range level {
		p.Rotations = append(p.Rotations, k)
	}
	slices.Sort(p.Rotations)
	for _, k := range p.Rotations {
		p.RotationLevels = append(p.RotationLevels, level[k])
	}
	return nil
}
