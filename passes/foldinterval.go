package passes

import (
	"fmt"

	"github.com/lanthorn/lanthorn/ir"
)

// foldInterval rewrites every Chebyshev activation over [a, b] to one over
// [-1, 1] by applying t = αx + β, α = 2/(b-a), β = -(a+b)/(b-a), inside the
// linear layer before it (dense, convolution, batch norm; see foldAffine):
// W ← αW, bias ← αbias + β. An activation with no such layer before it gets
// a diagonal one, which costs a level unless merge-linear folds it into a
// linear layer before it (a pool, say).
func foldInterval(s *State) error {
	s.Model = cloneGraph(s.Graph)
	var out []*ir.Layer
	for i, l := range s.Graph.Layers {
		a := l.Act
		if l.Kind != ir.Activation || a.Basis != ir.Chebyshev || a.Interval == [2]float64{-1, 1} {
			out = append(out, l)
			continue
		}
		lo, hi := a.Interval[0], a.Interval[1]
		alpha, beta := 2/(hi-lo), -(lo+hi)/(hi-lo)+0 // +0 turns -0 into 0 for the notes
		if prev, ok := foldAffine(s.Graph.Layers, i, alpha, beta); ok {
			s.note("%s: interval [%g, %g] folded into %s (t = %gx %+g)", l.Name, lo, hi, prev.Name, alpha, beta)
		} else {
			out = append(out, diagonalMap(l.Name+"_map", l.Pos, l.Ins(), []float64{alpha}, []float64{beta}, l.Name+" (interval map)"))
			s.note("%s: no linear layer before it; interval [%g, %g] mapped by a diagonal layer (one level)", l.Name, lo, hi)
		}
		a.Interval = [2]float64{-1, 1}
		out = append(out, l)
	}
	s.Graph.Layers = out
	if len(out) == 0 {
		return fmt.Errorf("no layers")
	}
	return nil
}
