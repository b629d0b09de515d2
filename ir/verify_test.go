package ir

import (
	"math"
	"testing"

	"github.com/stretchr/testify/require"
)

// tiny builds by hand: input → mulplain → rescale → output, at levels 1→0.
func tiny() *Program {
	p := &Program{Name: "t", Period: 4, InputSize: 2, OutputSize: 2, Params: Params{LogN: 10, LogQ: []int{30, 20}, LogScale: 20},
		Input: PackedLayout(2, 4, 4), Output: PackedLayout(2, 4, 4)}
	x := p.NewValue("x", Cipher, -1)
	m := p.NewValue("m", Cipher, 0)
	r := p.NewValue("r", Cipher, 0)
	p.Consts = []*Const{{Name: "w", Kind: Vector, Data: []float64{1, 2, 0, 0}, Level: 1, Scale: Prime(1)}}
	p.Ops = []*Op{
		{Kind: OpInput, Results: []ValueID{x}, Const: -1},
		{Kind: OpMulPlain, Args: []ValueID{x}, Results: []ValueID{m}, Const: 0},
		{Kind: OpRescale, Args: []ValueID{m}, Results: []ValueID{r}, Const: -1},
		{Kind: OpOutput, Args: []ValueID{r}, Const: -1},
	}
	delta := Pow2Scale(20)
	p.Values[x].Level, p.Values[x].Scale = 1, delta
	p.Values[m].Level, p.Values[m].Scale = 1, delta.Mul(Prime(1))
	p.Values[r].Level, p.Values[r].Scale = 0, delta
	return p
}

func TestVerifyAcceptsTiny(t *testing.T) {
	require.NoError(t, VerifyProgram(tiny(), Keyed))
}

func TestVerifyCatchesBrokenRules(t *testing.T) {
	cases := []struct {
		name   string
		break_ func(p *Program)
		want   string
	}{
		{"plaintext at wrong level", func(p *Program) { p.Consts[0].Level = 0 }, "plaintext w at level 0 meets a ciphertext at level 1"},
		{"rescale keeps scale", func(p *Program) { p.Values[2].Scale = p.Values[1].Scale }, "rescale must drop q1"},
		{"rescale at level 0", func(p *Program) { p.Values[1].Level, p.Values[0].Level, p.Consts[0].Level = 0, 0, 0 }, "rescale at level 0"},
		{"use before def", func(p *Program) { p.Ops[1], p.Ops[2] = p.Ops[2], p.Ops[1] }, "used before it is defined"},
		{"missing output", func(p *Program) { p.Ops = p.Ops[:3] }, "0 outputs"},
		{"rotation key set", func(p *Program) { p.Rotations = []int{1} }, "rotation keys [1], program uses []"},
		{"fresh input below top", func(p *Program) { p.Values[0].Level = 0 }, "fresh ciphertext must be at the top level"},
		{"input layout of two chunks", func(p *Program) { p.Input = PackedLayout(2, 1, 4) }, "has 0 operands and 1 results, want 0 and 2"},
		{"output layout of another size", func(p *Program) { p.Output = PackedLayout(3, 4, 4) }, "output layout 3 in 1 × 4, period 4, want 2 elements"},
		{"layout period", func(p *Program) { p.Input = PackedLayout(2, 4, 8) }, "input layout 2 in 1 × 4, period 8, want 2 elements in the period 4"},
		{"invalid layout", func(p *Program) { p.Input.Chunk = 0 }, "input layout: chunk 0"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := tiny()
			c.break_(p)
			err := VerifyProgram(p, Keyed)
			require.Error(t, err)
			require.Contains(t, err.Error(), c.want)
		})
	}
}

func TestVerifyAddScales(t *testing.T) {
	p := tiny()
	// r + x: operands at different levels and scales.
	s := p.NewValue("s", Cipher, 0)
	p.Values[s].Level, p.Values[s].Scale = 0, Pow2Scale(20)
	add := &Op{Kind: OpAdd, Args: []ValueID{2, 0}, Results: []ValueID{s}, Const: -1}
	p.Ops = append(p.Ops[:3], add, &Op{Kind: OpOutput, Args: []ValueID{s}, Const: -1})
	err := VerifyProgram(p, Leveled)
	require.ErrorContains(t, err, "operands at level 0 and 1")
}

