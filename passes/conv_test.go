package passes

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
)

// convNet builds a graph over a [C, H, W] input from layer templates; each
// layer's shapes are filled from the previous one and its weights drawn
// at random with a fixed seed.
func convNet(seed uint64, in []int, layers ...*ir.Layer) *ir.Graph {
	r := rand.New(rand.NewPCG(seed, 5))
	rnd := func(n int, s float64) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = (r.Float64()*2 - 1) * s
		}
		return v
	}
	g := &ir.Graph{Name: "c", SpecFile: "c.yaml", Input: ir.Input{Name: "x", Size: ir.Elems(in), Shape: in, Min: -1, Max: 1}, OutputName: "y", Precision: 16}
	shape := in
	for i, l := range layers {
		l.Pos = ir.Pos{File: "c.yaml", Line: 10 + i}
		if l.Name == "" {
			l.Name = fmt.Sprintf("%s%d", l.Kind, i+1)
		}
		l.In, l.InShape = ir.Elems(shape), shape
		out := shape
		switch l.Kind {
		case ir.Conv2D:
			oc := l.Out
			oh, ow := l.Window.OutHW(shape[1], shape[2])
			out = []int{oc, oh, ow}
			fan := shape[0] * l.Window.KH * l.Window.KW
			l.Kernel = rnd(oc*fan, 1/math.Sqrt(float64(fan)))
			l.Bias = rnd(oc, 0.1)
		case ir.AvgPool, ir.SumPool:
			oh, ow := l.Window.OutHW(shape[1], shape[2])
			out = []int{shape[0], oh, ow}
		case ir.Flatten:
			out = []int{ir.Elems(shape)}
		case ir.BatchNorm:
			c := shape[0]
			l.Norm = &ir.Norm{Gamma: rnd(c, 1), Beta: rnd(c, 0.2), Mean: rnd(c, 0.3), Var: rnd(c, 0.5), Eps: 1e-5}
			for k := range l.Norm.Var {
				l.Norm.Var[k] += 0.6
			}
		case ir.Dense:
			for range l.Out {
				l.Weights = append(l.Weights, rnd(l.In, 1/math.Sqrt(float64(l.In))))
			}
			l.Bias = rnd(l.Out, 0.1)
			out = []int{l.Out}
		}
		l.Out = ir.Elems(out)
		if len(out) == 3 {
			l.OutShape = out
		} else {
			l.OutShape = nil
		}
		if len(shape) != 3 {
			l.InShape = nil
		}
		g.Layers = append(g.Layers, l)
		shape = out
	}
	return g
}

func conv(out, k, stride int, pad [4]int) *ir.Layer {
	return &ir.Layer{Kind: ir.Conv2D, Out: out, Window: &ir.Window{KH: k, KW: k, SH: stride, SW: stride, Pad: pad}}
}

func poolOf(kind ir.LayerKind, k, stride int) *ir.Layer {
	return &ir.Layer{Kind: kind, Window: &ir.Window{KH: k, KW: k, SH: stride, SW: stride}}
}

func act(f ir.ActFunc) *ir.Layer {
	a := &ir.Act{Func: f}
	if f == ir.ReLU {
		a.Interval, a.Degree = [2]float64{-4, 4}, 7
	}
	return &ir.Layer{Kind: ir.Activation, Act: a}
}

func dense(out int) *ir.Layer { return &ir.Layer{Kind: ir.Dense, Out: out} }

// Convolutional graphs: the cleartext simulation of the lowered program
// (sparse matrices, diagonals, rotations) agrees with the tensor-level
// reference (direct convolution and pooling loops) of the unlowered graph.
func TestConvSimulationMatchesReference(t *testing.T) {
	cases := []struct {
		name   string
		in     []int
		layers []*ir.Layer
		depth  int // levels the program consumes
		spread bool
	}{
		{"conv", []int{1, 6, 6}, []*ir.Layer{conv(2, 3, 1, [4]int{})}, 1, false},
		{"conv stride pad", []int{1, 9, 9}, []*ir.Layer{conv(3, 5, 2, [4]int{1, 2, 1, 0}), act(ir.Square), {Kind: ir.Flatten}, dense(4)}, 3, false},
		{"two channels in", []int{2, 5, 4}, []*ir.Layer{conv(2, 2, 1, [4]int{1, 1, 1, 1}), act(ir.Square)}, 2, false},
		{"pools", []int{2, 6, 6}, []*ir.Layer{poolOf(ir.AvgPool, 2, 2), act(ir.Square), poolOf(ir.SumPool, 3, 1)}, 3, false},
		{"bn folds into conv", []int{1, 7, 7}, []*ir.Layer{conv(2, 3, 2, [4]int{}), {Kind: ir.BatchNorm}, act(ir.Square), {Kind: ir.Flatten}, dense(3)}, 3, true},
		{"conv pool merge", []int{1, 8, 8}, []*ir.Layer{conv(2, 3, 1, [4]int{1, 1, 1, 1}), poolOf(ir.AvgPool, 2, 2), {Kind: ir.BatchNorm}, act(ir.ReLU), {Kind: ir.Flatten}, dense(5), {Kind: ir.ScaleBy, Factor: 0.5}}, 1 + 3 + 1, false},
		{"bn first", []int{2, 4, 4}, []*ir.Layer{{Kind: ir.BatchNorm}, conv(1, 3, 1, [4]int{1, 1, 1, 1}), act(ir.Square)}, 2, false},
		{"relu after flatten", []int{1, 6, 6}, []*ir.Layer{conv(2, 3, 1, [4]int{}), {Kind: ir.Flatten}, act(ir.ReLU), dense(2)}, 1 + 3 + 1, true},
	}
	for i, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			g := convNet(uint64(i), c.in, c.layers...)
			require.NoError(t, ir.VerifyGraph(g))
			prog, st, err := Compile(g, Options{})
			require.NoError(t, err)
			for _, l := range st.Graph.Layers {
				require.Contains(t, []ir.LayerKind{ir.Dense, ir.Linear, ir.Activation}, l.Kind, "%s left in the lowered graph", l.Name)
			}
			require.Equal(t, c.depth, programDepth(prog), "levels consumed")
			spread := false
			for _, n := range st.Report.Notes {
				spread = spread || strings.Contains(n, "output spread")
			}
			require.Equal(t, c.spread, spread, "spread layout used: %v", st.Report.Notes)
			for k := range 4 {
				x := randomInput(uint64(100*i+k), g.Input.Size)
				want, err := st.Model.Reference(x)
				require.NoError(t, err)
				direct, err := g.Reference(x)
				require.NoError(t, err)
				got, err := prog.Simulate(x)
				require.NoError(t, err)
				require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9, "want %v got %v", want, got)
				if c.name != "conv pool merge" && c.name != "relu after flatten" {
					// No approximated activation: the source graph is the model.
					require.LessOrEqual(t, ir.MaxAbsDiff(direct, got), 1e-9)
				}
			}
		})
	}
}

