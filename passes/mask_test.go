package passes

import (
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/spec"
)

// hand builds a small lowered program by hand: n inputs and out outputs in
// a period of D slots, every op in layer 0.
type hand struct {
	p *ir.Program
	g *ir.Graph
}

func newHand(n, out, D int) (*hand, ir.ValueID) {
	p := &ir.Program{Name: "hand", InputSize: n, OutputSize: out, Period: D,
		Input: ir.PackedLayout(n, D, D), Output: ir.PackedLayout(out, D, D),
		Layers: []*ir.LayerInfo{{Name: "last", Kind: "hand"}}}
	g := &ir.Graph{Name: "hand", SpecFile: "hand.yaml", Input: ir.Input{Name: "x", Size: n, Min: -1, Max: 1}}
	x := p.NewValue("x", ir.Cipher, -1)
	p.Ops = append(p.Ops, &ir.Op{Kind: ir.OpInput, Results: []ir.ValueID{x}, Const: -1, Layer: -1})
	return &hand{p, g}, x
}

func (h *hand) op(kind ir.OpKind, c int, steps []int, args ...ir.ValueID) ir.ValueID {
	v := h.p.NewValue("v", ir.Cipher, 0)
	h.p.Ops = append(h.p.Ops, &ir.Op{Kind: kind, Args: args, Results: []ir.ValueID{v}, Steps: steps, Const: c, Layer: 0})
	return v
}

func (h *hand) konst(kind ir.ConstKind, data []float64, basis ir.Basis) int {
	h.p.Consts = append(h.p.Consts, &ir.Const{Name: "c", Kind: kind, Data: data, Basis: basis})
	return len(h.p.Consts) - 1
}

func (h *hand) mulPlain(x ir.ValueID, d []float64) ir.ValueID {
	return h.op(ir.OpMulPlain, h.konst(ir.Vector, d, ""), nil, x)
}
func (h *hand) addPlain(x ir.ValueID, d []float64) ir.ValueID {
	return h.op(ir.OpAddPlain, h.konst(ir.Vector, d, ""), nil, x)
}
func (h *hand) rotate(x ir.ValueID, k int) ir.ValueID { return h.op(ir.OpRotate, -1, []int{k}, x) }
func (h *hand) add(a, b ir.ValueID) ir.ValueID        { return h.op(ir.OpAdd, -1, nil, a, b) }
func (h *hand) poly(x ir.ValueID, c []float64) ir.ValueID {
	return h.op(ir.OpPoly, h.konst(ir.Polynomial, c, ir.Monomial), nil, x)
}
func (h *hand) output(v ir.ValueID) {
	h.p.Ops = append(h.p.Ops, &ir.Op{Kind: ir.OpOutput, Args: []ir.ValueID{v}, Const: -1, Layer: 0})
}

func (h *hand) state() *State {
	return &State{Graph: h.g, Prog: h.p, Report: &Report{Dumps: map[string]string{}}}
}

// partialSums is y = rot_2(x⊙a + rot_1(x)⊙b) + x⊙c + bias over 4 inputs in
// a period of 8, of which only 2 outputs are declared: every other slot
// holds a partial sum of the weights (all nonzero), as a matrix whose
// diagonals are not cut to the output rows would leave.
func partialSums(h *hand, x ir.ValueID) ir.ValueID {
	w := func(base float64) []float64 {
		d := make([]float64, h.p.Period)
		for t := range d {
			d[t] = base + 0.1*float64(t)
		}
		return d
	}
	s := h.add(h.mulPlain(x, w(0.5)), h.mulPlain(h.rotate(x, 1), w(-0.3)))
	acc := h.add(h.rotate(s, 2), h.mulPlain(x, w(0.2)))
	return h.addPlain(acc, w(0.05))
}

// fullSlots simulates p and returns every slot of its result.
func fullSlots(t *testing.T, p *ir.Program, x []float64) []float64 {
	t.Helper()
	q := *p
	q.Output = ir.PackedLayout(p.Period, p.Period, p.Period)
	y, err := q.Simulate(x)
	require.NoError(t, err)
	return y
}

// requireOnlyOutputs checks, independently of the pass's own check, that
// every slot past the n outputs is zero or a copy of output t mod
// nextPow2(n).
func requireOnlyOutputs(t *testing.T, y []float64, n int) {
	t.Helper()
	B := nextPow2(n)
	for s := n; s < len(y); s++ {
		copyOf := 0.0
		if s%B < n {
			copyOf = y[s%B]
		}
		require.True(t, math.Abs(y[s]) < 1e-9 || math.Abs(y[s]-copyOf) < 1e-9, "slot %d holds %g", s, y[s])
	}
}

// Partial sums of a linear tree are zeroed by folding the mask into its
// plaintexts (rotated back through the rotations): no op, no level added,
// outputs unchanged.
func TestMaskFoldsIntoLinearTree(t *testing.T) {
	h, x := newHand(4, 2, 8)
	h.output(partialSums(h, x))
	in := randomInput(1, 4)
	before := fullSlots(t, h.p, in)
	require.Greater(t, math.Abs(before[5]), 1e-3, "the test program must leak")
	ops := len(h.p.Ops)
	st := h.state()
	require.NoError(t, maskOutput(st))
	require.Len(t, h.p.Ops, ops, "folded: no op added")
	after := fullSlots(t, h.p, in)
	require.Equal(t, before[:2], after[:2])
	requireOnlyOutputs(t, after, 2)
	require.Contains(t, h.p.Layers[0].Kind, "folded (no level)")
	require.Contains(t, strings.Join(st.Report.Notes, "\n"), "folded into the last plaintext products")
}

