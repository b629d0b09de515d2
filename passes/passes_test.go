package passes

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
	"gonum.org/v1/gonum/mat"

	"github.com/lanthorn/lanthorn/ir"
)

// randomGraph builds a chain model with the given layer widths; acts[i] is
// the activation after dense layer i ("" for none).
func randomGraph(seed uint64, in int, widths []int, acts []ir.ActFunc) *ir.Graph {
	r := rand.New(rand.NewPCG(seed, 7))
	g := &ir.Graph{Name: "m", SpecFile: "m.yaml", Input: ir.Input{Name: "x", Size: in, Min: -1, Max: 1}, OutputName: "y", Precision: 16}
	size := in
	for i, w := range widths {
		l := &ir.Layer{Name: fmt.Sprintf("dense%d", i+1), Kind: ir.Dense, In: size, Out: w, Pos: ir.Pos{File: "m.yaml", Line: 10 + i}}
		scale := 1 / math.Sqrt(float64(size))
		for range w {
			row := make([]float64, size)
			for c := range row {
				row[c] = (r.Float64()*2 - 1) * scale
			}
			l.Weights = append(l.Weights, row)
			l.Bias = append(l.Bias, (r.Float64()*2-1)*0.1)
		}
		g.Layers = append(g.Layers, l)
		size = w
		if i < len(acts) && acts[i] != "" {
			a := &ir.Act{Func: acts[i]}
			switch acts[i] {
			case ir.Poly:
				a.Basis, a.Coeffs = ir.Monomial, []float64{0.1, 0.5, 0.25}
			case ir.ReLU, ir.Sigmoid, ir.Tanh:
				a.Interval = [2]float64{-3, 3}
				a.Degree = 7
			}
			g.Layers = append(g.Layers, &ir.Layer{Name: fmt.Sprintf("act%d", i+1), Kind: ir.Activation, In: w, Out: w, Act: a})
		}
	}
	return g
}

func randomInput(seed uint64, n int) []float64 {
	r := rand.New(rand.NewPCG(seed, 11))
	x := make([]float64, n)
	for i := range x {
		x[i] = r.Float64()*2 - 1
	}
	return x
}

// The cleartext simulation of the ciphertext-level program must agree with
// the tensor-level float64 reference: layout, diagonals and rotations.
func TestSimulationMatchesReference(t *testing.T) {
	cases := []struct {
		in     int
		widths []int
		acts   []ir.ActFunc
	}{
		{1, []int{1}, nil},
		{3, []int{5, 1}, []ir.ActFunc{ir.Square}},
		{7, []int{13, 4}, []ir.ActFunc{ir.Tanh}},
		{10, []int{16, 8, 1}, []ir.ActFunc{ir.Tanh, ir.Square}},
		{33, []int{2}, []ir.ActFunc{ir.Sigmoid}},
		{5, []int{9, 9, 3}, []ir.ActFunc{ir.ReLU, ir.Poly}},
		{64, []int{100, 10}, []ir.ActFunc{ir.Square}},
		{12, []int{6}, []ir.ActFunc{ir.Poly}},
	}
	for i, c := range cases {
		t.Run(fmt.Sprintf("%d-%v", c.in, c.widths), func(t *testing.T) {
			g := randomGraph(uint64(i), c.in, c.widths, c.acts)
			prog, st, err := Compile(g, Options{})
			require.NoError(t, err)
			for k := range 5 {
				x := randomInput(uint64(100*i+k), c.in)
				want, err := st.Model.Reference(x)
				require.NoError(t, err)
				got, err := prog.Simulate(x)
				require.NoError(t, err)
				require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9, "want %v got %v", want, got)
			}
		})
	}
}

// A graph whose activation has no linear layer before it gets a diagonal
// layer for its interval map; the result must still match.
func TestActivationFirst(t *testing.T) {
	g := randomGraph(3, 4, []int{2}, nil)
	act := &ir.Layer{Name: "act0", Kind: ir.Activation, In: 4, Out: 4, Act: &ir.Act{Func: ir.Tanh, Interval: [2]float64{-2, 2}, Degree: 5}}
	g.Layers = append([]*ir.Layer{act}, g.Layers...)
	prog, st, err := Compile(g, Options{})
	require.NoError(t, err)
	x := randomInput(9, 4)
	want, _ := st.Model.Reference(x)
	got, err := prog.Simulate(x)
	require.NoError(t, err)
	require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9)
}

