// Package ir holds lanthorn's two intermediate representations: Graph, the
// model as layers over tensors, and Program, the ciphertext-level operations
// that evaluate it under CKKS. Both have one canonical text printer and a
// verifier; passes transform them and never print.
package ir

import (
	"fmt"
	"math"
)

// Pos is a position in a spec file, used by every error and trace comment
// that points a reader back at the source.
type Pos struct {
	File string // base name of the spec file, never an absolute path
	Line int
	Col  int
}

// String formats the position as file:line:col.
func (p Pos) String() string {
	if p.File == "" {
		return "?"
	}
	if p.Col == 0 {
		return fmt.Sprintf("%s:%d", p.File, p.Line)
	}
	return fmt.Sprintf("%s:%d:%d", p.File, p.Line, p.Col)
}

// LayerKind names the kind of a graph layer.
type LayerKind string

// The layer kinds of schema v1. Linear never comes from a spec: the
// linearize pass turns convolutions, pools, scalings and unfolded batch
// norms into it, a sparse matrix on the packed tensor.
const (
	Dense      LayerKind = "dense"
	Activation LayerKind = "activation"
	Conv2D     LayerKind = "conv2d"
	AvgPool    LayerKind = "avgpool"
	SumPool    LayerKind = "sumpool"
	Flatten    LayerKind = "flatten"
	BatchNorm  LayerKind = "batchnorm"
	ScaleBy    LayerKind = "scale"
	Linear     LayerKind = "linear"
)

// ActFunc names an activation function.
type ActFunc string

// Activation functions. Square and Poly are evaluated exactly; the others are
// replaced by a Chebyshev interpolant over a declared interval.
const (
	Square  ActFunc = "square"
	Poly    ActFunc = "poly"
	ReLU    ActFunc = "relu"
	Sigmoid ActFunc = "sigmoid"
	Tanh    ActFunc = "tanh"
)

// Basis is the polynomial basis of activation coefficients.
type Basis string

// Polynomial bases.
const (
	Monomial  Basis = "monomial"  // c0 + c1 x + c2 x^2 + ...
	Chebyshev Basis = "chebyshev" // c0 T0(t) + c1 T1(t) + ..., t = (2x-a-b)/(b-a)
)

// Graph is a model as an ordered chain of layers over one input vector.
type Graph struct {
	Name       string // model name, a lower-case Go identifier
	SpecFile   string // base name of the spec file
	Input      Input
	OutputName string
	Layers     []*Layer
	Precision  int       // target bits of absolute precision of the outputs
	Pin        *ParamPin // parameters pinned by the spec, or nil
	Insecure   bool      // the spec accepts parameters above the 128-bit bound
	// NoOutputMask is set by output: {mask: false}: the result may keep
	// what the last layer leaves beyond the outputs (see passes' maskOutput).
	NoOutputMask bool
}

// Input describes the model's input tensor and the range of its values.
type Input struct {
	Name     string
	Size     int   // number of values, the product of Shape
	Shape    []int // [n] for a vector, [C, H, W] for an image; nil means [Size]
	Min, Max float64
	Pos      Pos
}

// ParamPin holds CKKS parameters fixed by the spec instead of chosen by the
// planner. Zero fields are left to the planner.
type ParamPin struct {
	LogN     int
	LogQ     []int // bits of each ciphertext prime, q0 first
	LogP     []int // bits of each key-switching prime
	LogScale int   // log2 of the default scale
	Pos      Pos
}

// Layer is one node of the chain. Tensors are packed channel-major: value
// (c, y, x) of a [C, H, W] tensor is element (c·H + y)·W + x of the vector.
type Layer struct {
	Name string
	Kind LayerKind
	Pos  Pos
	In   int // input length
	Out  int // output length
	// InShape and OutShape are the tensor shapes, [n] or [C, H, W]; nil
	// means the vector [In] or [Out].
	InShape, OutShape []int

	// Dense: Out×In weights (row i produces output i) and Out biases.
	// Conv2D: one bias per output channel. Linear: Out biases.
	Weights [][]float64
	Bias    []float64

	// Conv2D: Kernel holds OutC×InC×KH×KW weights, row-major; Window the
	// kernel size, stride and padding. Pools: Window (no padding).
	Kernel []float64
	Window *Window

	// BatchNorm: per-channel statistics.
	Norm *Norm

	// ScaleBy: the constant factor.
	Factor float64

	// Linear: the sparse matrix.
	Map *SparseMap
	// RowBlock, when positive, says the rows of a Linear layer that reads
	// the model's input come in blocks of RowBlock slots, one block per
	// output channel, each block at least as long as the input (a spread
	// convolution): the lowering may then read a copy of the input per
	// block (see passes.inputCopies).
	RowBlock int

	// Activation.
	Act *Act

	// From names the spec layers a merged or folded layer stands for.
	From []string
}

