package passes

import (
	"fmt"

	"github.com/lanthorn/lanthorn/ir"
)

// foldInterval rewrites every Chebyshev activation over [a, b] to one over
// [-1, 1] by applying t = αx + β, α = 2/(b-a), β = -(a+b)/(b-a), inside the
// linear layer before it: W ← αW, bias ← αbias + β. An activation with no
// linear layer before it gets a diagonal one, which costs a level.
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
		if i > 0 && s.Graph.Layers[i-1].Kind == ir.Dense {
			prev := s.Graph.Layers[i-1]
			for r, row := range prev.Weights {
				for c := range row {
					row[c] *= alpha
				}
				prev.Bias[r] = alpha*prev.Bias[r] + beta
			}
			s.note("%s: interval [%g, %g] folded into %s (t = %gx %+g)", l.Name, lo, hi, prev.Name, alpha, beta)
		} else {
			m := &ir.Layer{Name: l.Name + "_map", Kind: ir.Dense, Pos: l.Pos, In: l.In, Out: l.In,
				Weights: make([][]float64, l.In), Bias: make([]float64, l.In)}
			for r := range m.Weights {
				m.Weights[r] = make([]float64, l.In)
				m.Weights[r][r] = alpha
				m.Bias[r] = beta
			}
			out = append(out, m)
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
