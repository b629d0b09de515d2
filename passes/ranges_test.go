package passes

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/spec"
)

// A worked example, by hand: y = x1 − 2·x2 + 0.5 over [0, 1]² is exactly
// [−1.5, 1.5]; its square is [0, 2.25]; −y² + 1 is [−1.25, 1]. A symmetric
// bound (|w|·b per layer) would give 4.75 for the last layer.
func TestValueBoundsWorkedExample(t *testing.T) {
	g := &ir.Graph{Input: ir.Input{Size: 2, Min: 0, Max: 1}, Layers: []*ir.Layer{
		{Kind: ir.Dense, In: 2, Out: 1, Weights: [][]float64{{1, -2}}, Bias: []float64{0.5}},
		{Kind: ir.Activation, In: 1, Out: 1, Act: &ir.Act{Func: ir.Square}},
		{Kind: ir.Dense, In: 1, Out: 1, Weights: [][]float64{{-1}}, Bias: []float64{1}},
	}}
	require.InDeltaSlice(t, []float64{1, 1.5, 2.25, 1.25}, valueBounds(g), 1e-12)
}

// The bounds are sound: no input drawn from the declared box, corners
// included, leaves them, on every testdata model (after the graph passes
// fold batch norms, intervals and merges, as params sees it).
func TestValueBoundsHoldOnSamples(t *testing.T) {
	for _, path := range []string{
		"../testdata/demo/gearbox.yaml", "../testdata/mnist/digits.yaml",
		"../testdata/models/conv_small.yaml", "../testdata/models/pinned.yaml",
		"../testdata/models/relu_poly.yaml", "../testdata/models/sigmoid_small.yaml",
	} {
		t.Run(path, func(t *testing.T) {
			src, err := spec.Load(path)
			require.NoError(t, err)
			_, st, err := Compile(src, Options{})
			require.NoError(t, err)
			g := st.Graph
			bounds := valueBounds(g)
			r := rand.New(rand.NewPCG(3, 5))
			for s := range 64 {
				x := make([]float64, g.Input.Size)
				for i := range x {
					switch {
					case s%4 == 0: // a corner of the box
						x[i] = []float64{g.Input.Min, g.Input.Max}[r.IntN(2)]
					default:
						x[i] = g.Input.Min + r.Float64()*(g.Input.Max-g.Input.Min)
					}
				}
				for k, l := range g.Layers {
					x = l.Eval(x)
					for _, v := range x {
						require.LessOrEqual(t, math.Abs(v), bounds[k+1]*(1+1e-9), fmt.Sprintf("layer %s", l.Name))
					}
				}
			}
		})
	}
}
