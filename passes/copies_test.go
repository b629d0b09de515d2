package passes

import (
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/spec"
)

// applyCopies evaluates the copies method in float64 on a slot vector x
// of period D: x̃ = Σ_σ rot_{−σ}(x), the products Σ_k h_k ⊙ rot_k(x̃), then
// the fold of the D/B blocks; it returns the first out slots.
func applyCopies(cp *copyPlan, x []float64, out int) []float64 {
	D := len(x)
	xt := make([]float64, D)
	for q := range D {
		for _, s := range cp.shifts {
			xt[q] += x[((q-s)%D+D)%D]
		}
	}
	acc := make([]float64, D)
	for k, h := range cp.diags {
		for s := range D {
			acc[s] += h[s] * xt[(s+k)%D]
		}
	}
	y := make([]float64, out)
	for t := range out {
		for m := 0; m < D; m += cp.B {
			y[t] += acc[m+t]
		}
	}
	return y
}

// requireApart checks that the copies L + σ of the live slots are pairwise
// disjoint, from the definition.
func requireApart(t *testing.T, zero []bool, shifts []int) {
	t.Helper()
	D := len(zero)
	owner := map[int]int{}
	for i, s := range shifts {
		for p, z := range zero {
			if z {
				continue
			}
			q := (p + s) % D
			j, taken := owner[q]
			require.False(t, taken, "copies %d and %d (shifts %d, %d) meet at slot %d", j, i, shifts[j], s, q)
			owner[q] = i
		}
	}
}

// A sparse input in the shape of a strided convolution's spread output
// (even slots of even rows of a 16-slot grid, three channel blocks): the
// plan's copies are apart, it needs fewer diagonals than the block method's
// B, and its map equals the dense product on inputs that are zero off the
// live slots.
func TestCopiesPlanMatchesDense(t *testing.T) {
	const D, B, out = 1024, 16, 12
	zero := make([]bool, D)
	for s := range zero {
		zero[s] = true
	}
	var live []int
	for c := range 3 {
		for i := range 6 {
			for j := range 6 {
				p := 256*c + 32*i + 2*j
				zero[p] = false
				live = append(live, p)
			}
		}
	}
	r := rand.New(rand.NewPCG(3, 9))
	W := make([][]float64, out)
	var es []copyEntry
	for tt := range out {
		W[tt] = make([]float64, D)
		for _, p := range live {
			if r.IntN(5) > 0 { // some entries zero
				W[tt][p] = r.Float64()*2 - 1
				es = append(es, copyEntry{tt, p, W[tt][p]})
			}
		}
	}
	cp, err := planCopies(es, zero, B, D)
	require.NoError(t, err)
	require.Equal(t, 0, cp.shifts[0])
	require.GreaterOrEqual(t, len(cp.shifts), 2)
	requireApart(t, zero, cp.shifts)
	require.Less(t, len(cp.diags), B)
	for k := range 3 {
		x := make([]float64, D)
		for _, p := range live {
			x[p] = randomInput(uint64(k), 1)[0] + float64(p%7)/7
		}
		want := make([]float64, out)
		for tt := range out {
			for _, p := range live {
				want[tt] += W[tt][p] * x[p]
			}
		}
		require.InDeltaSlice(t, want, applyCopies(cp, x, out), 1e-12)
	}
}

// Copies that would meet on a live slot are refused: here every nonzero
// shift of the live set {0, 1, 2, 3, 4, 8, 12} mod 16 meets itself (its
// differences are all of ℤ_16, checked below), so no second copy fits,
// though the live slots are fewer than half. So is an input whose zeros
// are unknown, or more than half live.
func TestCopiesRefusedWhenTheyCollide(t *testing.T) {
	const D, B = 16, 4
	zero := make([]bool, D)
	for s := range zero {
		zero[s] = true
	}
	for _, p := range []int{0, 1, 2, 3, 4, 8, 12} {
		zero[p] = false
	}
	for d := 1; d < D; d++ {
		meets := false
		for p := range D {
			meets = meets || !zero[p] && !zero[(p+d)%D]
		}
		require.True(t, meets, "shift %d keeps the live set apart; the case is wrong", d)
	}
	es := []copyEntry{{0, 0, 1}, {1, 3, 2}, {2, 8, -1}, {3, 12, 0.5}}
	_, err := planCopies(es, zero, B, D)
	require.ErrorIs(t, err, errNoCopies)
	_, err = planCopies(es, nil, B, D)
	require.ErrorIs(t, err, errNoCopies)
	half := make([]bool, D)
	for s := range 7 {
		half[s] = true // 9 live slots
	}
	_, err = planCopies(es, half, B, D)
	require.ErrorIs(t, err, errNoCopies)
}