// Outside check: the dense layer of the reference equals y = Wx + b computed
// by gonum's mat (a general-purpose linear-algebra library).
func TestDenseAgainstGonum(t *testing.T) {
	for _, shape := range [][2]int{{1, 1}, {3, 7}, {16, 10}, {5, 33}} {
		g := randomGraph(uint64(shape[0]), shape[1], []int{shape[0]}, nil)
		l := g.Layers[0]
		x := randomInput(1, shape[1])
		got, err := g.Reference(x)
		require.NoError(t, err)
		flat := make([]float64, 0, shape[0]*shape[1])
		for _, row := range l.Weights {
			flat = append(flat, row...)
		}
		var y mat.VecDense
		y.MulVec(mat.NewDense(shape[0], shape[1], flat), mat.NewVecDense(len(x), x))
		y.AddVec(&y, mat.NewVecDense(len(l.Bias), l.Bias))
		require.InDeltaSlice(t, y.RawVector().Data, got, 1e-12)
		// And the lowered diagonal program, simulated on slots.
		prog, _, err := Compile(g, Options{})
		require.NoError(t, err)
		sim, err := prog.Simulate(x)
		require.NoError(t, err)
		require.InDeltaSlice(t, y.RawVector().Data, sim, 1e-12)
	}
}

// Outside check: HomomorphicEncryption.org Security Standard (Albrecht et
// al., 2018), Table 1, 128-bit classical security, ternary secret: the
// largest log2(QP) per ring degree. Values quoted from memory of the table.
var standardTable128 = map[int]int{1024: 27, 2048: 54, 4096: 109, 8192: 218, 16384: 438, 32768: 881}

func TestSecurityTableMatchesStandard(t *testing.T) {
	require.Len(t, MaxLogQP128, len(standardTable128))
	for n, bound := range standardTable128 {
		logN := int(math.Log2(float64(n)))
		require.Equal(t, bound, MaxLogQP128[logN], "N = %d", n)
	}
}

func TestParamsWithinSecurityBound(t *testing.T) {
	shapes := [][]int{{4}, {16, 8, 1}, {100, 10}, {32, 32, 32, 2}}
	for i, w := range shapes {
		acts := []ir.ActFunc{ir.Tanh, ir.Square, ir.Sigmoid}
		g := randomGraph(uint64(i), 10, w, acts[:len(w)-1])
		prog, _, err := Compile(g, Options{})
		require.NoError(t, err)
		pr := prog.Params
		// The table bounds log2 of the modulus QP: the product of the
		// primes themselves, each a little off 2^b.
		sum := 0.0
		for _, q := range append(append([]uint64{}, pr.Q...), pr.P...) {
			sum += math.Log2(float64(q))
		}
		bound := standardTable128[1<<pr.LogN]
		require.NotZero(t, bound)
		require.LessOrEqual(t, sum, float64(bound), "logN %d logQ %v logP %v", pr.LogN, pr.LogQ, pr.LogP)
		require.GreaterOrEqual(t, pr.Slots(), prog.Period)
		require.Equal(t, programDepth(prog), pr.MaxLevel(), "chain length matches the depth")
		// The smaller ring must not have held the chain (smallest ring chosen).
		if smaller, ok := standardTable128[1<<(pr.LogN-1)]; ok && 1<<(pr.LogN-2) >= prog.Period {
			require.Greater(t, sum, float64(smaller-30), "a much smaller ring might have sufficed")
		}
	}
}

func TestPinnedParamsAboveBoundRefused(t *testing.T) {
	g := randomGraph(1, 4, []int{2}, nil)
	g.Pin = &ir.ParamPin{LogN: 12, LogQ: []int{60, 40}, LogP: []int{60}, LogScale: 40, Pos: ir.Pos{File: "m.yaml", Line: 5, Col: 3}}
	_, _, err := Compile(g, Options{})
	require.ErrorContains(t, err, "m.yaml:5:3")
	require.ErrorContains(t, err, "exceeds the 128-bit bound 109")
	g.Insecure = true
	prog, _, err := Compile(g, Options{})
	require.NoError(t, err)
	require.True(t, prog.Params.Insecure)
}

func TestPinnedChainTooShort(t *testing.T) {
	g := randomGraph(1, 4, []int{4, 2}, []ir.ActFunc{ir.Square})
	g.Pin = &ir.ParamPin{LogN: 13, LogQ: []int{50, 30}, LogP: []int{50}, LogScale: 30, Pos: ir.Pos{File: "m.yaml", Line: 5, Col: 3}}
	_, _, err := Compile(g, Options{})
	require.ErrorContains(t, err, "the pinned chain has 1 levels, the model needs 3")
}

