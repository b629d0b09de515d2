package passes

import (
	"math"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// placeRescale rescales a value once its scale carries two factors (a
// product) and it is about to be multiplied again, fed to a polynomial,
// returned, or rotated in a hoisted set (a layer's input: its rotations
// are cheaper a level down, and each rotated copy would otherwise need a
// rescale of its own). Sums, other rotations and bias additions happen
// before the rescale, so a dense layer rescales once, after its products
// are summed, with one exception: a product that is folded (rotated, and
// the rotation added to the product itself: the first step of a blocked
// layer's x + rot(x, b), + rot(·, 2b), …) is rescaled before its folds, so
// that they key-switch a level lower. The count of rescales is the same;
// the folds' key-switch noise and the rescale's rounding then add at the
// rescaled scale, which chooseParams accounts for (foldNoiseFactor).
//
// A layer is rescaled before its folds only where that does not cost a
// larger ring, fewer special primes, a larger rescaled scale under pinned
// parameters, or a failure to find parameters at all (foldFirstLayers).
func placeRescale(s *State) error {
	place(s, s.Prog, foldFirstLayers(s))
	return nil
}

// foldFirstLayers decides which layers are rescaled before their folds: it
// places the rescales on a copy of the program with the rule in every
// layer, and takes it back from the layer with the most folds after its
// rescale, one layer at a time, while the parameters chosen for the noise
// this adds (setParams) need a larger ring than without it or leave room
// for fewer special primes (withSpecials), or, under a
// pinned scale or chain, while it asks for a larger scale than the one
// without it (the pin cannot grow: the precision would fall short), or
// while no parameters fit where they did without it.
func foldFirstLayers(s *State) map[int]bool {
	c := cloneForRescale(s.Prog)
	place(s, c, nil)
	folds := foldsAfterRescale(c, s.Graph)
	allow := map[int]bool{}
	for i, f := range folds {
		if f > 0 {
			allow[i] = true
		}
	}
	if len(allow) == 0 {
		return allow
	}
	terms := s.noise()
	pin := s.Graph.Pin
	params := func(folds []int) (ir.Params, error) {
		q := *c
		err := setParams(s, &q, folds, terms)
		return q.Params, err
	}
	// The special primes the ring's spare bits would buy (withSpecials):
	// a larger scale leaves fewer, and dearer key switches everywhere
	// outweigh cheaper folds.
	specials := func(pr ir.Params) int {
		c, err := withSpecials(pr, s.profile(), s.Opts.Objective)
		if err != nil || s.Opts.Naive || (pin != nil && len(pin.LogP) > 0) {
			return len(pr.LogP)
		}
		return len(c.LogP)
	}
	base, baseErr := params(nil)
	pinned := pin != nil && (pin.LogScale != 0 || len(pin.LogQ) > 0)
	for len(allow) > 0 {
		kept := make([]int, len(folds))
		for i := range allow {
			kept[i] = folds[i]
		}
		grows := false
		if pinned {
			g0 := math.Ceil(math.Log2(weightedGain(terms, nil)))
			g1 := math.Ceil(math.Log2(weightedGain(terms, foldNoiseFactors(kept))))
			grows = g1 > g0
		} else {
			pr, err := params(kept)
			grows = err != nil && baseErr == nil || err == nil && baseErr == nil && (pr.LogN > base.LogN || specials(pr) < specials(base))
		}
		if !grows {
			break
		}
		worst := -1
		for i := range allow {
			if worst < 0 || folds[i] > folds[worst] || folds[i] == folds[worst] && i > worst {
				worst = i
			}
		}
		delete(allow, worst)
	}
	return allow
}

// cloneForRescale copies what placing rescales changes: the values, the
// ops and their operands, the layer records.
func cloneForRescale(p *ir.Program) *ir.Program {
	c := *p
	c.Values = make([]*ir.Value, len(p.Values))
	for i, v := range p.Values {
		vc := *v
		c.Values[i] = &vc
	}
	c.Ops = make([]*ir.Op, len(p.Ops))
	for i, op := range p.Ops {
		oc := *op
		oc.Args = slices.Clone(op.Args)
		oc.Results = slices.Clone(op.Results)
		c.Ops[i] = &oc
	}
	c.Layers = make([]*ir.LayerInfo, len(p.Layers))
	for i, l := range p.Layers {
		lc := *l
		c.Layers[i] = &lc
	}
	return &c
}

// place places the rescales in p; a folded product is rescaled before its
// folds in the layers foldFirst holds (every layer, if foldFirst is nil).
func place(s *State, p *ir.Program, foldFirst map[int]bool) {
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
			fold := (foldFirst == nil || foldFirst[op.Layer]) && foldsItself(p, r)
			if !needsRescale(p, r) && !fold && !naiveRescale(s, op) {
				continue
			}
			nv := insertAfterDef(p, r, ir.OpRescale, "Rescaled", nil)
			factors = grow(factors, len(p.Values))
			factors[nv] = f - 1
			p.Layers[p.Values[nv].Layer].Rescales++
			i++ // skip the inserted op; its result is checked on the next round if still a product
		}
	}
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

// foldsItself reports whether v is rotated and the rotation added to v
// itself: the first step of a fold.
func foldsItself(p *ir.Program, v ir.ValueID) bool {
	_, ok := foldOf(p, v)
	return ok
}

func grow(s []int, n int) []int {
	for len(s) < n {
		s = append(s, 0)
	}
	return s
}
