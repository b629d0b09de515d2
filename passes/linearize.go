package passes

import (
	"fmt"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// linearize turns convolutions, pools and constant scalings into linear
// layers: sparse matrices on the packed tensor (channel-major, C·H·W), row
// r of the matrix producing output value r. Flatten layers move no data in
// that layout and are dropped. The matrices hold only the nonzero weights,
// so a convolution costs its kernel size per output, not In×Out. A strided
// or unpadded convolution whose output feeds a linear layer is spread (see
// spread) so that its matrix has few diagonals. After it every layer is
// dense, linear or an activation over a vector, so tensor shapes are dropped.
func linearize(s *State) error {
	g := s.Graph
	var out []*ir.Layer
	spreads := map[*ir.Layer]placement{}
	for i, l := range g.Layers {
		switch l.Kind {
		case ir.Conv2D:
			m := convMap(l)
			if pl, ok := convPlacement(l, i == 0); ok {
				spreads[m] = pl
			}
			out = append(out, m)
		case ir.AvgPool, ir.SumPool:
			out = append(out, poolMap(l))
		case ir.ScaleBy:
			out = append(out, diagonalMap(l.Name, l.Pos, l.Ins(), []float64{l.Factor}, nil, fmt.Sprintf("%s (scale)", l.Name)))
		case ir.BatchNorm:
			sc, sh := l.Norm.Affine()
			out = append(out, diagonalMap(l.Name, l.Pos, l.Ins(), sc, sh, l.Name+" (batchnorm)"))
		case ir.Flatten:
			if len(g.Layers) == 1 {
				out = append(out, diagonalMap(l.Name, l.Pos, l.Outs(), []float64{1}, nil, l.Name+" (flatten)"))
			}
		default:
			out = append(out, l)
		}
	}
	out = spread(s, out, spreads)
	g.Input.Shape = nil
	for _, l := range out {
		l.InShape, l.OutShape = nil, nil
	}
	g.Layers = out
	return nil
}

// convMap is a convolution's matrix: row (o, i, j) holds K[o][c][a][b] at
// column (c, i·SH + a − top, j·SW + b − left) for every kernel position
// inside the input, columns ascending.
func convMap(l *ir.Layer) *ir.Layer {
	in, o, w := l.Ins(), l.Outs(), l.Window
	C, H, W := in[0], in[1], in[2]
	m := &ir.SparseMap{Rows: l.Out, Cols: l.In, Row: make([][]ir.Entry, l.Out)}
	bias := make([]float64, l.Out)
	for oc := range o[0] {
		for i := range o[1] {
			for j := range o[2] {
				r := (oc*o[1]+i)*o[2] + j
				bias[r] = l.Bias[oc]
				var row []ir.Entry
				for c := range C {
					for a := range w.KH {
						y := i*w.SH + a - w.Pad[0]
						if y < 0 || y >= H {
							continue
						}
						for b := range w.KW {
							x := j*w.SW + b - w.Pad[2]
							if x < 0 || x >= W {
								continue
							}
							if v := l.Kernel[((oc*C+c)*w.KH+a)*w.KW+b]; v != 0 {
								row = append(row, ir.Entry{Col: (c*H+y)*W + x, Val: v})
							}
						}
					}
				}
				m.Row[r] = row
			}
		}
	}
	return &ir.Layer{Name: l.Name, Kind: ir.Linear, Pos: l.Pos, In: l.In, Out: l.Out,
		InShape: slices.Clone(in), OutShape: slices.Clone(o), Map: m, Bias: bias,
		From: append([]string{fmt.Sprintf("%s (conv2d %d×%d stride %d×%d)", l.Name, w.KH, w.KW, w.SH, w.SW)}, folded(l)...)}
}

// poolMap is a pool's matrix: row (c, i, j) holds 1 (sumpool) or
// 1/(KH·KW) (avgpool) at each column of its window.
func poolMap(l *ir.Layer) *ir.Layer {
	in, o, w := l.Ins(), l.Outs(), l.Window
	H, W := in[1], in[2]
	v := 1.0
	if l.Kind == ir.AvgPool {
		v = 1 / float64(w.KH*w.KW)
	}
	m := &ir.SparseMap{Rows: l.Out, Cols: l.In, Row: make([][]ir.Entry, l.Out)}
	for c := range o[0] {
		for i := range o[1] {
			for j := range o[2] {
				var row []ir.Entry
				for a := range w.KH {
					for b := range w.KW {
						row = append(row, ir.Entry{Col: (c*H+i*w.SH+a)*W + j*w.SW + b, Val: v})
					}
				}
				m.Row[(c*o[1]+i)*o[2]+j] = row
			}
		}
	}
	return &ir.Layer{Name: l.Name, Kind: ir.Linear, Pos: l.Pos, In: l.In, Out: l.Out,
		InShape: slices.Clone(in), OutShape: slices.Clone(o), Map: m,
		From: []string{fmt.Sprintf("%s (%s %d×%d stride %d×%d)", l.Name, l.Kind, w.KH, w.KW, w.SH, w.SW)}}
}

// folded lists what was folded into l after its own origin.
func folded(l *ir.Layer) []string {
	if len(l.From) < 2 {
		return nil
	}
	return l.From[1:]
}
