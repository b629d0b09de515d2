package passes

import "github.com/lanthorn/lanthorn/ir"

// foldBatchNorm removes every batch norm y = s·x + t (s = γ/sqrt(var+ε),
// t = β − s·mean, per channel) from the graph. Right after a convolution
// or dense layer with one output channel per norm channel it scales that
// layer's rows and bias; otherwise it becomes a diagonal linear layer that
// merge-linear folds into the neighbouring linear layer (a pool, a scale,
// the next convolution or dense layer). Only a batch norm between two
// non-linear layers is left to cost a level, and the report says so.
func foldBatchNorm(s *State) error {
	g := s.Graph
	var out []*ir.Layer
	for i, l := range g.Layers {
		if l.Kind != ir.BatchNorm {
			out = append(out, l)
			continue
		}
		sc, sh := l.Norm.Affine()
		var prev *ir.Layer
		if len(out) > 0 {
			prev = out[len(out)-1]
		}
		switch {
		case prev != nil && prev.Kind == ir.Conv2D && prev.Outs()[0] == len(sc):
			per := len(prev.Kernel) / len(sc)
			for o := range sc {
				for k := o * per; k < (o+1)*per; k++ {
					prev.Kernel[k] *= sc[o]
				}
				prev.Bias[o] = sc[o]*prev.Bias[o] + sh[o]
			}
			prev.From = append(origins(prev), l.Name+" (batchnorm, folded)")
			s.note("%s: batch norm folded into %s", l.Name, prev.Name)
		case prev != nil && prev.Kind == ir.Dense && prev.Out == len(sc):
			for r, row := range prev.Weights {
				for c := range row {
					row[c] *= sc[r]
				}
				prev.Bias[r] = sc[r]*prev.Bias[r] + sh[r]
			}
			prev.From = append(origins(prev), l.Name+" (batchnorm, folded)")
			s.note("%s: batch norm folded into %s", l.Name, prev.Name)
		default:
			out = append(out, diagonalMap(l.Name, l.Pos, l.Ins(), sc, sh, l.Name+" (batchnorm)"))
			if !linearNeighbour(g.Layers, i) {
				s.note("%s: batch norm between two non-linear layers: evaluated as a diagonal product (one level)", l.Name)
			}
		}
	}
	g.Layers = out
	return nil
}

// linearNeighbour reports whether layers[i] has a linear layer next to it.
func linearNeighbour(layers []*ir.Layer, i int) bool {
	return i > 0 && layers[i-1].IsLinear() || i+1 < len(layers) && layers[i+1].IsLinear()
}