// Every dense layer's output returns to exactly the default scale: the
// plaintext is encoded at the scale of the prime the rescale drops.
func TestDenseOutputsAtDefaultScale(t *testing.T) {
	g := randomGraph(5, 6, []int{8, 8, 3}, []ir.ActFunc{ir.Square, ir.Tanh})
	prog, st, err := Compile(g, Options{})
	require.NoError(t, err)
	delta := ir.Pow2Scale(prog.Params.LogScale)
	checked := 0
	for _, op := range prog.Ops {
		if op.Kind == ir.OpAddPlain || op.Kind == ir.OpPoly {
			// Bias additions happen before the rescale, at Δ·q_l, or,
			// in a layer rescaled before its folds, after the folds at Δ.
			v := prog.Values[op.Results[0]]
			switch {
			case op.Kind == ir.OpPoly:
				require.True(t, v.Scale.Equal(delta), "%s", prog.FormatOp(op))
			case prog.Def(op.Args[0]).Kind == ir.OpAdd && foldsAfterRescale(prog, st.Graph)[op.Layer] > 0:
				require.True(t, v.Scale.Equal(delta), "%s", prog.FormatOp(op))
			default:
				require.True(t, v.Scale.Equal(delta.Mul(ir.Prime(v.Level))), "%s", prog.FormatOp(op))
			}
			checked++
		}
	}
	require.Greater(t, checked, 3)
}

// Outside check of the interpolation: a polynomial of degree ≤ d is its
// own interpolant, so T_3 = 4t³ − 3t gives the coefficients (0, 0, 0, 1)
// (closed form, common knowledge of the trade); and the Chebyshev series of
// e^x on [-1, 1] has coefficients a_0 = I_0(1), a_k = 2·I_k(1), with I_k
// the modified Bessel functions (Abramowitz and Stegun, 9.6.34 and table
// 9.8; values from memory), which a degree-15 interpolant reproduces.
func TestChebyshevInterpolant(t *testing.T) {
	c := ChebyshevInterpolant(func(x float64) float64 { return 4*x*x*x - 3*x }, -1, 1, 5)
	require.InDeltaSlice(t, []float64{0, 0, 0, 1, 0, 0}, c, 1e-14)

	c = ChebyshevInterpolant(math.Exp, -1, 1, 15)
	bessel := []float64{1.2660658777520082, 0.5651591039924851, 0.1357476697670383, 0.0221684249243319}
	require.InDelta(t, bessel[0], c[0], 1e-14)
	for k := 1; k < len(bessel); k++ {
		require.InDelta(t, 2*bessel[k], c[k], 1e-14, "k = %d", k)
	}
	// On another interval the map t = (2x − lo − hi)/(hi − lo) is applied.
	c = ChebyshevInterpolant(func(x float64) float64 { return x }, 2, 6, 3)
	require.InDeltaSlice(t, []float64{4, 2, 0, 0}, c, 1e-14)
}

func TestTanhApproximationImprovesWithDegree(t *testing.T) {
	prev := math.Inf(1)
	for _, d := range []int{3, 7, 15, 31} {
		c := ChebyshevInterpolant(math.Tanh, -4, 4, d)
		dev := MaxDeviation(math.Tanh, c, -4, 4)
		require.Less(t, dev, prev, "degree %d", d)
		prev = dev
	}
	require.Less(t, prev, 1e-3)
}

func TestPipelineOrder(t *testing.T) {
	index := map[string]int{}
	for i, p := range Pipeline {
		_, dup := index[p.Name]
		require.False(t, dup, "pass %s listed twice", p.Name)
		index[p.Name] = i
		require.NotEmpty(t, p.Why, p.Name)
	}
	for _, o := range Order {
		b, ok1 := index[o.Before]
		a, ok2 := index[o.After]
		require.True(t, ok1 && ok2, "%s, %s", o.Before, o.After)
		require.Less(t, b, a, "%s must run before %s: %s", o.Before, o.After, o.Why)
	}
}

func TestDumpAfter(t *testing.T) {
	g := randomGraph(2, 3, []int{4, 1}, []ir.ActFunc{ir.Square})
	_, st, err := Compile(g, Options{DumpAfter: []string{"lower", "keys", "approximate"}})
	require.NoError(t, err)
	require.Contains(t, st.Report.Dumps["lower"], "mulplain")
	require.Contains(t, st.Report.Dumps["keys"], "keys rotations")
	require.True(t, strings.HasPrefix(st.Report.Dumps["approximate"], "graph m"))
}

// requireSimulatesReference runs prog on cleartext slots (ir.Program.Simulate)
// for three random inputs of size n and holds it to the float64 reference
// of the model st compiled, within 1e-9.
func requireSimulatesReference(t *testing.T, st *State, prog *ir.Program, n int) {
	t.Helper()
	for k := range 3 {
		x := randomInput(uint64(k), n)
		want, err := st.Model.Reference(x)
		require.NoError(t, err)
		got, err := prog.Simulate(x)
		require.NoError(t, err)
		require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9, "input %d", k)
	}
}
