// Package ir holds lanthorn's two intermediate representations: Graph, the
// model as layers over tensors, and Program, the ciphertext-level operations
// that evaluate it under CKKS. Both have one canonical text printer and a
// verifier; passes transform them and never print.
package ir

import "fmt"

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

// The layer kinds of schema v1.
const (
	Dense      LayerKind = "dense"
	Activation LayerKind = "activation"
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
}

// Input describes the model's input vector and the range of its values.
type Input struct {
	Name     string
	Size     int
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

// Layer is one node of the chain.
type Layer struct {
	Name string
	Kind LayerKind
	Pos  Pos
	In   int // input length
	Out  int // output length

	// Dense: Out×In weights (row i produces output i) and Out biases.
	Weights [][]float64
	Bias    []float64

	// Activation.
	Act *Act
}

// Act is an activation. After the approximation pass every activation other
// than Square has Basis and Coeffs set.
type Act struct {
	Func     ActFunc
	Basis    Basis
	Coeffs   []float64  // in Basis; for Chebyshev, over Interval
	Interval [2]float64 // the input interval the approximation holds on
	Degree   int        // declared degree (Chebyshev interpolants)
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
