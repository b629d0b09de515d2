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
	level := rotationLevels(p)
	p.Rotations, p.RotationLevels = nil, nil
	p.Relinearize = false
	for _, op := range p.Ops {
		if op.Kind == ir.OpRelinearize || op.Kind == ir.OpPoly {
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

// rotationLevels maps each rotation step a leveled program uses to the
// highest level it rotates by that step at.
func rotationLevels(p *ir.Program) map[int]int {
	level := map[int]int{}
	for _, op := range p.Ops {
		if op.Kind != ir.OpRotate && op.Kind != ir.OpRotHoisted && op.Kind != ir.OpRotSum {
			continue
		}
		at := p.Values[op.Args[0]].Level
		for _, k := range op.Steps {
			if k == 0 {
				continue // an unrotated term of a rotate-sum
			}
			if old, ok := level[k]; !ok || at > old {
				level[k] = at
			}
		}
	}
	return level
}
