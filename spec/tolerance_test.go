package spec

import (
	"testing"

	"github.com/lanthorn/lanthorn/ir"
)

// A layer's tolerance, the model's default, and a declared degree, which
// the default leaves alone.
func TestParseTolerance(t *testing.T) {
	src := `lanthorn: 1
model: gearbox
tolerance: 0.05
input:
  size: 2
  range: [-1, 1]
layers:
  - kind: activation
    function: tanh
    interval: [-1, 1]
    tolerance: 0.001
  - kind: activation
    function: sigmoid
    interval: [-1, 1]
  - kind: activation
    function: relu
    interval: [-1, 1]
    degree: 9
  - kind: activation
    function: square
`
	for _, tc := range []struct {
		src  string
		want []ir.Act // Func, Degree, Tolerance of each layer
	}{
		{src, []ir.Act{{Func: ir.Tanh, Tolerance: 0.001}, {Func: ir.Sigmoid, Tolerance: 0.05}, {Func: ir.ReLU, Degree: 9}, {Func: ir.Square}}},
		// Without the model's default the sigmoid keeps its default degree.
		{src[:27] + src[43:], []ir.Act{{Func: ir.Tanh, Tolerance: 0.001}, {Func: ir.Sigmoid, Degree: 7}, {Func: ir.ReLU, Degree: 9}, {Func: ir.Square}}},
	} {
		g, err := Parse("gearbox.yaml", []byte(tc.src), nil)
		if err != nil {
			t.Fatal(err)
		}
		if len(g.Layers) != len(tc.want) {
			t.Fatalf("%d layers, want %d", len(g.Layers), len(tc.want))
		}
		for i, w := range tc.want {
			a := g.Layers[i].Act
			if a.Func != w.Func || a.Degree != w.Degree || a.Tolerance != w.Tolerance {
				t.Errorf("layer %d: %s degree %d tolerance %g, want %s degree %d tolerance %g", i, a.Func, a.Degree, a.Tolerance, w.Func, w.Degree, w.Tolerance)
			}
		}
	}
}