// Window is the kernel geometry of a convolution or pool.
type Window struct {
	KH, KW int    // kernel height and width
	SH, SW int    // stride
	Pad    [4]int // zero padding: top, bottom, left, right
}

// OutHW is the output height and width of the window over an h×w input;
// either is below 1 when the kernel does not fit.
func (w *Window) OutHW(h, wd int) (int, int) {
	ph, pw := h+w.Pad[0]+w.Pad[1], wd+w.Pad[2]+w.Pad[3]
	if ph < w.KH || pw < w.KW || w.SH < 1 || w.SW < 1 {
		return 0, 0
	}
	return (ph-w.KH)/w.SH + 1, (pw-w.KW)/w.SW + 1
}

// Norm holds a batch norm's parameters, one per channel:
// y = Gamma·(x − Mean)/sqrt(Var + Eps) + Beta.
type Norm struct {
	Gamma, Beta, Mean, Var []float64
	Eps                    float64
}

// Affine returns the per-channel factor s and shift t with y = s·x + t.
func (n *Norm) Affine() (s, t []float64) {
	s, t = make([]float64, len(n.Gamma)), make([]float64, len(n.Gamma))
	for c := range s {
		s[c] = n.Gamma[c] / math.Sqrt(n.Var[c]+n.Eps)
		t[c] = n.Beta[c] - s[c]*n.Mean[c]
	}
	return s, t
}

// SparseMap is a sparse Rows×Cols matrix, row by row, columns ascending.
type SparseMap struct {
	Rows, Cols int
	Row        [][]Entry
}

// Entry is one nonzero element of a sparse row.
type Entry struct {
	Col int
	Val float64
}

// NNZ is the number of stored entries.
func (m *SparseMap) NNZ() int {
	n := 0
	for _, r := range m.Row {
		n += len(r)
	}
	return n
}

// Elems is the number of values of a tensor of the given shape.
func Elems(shape []int) int {
	n := 1
	for _, d := range shape {
		n *= d
	}
	return n
}

// Ins returns the input shape, [In] when none is recorded.
func (l *Layer) Ins() []int {
	if len(l.InShape) == 0 {
		return []int{l.In}
	}
	return l.InShape
}

// Outs returns the output shape, [Out] when none is recorded.
func (l *Layer) Outs() []int {
	if len(l.OutShape) == 0 {
		return []int{l.Out}
	}
	return l.OutShape
}

// Dims returns the input shape, [Size] when none is recorded.
func (in Input) Dims() []int {
	if len(in.Shape) == 0 {
		return []int{in.Size}
	}
	return in.Shape
}

// IsLinear reports whether the layer is an affine map of its input.
func (l *Layer) IsLinear() bool {
	switch l.Kind {
	case Dense, Conv2D, AvgPool, SumPool, Flatten, BatchNorm, ScaleBy, Linear:
		return true
	}
	return false
}

// Act is an activation. After the approximation pass every activation other
// than Square has Basis and Coeffs set.
type Act struct {
	Func     ActFunc
	Basis    Basis
	Coeffs   []float64  // in Basis; for Chebyshev, over Interval
	Interval [2]float64 // the input interval the approximation holds on
	Degree   int        // declared degree (Chebyshev interpolants)
	// Tolerance, when positive, is the largest absolute error allowed over
	// Interval; the planner then chooses the degree (Degree is 0).
	Tolerance float64
}

// Degree returns the polynomial degree the activation evaluates.
func (a *Act) PolyDegree() int {
	if a.Func == Square {
		return 2
	}
	d := len(a.Coeffs) - 1
	for d > 0 && a.Coeffs[d] == 0 {
		d--
	}
	return d
}

// OutSize is the length of the model's output vector.
func (g *Graph) OutSize() int {
	if len(g.Layers) == 0 {
		return g.Input.Size
	}
	return g.Layers[len(g.Layers)-1].Out
}