// knownZeros: a linear layer's zero rows with zero bias, repeated with the
// block period where the block method may apply; activations keep them
// only when they map zero to zero; the program's input is never trusted.
func TestKnownZeros(t *testing.T) {
	const D = 16
	lin := &ir.Layer{Name: "a", Kind: ir.Dense, In: 4, Out: 6, Bias: []float64{0.1, 0, 0.5, 0, 0, 0}}
	for r := range 6 {
		row := make([]float64, 4)
		if r != 1 && r != 2 && r != 4 {
			row[r%4] = 1
		}
		lin.Weights = append(lin.Weights, row)
	}
	keep := func(l *ir.Layer) bool { return zeroAtZero(l.Act) }
	z := knownZeros(nil, []*ir.Layer{lin}, D, keep)
	for s := range D {
		r := s % 8 // nextPow2(6) < 16: a block layout may repeat the rows
		require.Equal(t, r == 1 || r == 4 || r == 6 || r == 7, z[s], "slot %d", s)
	}
	a := func(ac ir.Act) *ir.Layer { return &ir.Layer{Name: "f", Kind: ir.Activation, In: 6, Out: 6, Act: &ac} }
	cheb := func(c ...float64) ir.Act {
		return ir.Act{Func: ir.ReLU, Basis: ir.Chebyshev, Coeffs: c, Interval: [2]float64{-1, 1}}
	}
	cases := []struct {
		name string
		act  ir.Act
		keep bool
	}{
		{"square", ir.Act{Func: ir.Square}, true},
		{"monomial without constant", ir.Act{Func: ir.Poly, Basis: ir.Monomial, Coeffs: []float64{0, 1, 0.5}}, true},
		{"monomial with constant", ir.Act{Func: ir.Poly, Basis: ir.Monomial, Coeffs: []float64{0.5, 1}}, false},
		{"chebyshev T0 + T2 (zero at zero)", cheb(1, 0.3, 1, 0.2), true},
		{"chebyshev T0 + T2/2", cheb(1, 0, 0.5), false},
		{"chebyshev interval not folded", ir.Act{Func: ir.ReLU, Basis: ir.Chebyshev, Coeffs: []float64{1, 0, 1}, Interval: [2]float64{-4, 4}}, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got := knownZeros(nil, []*ir.Layer{lin, a(c.act)}, D, keep)
			if c.keep {
				require.Equal(t, z, got)
			} else {
				require.Nil(t, got)
			}
		})
	}
	require.Nil(t, knownZeros(nil, []*ir.Layer{a(ir.Act{Func: ir.Square})}, D, keep), "the program's input")
	wide := &ir.Layer{Name: "w", Kind: ir.Dense, In: 4, Out: 2 * D, Weights: make([][]float64, 2*D)}
	require.Nil(t, knownZeros(nil, []*ir.Layer{lin, wide}, D, keep), "wider than a ciphertext")
}

// A strided convolution's spread output, squared, feeds a dense layer by
// the copies method; with a ReLU interpolant in place of the square
// (p(0) ≠ 0, so the spread layout's empty slots are no longer zero) the
// method is not applied. Both simulate to the reference.
func TestCopiesOnlyWhereZerosProven(t *testing.T) {
	for i, c := range []struct {
		act    ir.ActFunc
		copies bool
	}{{ir.Square, true}, {ir.ReLU, false}} {
		t.Run(string(c.act), func(t *testing.T) {
			g := convNet(uint64(60+i), []int{1, 16, 16}, conv(3, 3, 2, [4]int{}), act(c.act), &ir.Layer{Kind: ir.Flatten}, dense(6))
			prog, st, err := Compile(g, Options{})
			require.NoError(t, err)
			require.Contains(t, strings.Join(st.Report.Notes, "\n"), "output spread")
			require.Equal(t, c.copies, strings.Contains(prog.Layers[len(prog.Layers)-1].Kind, "shifted copies"), prog.Layers[len(prog.Layers)-1].Kind)
			_, _, err = Compile(g, Options{Method: map[string]Method{prog.Layers[len(prog.Layers)-1].Name: Copies}})
			if c.copies {
				require.NoError(t, err)
			} else {
				require.ErrorIs(t, err, errNoCopies)
			}
			requireSimulatesReference(t, st, prog, g.Input.Size)
		})
	}
}

