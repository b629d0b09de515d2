package passes

import (
	"fmt"
	"slices"
	"strings"

	"github.com/lanthorn/lanthorn/ir"
)

// foldAffine folds y ← αy + β into the layer that produces the input of
// layers[i], looking back through flatten layers (which move no data), and
// returns that layer. Dense and linear layers scale their rows and bias, a
// convolution its kernel and bias, a batch norm its gamma and beta; other
// layers have no bias to carry β and are not folded into.
func foldAffine(layers []*ir.Layer, i int, alpha, beta float64) (*ir.Layer, bool) {
	j := i - 1
	for j >= 0 && layers[j].Kind == ir.Flatten {
		j--
	}
	if j < 0 {
		return nil, false
	}
	prev := layers[j]
	switch prev.Kind {
	case ir.Dense:
		for r, row := range prev.Weights {
			for c := range row {
				row[c] *= alpha
			}
			prev.Bias[r] = alpha*prev.Bias[r] + beta
		}
	case ir.Conv2D:
		for k := range prev.Kernel {
			prev.Kernel[k] *= alpha
		}
		for o := range prev.Bias {
			prev.Bias[o] = alpha*prev.Bias[o] + beta
		}
	case ir.BatchNorm:
		for c := range prev.Norm.Gamma {
			prev.Norm.Gamma[c] *= alpha
			prev.Norm.Beta[c] = alpha*prev.Norm.Beta[c] + beta
		}
	case ir.Linear:
		if prev.Bias == nil {
			prev.Bias = make([]float64, prev.Out)
		}
		for r, row := range prev.Map.Row {
			for k := range row {
				row[k].Val *= alpha
			}
			prev.Bias[r] = alpha*prev.Bias[r] + beta
		}
	default:
		return nil, false
	}
	return prev, true
}

// diagonalMap is the elementwise affine map y_i = s_i·x_i + t_i as a linear
// layer over a tensor of the given shape; s and t repeat per channel when
// shorter than the tensor (len(s) channels of equal size).
func diagonalMap(name string, pos ir.Pos, shape []int, s, t []float64, from ...string) *ir.Layer {
	n := ir.Elems(shape)
	per := n / len(s)
	m := &ir.SparseMap{Rows: n, Cols: n, Row: make([][]ir.Entry, n)}
	bias := make([]float64, n)
	for i := range n {
		if v := s[i/per]; v != 0 {
			m.Row[i] = []ir.Entry{{Col: i, Val: v}}
		}
		if t != nil {
			bias[i] = t[i/per]
		}
	}
	return &ir.Layer{Name: name, Kind: ir.Linear, Pos: pos, In: n, Out: n,
		InShape: slices.Clone(shape), OutShape: slices.Clone(shape), Map: m, Bias: bias, From: from}
}

// sparseOf returns a dense or linear layer's matrix and bias in sparse form
// (zero weights dropped).
func sparseOf(l *ir.Layer) (*ir.SparseMap, []float64) {
	if l.Kind == ir.Linear {
		return l.Map, l.Bias
	}
	m := &ir.SparseMap{Rows: l.Out, Cols: l.In, Row: make([][]ir.Entry, l.Out)}
	for r, row := range l.Weights {
		for c, v := range row {
			if v != 0 {
				m.Row[r] = append(m.Row[r], ir.Entry{Col: c, Val: v})
			}
		}
	}
	return m, l.Bias
}

// compose returns the layer second∘first: C = B·A, c = B·a + b, computed
// row by row with a dense accumulator, so the cost is the number of
// multiply-adds of the product and no matrix is ever densified.
func compose(first, second *ir.Layer) *ir.Layer {
	a, ab := sparseOf(first)
	b, bb := sparseOf(second)
	c := &ir.SparseMap{Rows: b.Rows, Cols: a.Cols, Row: make([][]ir.Entry, b.Rows)}
	bias := make([]float64, b.Rows)
	acc := make([]float64, a.Cols)
	mark := make([]bool, a.Cols)
	var touched []int
	for r, row := range b.Row {
		if bb != nil {
			bias[r] = bb[r]
		}
		touched = touched[:0]
		for _, e := range row {
			if ab != nil {
				bias[r] += e.Val * ab[e.Col]
			}
			for _, f := range a.Row[e.Col] {
				if !mark[f.Col] {
					mark[f.Col] = true
					touched = append(touched, f.Col)
				}
				acc[f.Col] += e.Val * f.Val
			}
		}
		slices.Sort(touched)
		out := make([]ir.Entry, 0, len(touched))
		for _, col := range touched {
			if acc[col] != 0 {
				out = append(out, ir.Entry{Col: col, Val: acc[col]})
			}
			acc[col], mark[col] = 0, false
		}
		c.Row[r] = out
	}
	return &ir.Layer{
		Name: first.Name + "_" + second.Name, Kind: ir.Linear, Pos: first.Pos,
		In: first.In, Out: second.Out, InShape: slices.Clone(first.InShape), OutShape: slices.Clone(second.OutShape),
		Map: c, Bias: bias, From: append(origins(first), origins(second)...),
		RowBlock: keepBlocks(first, second),
	}
}

// origins names the spec layers a layer stands for, "conv1 (conv2d)".
func origins(l *ir.Layer) []string {
	if len(l.From) > 0 {
		return l.From
	}
	return []string{fmt.Sprintf("%s (%s)", l.Name, l.Kind)}
}

// describeLinear is the trace-comment kind of a linear layer.
func describeLinear(l *ir.Layer) string {
	return fmt.Sprintf("linear %d→%d from %s", l.In, l.Out, strings.Join(origins(l), " · "))
}

// keepBlocks is the row blocking of second∘first: that of first when
// second acts on each value alone (a batch norm or scaling after a spread
// convolution), since rows then stay where first put them.
func keepBlocks(first, second *ir.Layer) int {
	if elementwise(second) {
		return first.RowBlock
	}
	return 0
}
