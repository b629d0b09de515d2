package passes

import (
	"math"

	"github.com/lanthorn/lanthorn/ir"
)

// interval is a closed range [Lo, Hi] that one element of a vector stays in.
type interval struct{ Lo, Hi float64 }

func (iv interval) abs() float64 { return math.Max(math.Abs(iv.Lo), math.Abs(iv.Hi)) }

// valueBounds bounds |value| at the input and after every layer of the
// (folded) graph by interval arithmetic over the declared input box, one
// signed interval per element: a linear layer's output range over a box is
// exact (Σ min/max(w·lo, w·hi) per row), a square of [lo, hi] is
// [0 or min(lo², hi²), max(lo², hi²)]. Keeping signs matters: a square's
// output is non-negative, and a layer after it then reaches about half
// the range a symmetric bound |w|·b gives, at every layer of the model.
func valueBounds(g *ir.Graph) []float64 {
	v := make([]interval, g.Input.Size)
	for i := range v {
		v[i] = interval{g.Input.Min, g.Input.Max}
	}
	out := []float64{maxAbs(v)}
	for _, l := range g.Layers {
		v = layerRange(l, v)
		out = append(out, maxAbs(v))
	}
	return out
}

func maxAbs(v []interval) float64 {
	m := 0.0
	for _, iv := range v {
		m = math.Max(m, iv.abs())
	}
	return m
}

// layerRange is the range of each output of l when each input lies in v.
func layerRange(l *ir.Layer, v []interval) []interval {
	switch l.Kind {
	case ir.Dense:
		out := make([]interval, len(l.Weights))
		for i, row := range l.Weights {
			iv := interval{l.Bias[i], l.Bias[i]}
			for j, w := range row {
				iv.Lo += math.Min(w*v[j].Lo, w*v[j].Hi)
				iv.Hi += math.Max(w*v[j].Lo, w*v[j].Hi)
			}
			out[i] = iv
		}
		return out
	case ir.Linear:
		out := make([]interval, len(l.Map.Row))
		for i, row := range l.Map.Row {
			var iv interval
			if l.Bias != nil {
				iv = interval{l.Bias[i], l.Bias[i]}
			}
			for _, e := range row {
				iv.Lo += math.Min(e.Val*v[e.Col].Lo, e.Val*v[e.Col].Hi)
				iv.Hi += math.Max(e.Val*v[e.Col].Lo, e.Val*v[e.Col].Hi)
			}
			out[i] = iv
		}
		return out
	case ir.Activation:
		out := make([]interval, len(v))
		for i, iv := range v {
			out[i] = actRange(l.Act, iv)
		}
		return out
	}
	return v
}

// actRange is the range of an activation over the inputs in iv.
func actRange(a *ir.Act, iv interval) interval {
	switch {
	case a.Func == ir.Square:
		lo, hi := iv.Lo*iv.Lo, iv.Hi*iv.Hi
		r := interval{math.Min(lo, hi), math.Max(lo, hi)}
		if iv.Lo <= 0 && iv.Hi >= 0 {
			r.Lo = 0
		}
		return r
	case a.Basis == ir.Chebyshev:
		// Inputs are declared to lie in the interval, folded onto [-1, 1]:
		// evaluate there on a fine grid, widened by 1% of the span for the
		// points between grid nodes.
		r := interval{math.Inf(1), math.Inf(-1)}
		for i := 0; i <= 1024; i++ {
			y := ir.EvalPoly(ir.Chebyshev, a.Coeffs, -1+2*float64(i)/1024)
			r.Lo, r.Hi = math.Min(r.Lo, y), math.Max(r.Hi, y)
		}
		pad := 0.01*(r.Hi-r.Lo) + 1e-9
		return interval{r.Lo - pad, r.Hi + pad}
	default:
		b := iv.abs()
		var m float64
		for j, c := range a.Coeffs {
			m += math.Abs(c) * math.Pow(b, float64(j))
		}
		return interval{-m, m}
	}
}