// The digit classifier's first dense layer reads the squared spread
// convolution output (845 live slots of 4096): 4 shifted copies and 32
// folded diagonals instead of 128, the fewest possible with 4 copies (each
// diagonal meets at most 4 of the 128 residues). Its simulation matches
// the reference, as the block method's does.
func TestCopiesDigits(t *testing.T) {
	g, err := spec.Load("../testdata/mnist/digits.yaml")
	require.NoError(t, err)
	prog, st, err := Compile(g, Options{})
	require.NoError(t, err)
	blocks, _, err := Compile(g, Options{Method: map[string]Method{"dense1": Blocks}})
	require.NoError(t, err)
	var l, lb *ir.LayerInfo
	for i, info := range prog.Layers {
		if info.Name == "dense1" {
			l, lb = info, blocks.Layers[i]
		}
	}
	require.NotNil(t, l)
	require.Contains(t, l.Kind, "in blocks of 128, 4 shifted copies, 32 diagonals")
	require.Equal(t, 32, l.PlainMuls)
	require.Equal(t, 128, lb.PlainMuls)
	require.Less(t, l.Rotations, lb.Rotations)
	for k := range 3 {
		x := randomInput(uint64(k), g.Input.Size)
		want, err := st.Model.Reference(x)
		require.NoError(t, err)
		got, err := prog.Simulate(x)
		require.NoError(t, err)
		require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9)
		gotB, err := blocks.Simulate(x)
		require.NoError(t, err)
		require.LessOrEqual(t, ir.MaxAbsDiff(gotB, got), 1e-9)
	}
	// The shifts keep the copies apart on what lower proved live.
	pre := st.Graph.Layers
	z := knownZeros(nil, pre[:2], prog.Period, func(l *ir.Layer) bool { return zeroAtZero(l.Act) })
	live := 0
	for _, zz := range z {
		if !zz {
			live++
		}
	}
	require.Equal(t, 5*13*13, live)
	var es []copyEntry
	for tt, row := range pre[2].Weights {
		for c, v := range row {
			es = append(es, copyEntry{tt, c, v})
		}
	}
	cp, err := planCopies(es, z, 128, prog.Period)
	require.NoError(t, err)
	requireApart(t, z, cp.shifts)
}

// The selection offers the copies method where the input's zeros are
// proven, prices it from the segment lowered with what the layers before
// it prove, and records the choice with its runner-up; with a ReLU
// interpolant before the layer it is not offered.
func TestSelectOffersCopies(t *testing.T) {
	for i, c := range []struct {
		act     ir.ActFunc
		offered bool
	}{{ir.Square, true}, {ir.ReLU, false}} {
		t.Run(string(c.act), func(t *testing.T) {
			g := convNet(uint64(60+i), []int{1, 16, 16}, conv(3, 3, 2, [4]int{}), act(c.act), &ir.Layer{Kind: ir.Flatten}, dense(6))
			prog, st, _, err := Select(g, Options{}, DefaultProfile(), Latency)
			require.NoError(t, err)
			name := prog.Layers[len(prog.Layers)-1].Name
			var ch *Choice
			for k := range st.Report.Choices {
				if st.Report.Choices[k].Decision == name+": method" {
					ch = &st.Report.Choices[k]
				}
			}
			require.NotNil(t, ch, "choices %v", st.Report.Choices)
			offered := ch.Chosen == string(Copies) || strings.HasPrefix(ch.RunnerUp, string(Copies))
			require.Equal(t, c.offered, offered, "%+v", *ch)
			if ch.Chosen == string(Copies) {
				require.Contains(t, prog.Layers[len(prog.Layers)-1].Kind, "shifted copies")
				require.Less(t, ch.ChosenMS, ch.RunnerUpMS)
			}
			x := randomInput(7, g.Input.Size)
			want, err := st.Model.Reference(x)
			require.NoError(t, err)
			got, err := prog.Simulate(x)
			require.NoError(t, err)
			require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9)
		})
	}
}