func TestScaleAlgebra(t *testing.T) {
	d := Pow2Scale(40)
	s := Prime(3).Mul(d).Div(d.Mul(d).Div(Prime(4)))
	require.Equal(t, "2^-40·q3·q4", s.String())
	require.True(t, s.Mul(d.Mul(d).Div(Prime(4))).Div(Prime(3)).Equal(d))
	require.True(t, Scale{Pow2: 1, Q: []int{0, 0}}.Equal(Pow2Scale(1)))
	require.Equal(t, 3, PolyDepth(7))
	require.Equal(t, 4, PolyDepth(8))
	require.Equal(t, 1, PolyDepth(1))
	require.Equal(t, 2, PolyDepth(2))
}

// Clenshaw's recurrence against the closed form T_n(cos θ) = cos(nθ)
// (common knowledge of the trade).
func TestEvalChebyshev(t *testing.T) {
	for n := 0; n < 12; n++ {
		c := make([]float64, n+1)
		c[n] = 1
		for _, th := range []float64{0, 0.3, 1.1, 2.9} {
			require.InDelta(t, cosN(n, th), EvalPoly(Chebyshev, c, cos(th)), 1e-12)
		}
	}
}

func cos(x float64) float64          { return math.Cos(x) }
func cosN(n int, th float64) float64 { return math.Cos(float64(n) * th) }

// The rotate-sum and dot ops: a well-formed one passes; a step per term, a
// constant per operand, a rotated term and matching levels are required.
func TestVerifyRotSumAndDot(t *testing.T) {
	// tinySums: input → dot(x, x) → rotsum(d [step 0], d [step 1]) →
	// rescale → output, with the key for step 1.
	tinySums := func() *Program {
		p := tiny()
		x, r := ValueID(0), ValueID(2)
		d := p.NewValue("d", Cipher, 0)
		s := p.NewValue("s", Cipher, 0)
		p.Consts = append(p.Consts, &Const{Name: "w2", Kind: Vector, Data: []float64{0, 1, 0, 0}, Level: 1, Scale: Prime(1)})
		p.Ops[1] = &Op{Kind: OpDot, Args: []ValueID{x, x}, Consts: []int{0, 1}, Results: []ValueID{d}, Const: -1}
		p.Ops = []*Op{p.Ops[0], p.Ops[1],
			{Kind: OpRotSum, Args: []ValueID{d, d}, Steps: []int{0, 1}, Results: []ValueID{s}, Const: -1},
			{Kind: OpRescale, Args: []ValueID{s}, Results: []ValueID{r}, Const: -1}, p.Ops[3]}
		p.Values[d].Level, p.Values[d].Scale = 1, p.Values[1].Scale
		p.Values[s].Level, p.Values[s].Scale = 1, p.Values[1].Scale
		p.Rotations, p.RotationLevels = []int{1}, []int{1}
		return p
	}
	require.NoError(t, VerifyProgram(tinySums(), Keyed))
	for _, c := range []struct {
		name   string
		break_ func(p *Program)
		want   string
	}{
		{"rotsum step count", func(p *Program) { p.Ops[2].Steps = []int{1} }, "1 steps for 2 terms"},
		{"rotsum unrotated", func(p *Program) { p.Ops[2].Steps = []int{0, 0} }, "no term is rotated"},
		{"rotsum key", func(p *Program) { p.Rotations, p.RotationLevels = nil, nil }, "rotation keys [], program uses [1]"},
		{"dot constants", func(p *Program) { p.Ops[1].Consts = []int{0} }, "1 constants for 2 operands"},
		{"dot level", func(p *Program) { p.Consts[1].Level = 0 }, "plaintext w2 at level 0 meets a ciphertext at level 1"},
	} {
		t.Run(c.name, func(t *testing.T) {
			p := tinySums()
			c.break_(p)
			require.ErrorContains(t, VerifyProgram(p, Keyed), c.want)
		})
	}
}