// A batch norm after a convolution is folded into it: the lowered graph
// has the convolution's matrix only, with the norm's factor in it.
func TestBatchNormFolded(t *testing.T) {
	g := convNet(1, []int{1, 5, 5}, conv(2, 3, 1, [4]int{}), &ir.Layer{Kind: ir.BatchNorm}, act(ir.Square))
	_, st, err := Compile(g, Options{})
	require.NoError(t, err)
	require.Len(t, st.Graph.Layers, 2)
	require.Equal(t, ir.Linear, st.Graph.Layers[0].Kind)
	require.Contains(t, st.Report.Notes, "batchnorm2: batch norm folded into conv2d1")
}

// The diagonals of a convolution on the packed image: a stride-1 kernel
// K×K over C channels touches at most O·C·K² distinct diagonals, however
// large the image (the structure lowering exploits).
func TestConvDiagonalCount(t *testing.T) {
	g := convNet(2, []int{1, 28, 28}, conv(1, 3, 1, [4]int{1, 1, 1, 1}))
	prog, _, err := Compile(g, Options{})
	require.NoError(t, err)
	muls := 0
	for _, op := range prog.Ops {
		if op.Kind == ir.OpMulPlain {
			muls++
		}
	}
	require.LessOrEqual(t, muls, 9)
}

// Compiling a 784→845 convolution (the digit classifier's first layer)
// and a 845→100 dense layer stays fast: diagonals come from the sparse
// entries, not from a scan of D² positions per diagonal.
func BenchmarkLowerDigitConv(b *testing.B) {
	g := convNet(3, []int{1, 28, 28}, conv(5, 5, 2, [4]int{1, 1, 1, 1}), act(ir.Square), &ir.Layer{Kind: ir.Flatten}, dense(100), act(ir.Square), dense(10))
	for b.Loop() {
		if _, _, err := Compile(g, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// A dense layer with few outputs is evaluated in blocks (fewer diagonals
// and rotations) and still matches the reference in every output.
func TestDenseInBlocks(t *testing.T) {
	g := randomGraph(8, 200, []int{10, 3}, []ir.ActFunc{ir.Square})
	prog, st, err := Compile(g, Options{})
	require.NoError(t, err)
	require.Contains(t, prog.Layers[0].Kind, "in blocks of 16")
	requireSimulatesReference(t, st, prog, 200)
}

// A strided convolution that reads the input is evaluated on one copy of
// the input per output channel: every channel then shares each kernel
// tap's diagonal, so the layer costs C·K² plaintext products instead of
// O·C·K², and the simulation still matches the reference.
func TestConvInputCopies(t *testing.T) {
	cases := []struct {
		name           string
		in             []int
		first          *ir.Layer
		copies, pitch  int
		plainMulsLayer int
	}{
		{"digit conv", []int{1, 28, 28}, conv(5, 5, 2, [4]int{1, 1, 1, 1}), 5, 784, 25},
		{"two channels in", []int{2, 9, 9}, conv(3, 3, 2, [4]int{}), 3, 162, 18},
	}
	for i, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			g := convNet(uint64(40+i), c.in, c.first, act(ir.Square), &ir.Layer{Kind: ir.Flatten}, dense(4))
			prog, st, err := Compile(g, Options{})
			require.NoError(t, err)
			require.Equal(t, c.copies, prog.Input.Copies)
			require.Equal(t, c.pitch, prog.Input.Pitch)
			require.Equal(t, c.plainMulsLayer, prog.Layers[0].PlainMuls)
			requireSimulatesReference(t, st, prog, g.Input.Size)
		})
	}
}