// Partial sums that pass through a polynomial cannot be folded or fixed by
// a constant: a plaintext product by the mask zeroes them, one level.
func TestMaskCostsLevelThroughPolynomial(t *testing.T) {
	build := func(noMask bool) (*ir.Program, *State) {
		h, x := newHand(4, 2, 8)
		h.g.NoOutputMask = noMask
		h.output(h.poly(partialSums(h, x), []float64{0, 1, 0.5}))
		return h.p, h.state()
	}
	plain, pst := build(true)
	require.NoError(t, maskOutput(pst))
	require.Contains(t, strings.Join(pst.Report.Notes, "\n"), "not masked (the spec says mask: false)")
	masked, st := build(false)
	in := randomInput(2, 4)
	before := fullSlots(t, masked, in)
	require.NoError(t, maskOutput(st))
	after := fullSlots(t, masked, in)
	require.Equal(t, before[:2], after[:2])
	requireOnlyOutputs(t, after, 2)
	for _, s := range []*State{pst, st} {
		require.NoError(t, placeRelinearize(s))
		require.NoError(t, placeRescale(s))
		require.NoError(t, ir.VerifyProgram(s.Prog, ir.Relinearized))
	}
	require.Equal(t, programDepth(plain)+1, programDepth(masked), "the mask costs one level")
	require.Contains(t, masked.Layers[0].Kind, "output mask (one level)")
}

// The model that ends in a sigmoid leaves p(0) ≈ 0.5 in its padding slots;
// subtracting it there zeroes them with no level. Every other testdata
// program leaves only outputs, zeros or copies, and the mask changes
// nothing in it.
func TestMaskTestdata(t *testing.T) {
	for _, path := range budgetSpecs(t) {
		t.Run(filepath.Base(path), func(t *testing.T) {
			g, err := spec.Load(path)
			require.NoError(t, err)
			masked, st, err := Compile(g, Options{})
			require.NoError(t, err)
			off := *g
			off.NoOutputMask = true
			plain, _, err := Compile(&off, Options{})
			require.NoError(t, err)
			x := randomInput(9, g.Input.Size)
			for i := range x {
				x[i] = g.Input.Min + (x[i]+1)/2*(g.Input.Max-g.Input.Min)
			}
			y := fullSlots(t, masked, x)
			requireOnlyOutputs(t, y, masked.Output.Size)
			want, err := st.Model.Reference(x)
			require.NoError(t, err)
			require.LessOrEqual(t, ir.MaxAbsDiff(want, y[:masked.Output.Size]), 1e-9)
			require.Equal(t, programDepth(plain), programDepth(masked), "no level added")
			if filepath.Base(path) != "sigmoid_head.yaml" {
				require.Equal(t, plain.String(), masked.String(), "nothing to mask")
				return
			}
			require.Len(t, masked.Ops, len(plain.Ops)+1, "one plaintext addition")
			p0 := fullSlots(t, plain, x)
			for s := masked.Output.Size; s < masked.Period; s++ {
				if s%4 == 3 { // padding of the blocks of 4 the last dense layer leaves
					require.InDelta(t, 0.5, p0[s], 0.01, "slot %d without the mask holds sigmoid(0)", s)
				}
			}
			require.Contains(t, masked.Layers[len(masked.Layers)-1].Kind, "p(0) zeroed in padding (no level)")
		})
	}
}

// A result in two ciphertexts is masked ciphertext by ciphertext, each in
// its own way, with constants of distinct names.
func TestMaskPerOutputCiphertext(t *testing.T) {
	h, x := newHand(4, 2, 8)
	h.p.Output = ir.PackedLayout(6, 4, 8) // 4 outputs in the first ciphertext, 2 in the second
	a := h.poly(partialSums(h, x), []float64{0, 1, 0.5})
	b := partialSums(h, x)
	h.p.Ops = append(h.p.Ops, &ir.Op{Kind: ir.OpOutput, Args: []ir.ValueID{a, b}, Const: -1, Layer: 0})
	in := randomInput(4, 4)
	full := func() [][]float64 {
		q := *h.p
		q.Output = ir.PackedLayout(16, 8, 8)
		y, err := q.Simulate(in)
		require.NoError(t, err)
		return [][]float64{y[:8], y[8:]}
	}
	before := full()
	st := h.state()
	require.NoError(t, maskOutput(st))
	after := full()
	for j, n := range []int{4, 2} {
		require.Equal(t, before[j][:n], after[j][:n], "ciphertext %d outputs", j)
		requireOnlyOutputs(t, after[j], n)
	}
	names := map[string]bool{}
	for _, c := range h.p.Consts {
		require.False(t, names[c.Name] && strings.Contains(c.Name, "mask"), "constant %s twice", c.Name)
		names[c.Name] = true
	}
	require.True(t, names["last.mask0"], "the first ciphertext needs the product mask")
	require.Contains(t, strings.Join(st.Report.Notes, "\n"), "zeroed by a plaintext product by a 0/1 mask; mask folded into the last plaintext products")
}
