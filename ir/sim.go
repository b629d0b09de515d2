package ir

import (
	"fmt"
	"math"
)

// EvalPoly evaluates a polynomial at x: in the monomial basis by Horner's
// rule, in the Chebyshev basis by Clenshaw's recurrence (x in [-1, 1]).
func EvalPoly(basis Basis, c []float64, x float64) float64 {
	if len(c) == 0 {
		return 0
	}
	if basis == Chebyshev {
		var b1, b2 float64
		for j := len(c) - 1; j >= 1; j-- {
			b1, b2 = 2*x*b1-b2+c[j], b1
		}
		return x*b1 - b2 + c[0]
	}
	y := c[len(c)-1]
	for j := len(c) - 2; j >= 0; j-- {
		y = y*x + c[j]
	}
	return y
}

// Apply evaluates the activation on one value, as the encrypted program does
// (interpolants, not the exact functions).
func (a *Act) Apply(x float64) float64 {
	switch {
	case a.Func == Square:
		return x * x
	case a.Basis == Chebyshev:
		lo, hi := a.Interval[0], a.Interval[1]
		return EvalPoly(Chebyshev, a.Coeffs, (2*x-lo-hi)/(hi-lo))
	default:
		return EvalPoly(a.Basis, a.Coeffs, x)
	}
}

// Reference evaluates the graph in float64 with direct loops (see
// Layer.Eval): the tensor-level view of correctness.
func (g *Graph) Reference(x []float64) ([]float64, error) {
	if len(x) != g.Input.Size {
		return nil, fmt.Errorf("input has %d values, model takes %d", len(x), g.Input.Size)
	}
	v := append([]float64(nil), x...)
	for _, l := range g.Layers {
		v = l.Eval(v)
	}
	return v, nil
}

// Simulate executes the program on cleartext slot vectors of length Period,
// one per ciphertext: the input is split in chunks as Program.Input says,
// rotations are cyclic slice rotations, plaintext products are elementwise,
// rescales change nothing, and the output is read from the first copy of
// each chunk of Program.Output. It is the ciphertext-level view of
// correctness, catching layout, diagonal and rotation mistakes with no
// encryption.
func (p *Program) Simulate(x []float64) ([]float64, error) {
	if len(x) != p.Input.Size {
		return nil, fmt.Errorf("input has %d values, program takes %d", len(x), p.Input.Size)
	}
	if err := p.Input.Validate(0); err != nil || p.Input.Period != p.Period {
		return nil, fmt.Errorf("simulate: input layout %v for period %d: %v", p.Input, p.Period, err)
	}
	if err := p.Output.Validate(0); err != nil || p.Output.Period != p.Period {
		return nil, fmt.Errorf("simulate: output layout %v for period %d: %v", p.Output, p.Period, err)
	}
	vals := make([][]float64, len(p.Values))
	for _, op := range p.Ops {
		arg := func(i int) []float64 { return vals[op.Args[i]] }
		set := func(v []float64) { vals[op.Results[0]] = v }
		switch op.Kind {
		case OpInput:
			if len(op.Results) != p.Input.Count() {
				return nil, fmt.Errorf("simulate: %d input ciphertexts, layout %v", len(op.Results), p.Input)
			}
			in := p.Input
			for j, r := range op.Results {
				v := make([]float64, p.Period)
				for i := 0; i < in.ChunkLen(j); i++ {
					for k := 0; k < in.Copies; k++ {
						v[i+k*in.Pitch] = x[j*in.Chunk+i]
					}
				}
				vals[r] = v
			}
		case OpRotate:
			set(rotate(arg(0), op.Steps[0]))
		case OpRotHoisted:
			for i, s := range op.Steps {
				vals[op.Results[i]] = rotate(arg(0), s)
			}
		case OpDot:
			v := make([]float64, p.Period)
			for i, ci := range op.Consts {
				a, c := arg(i), p.Consts[ci].Data
				for j := range v {
					v[j] += a[j] * c[j]
				}
			}
			set(v)
		case OpRotSum:
			v := make([]float64, p.Period)
			for i, s := range op.Steps {
				for j, x := range rotate(arg(i), s) {
					v[j] += x
				}
			}
			set(v)
		case OpMulPlain, OpAddPlain, OpAdd, OpMul:
			b := []float64(nil)
			if op.Kind == OpMulPlain || op.Kind == OpAddPlain {
				b = p.Consts[op.Const].Data
			} else {
				b = arg(1)
			}
			a, v := arg(0), make([]float64, p.Period)
			for i := range v {
				if op.Kind == OpMulPlain || op.Kind == OpMul {
					v[i] = a[i] * b[i]
				} else {
					v[i] = a[i] + b[i]
				}
			}
			set(v)
		case OpRelinearize, OpRescale, OpDropLevel:
			set(arg(0))
		case OpPoly:
			c := p.Consts[op.Const]
			a, v := arg(0), make([]float64, p.Period)
			for i := range v {
				v[i] = EvalPoly(c.Basis, c.Data, a[i])
			}
			set(v)
		case OpOutput:
			if len(op.Args) != p.Output.Count() {
				return nil, fmt.Errorf("simulate: %d output ciphertexts, layout %v", len(op.Args), p.Output)
			}
			out := make([]float64, 0, p.Output.Size)
			for j := range op.Args {
				out = append(out, arg(j)[:p.Output.ChunkLen(j)]...)
			}
			return out, nil
		default:
			return nil, fmt.Errorf("simulate: unknown op %q", op.Kind)
		}
	}
	return nil, fmt.Errorf("simulate: program has no output")
}

func rotate(v []float64, k int) []float64 {
	n := len(v)
	out := make([]float64, n)
	for i := range v {
		out[i] = v[((i+k)%n+n)%n]
	}
	return out
}

// MaxAbsDiff is max_i |a_i - b_i| (+Inf when lengths differ).
func MaxAbsDiff(a, b []float64) float64 {
	if len(a) != len(b) {
		return math.Inf(1)
	}
	var m float64
	for i := range a {
		m = math.Max(m, math.Abs(a[i]-b[i]))
	}
	return m
}
