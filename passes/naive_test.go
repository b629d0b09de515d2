package passes

import (
	"fmt"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/spec"
)

// naiveGraphs are the graphs the naive lowering is checked on: the dense
// chains of TestSimulationMatchesReference and convolutional nets like
// those of TestConvSimulationMatchesReference (fresh layers on every call,
// since convNet fills in its templates).
func naiveGraphs() []struct {
	name string
	g    *ir.Graph
} {
	type named = struct {
		name string
		g    *ir.Graph
	}
	var out []named
	chains := []struct {
		in     int
		widths []int
		acts   []ir.ActFunc
	}{
		{1, []int{1}, nil},
		{3, []int{5, 1}, []ir.ActFunc{ir.Square}},
		{7, []int{13, 4}, []ir.ActFunc{ir.Tanh}},
		{10, []int{16, 8, 1}, []ir.ActFunc{ir.Tanh, ir.Square}},
		{5, []int{9, 9, 3}, []ir.ActFunc{ir.ReLU, ir.Poly}},
		{64, []int{100, 10}, []ir.ActFunc{ir.Square}},
	}
	for i, c := range chains {
		out = append(out, named{fmt.Sprintf("dense %d-%v", c.in, c.widths), randomGraph(uint64(i), c.in, c.widths, c.acts)})
	}
	out = append(out,
		named{"conv stride pad", convNet(1, []int{1, 9, 9}, conv(3, 5, 2, [4]int{1, 2, 1, 0}), act(ir.Square), &ir.Layer{Kind: ir.Flatten}, dense(4))},
		named{"pools", convNet(3, []int{2, 6, 6}, poolOf(ir.AvgPool, 2, 2), act(ir.Square), poolOf(ir.SumPool, 3, 1))},
		named{"bn folds into conv", convNet(4, []int{1, 7, 7}, conv(2, 3, 2, [4]int{}), &ir.Layer{Kind: ir.BatchNorm}, act(ir.Square), &ir.Layer{Kind: ir.Flatten}, dense(3))},
		named{"conv pool merge", convNet(5, []int{1, 8, 8}, conv(2, 3, 1, [4]int{1, 1, 1, 1}), poolOf(ir.AvgPool, 2, 2), &ir.Layer{Kind: ir.BatchNorm}, act(ir.ReLU), &ir.Layer{Kind: ir.Flatten}, dense(5), &ir.Layer{Kind: ir.ScaleBy, Factor: 0.5})},
	)
	return out
}

// The naive lowering passes the IR verifier after every pass (Compile runs
// it) and its cleartext simulation agrees with the float64 reference, like
// the optimised program's (TestSimulationMatchesReference); and it is naive
// in the three ways Options.Naive promises, checked on the program itself.
func TestNaiveLowering(t *testing.T) {
	for _, c := range naiveGraphs() {
		t.Run(c.name, func(t *testing.T) {
			opt, _, err := Compile(c.g, Options{})
			require.NoError(t, err)
			prog, st, err := Compile(c.g, Options{Naive: true})
			require.NoError(t, err)
			for k := range 4 {
				x := randomInput(uint64(k+1), c.g.Input.Size)
				want, err := st.Model.Reference(x)
				require.NoError(t, err)
				got, err := prog.Simulate(x)
				require.NoError(t, err)
				require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9, "want %v got %v", want, got)
			}
			checkNaive(t, prog, st)
			require.Equal(t, programDepth(opt), programDepth(prog), "eager rescaling costs no level")
			require.GreaterOrEqual(t, rotations(prog), rotations(opt))
		})
	}
}

// The naive lowering of every testdata spec compiles and simulates
// correctly too (the benchmark builds them), and the lower bound reads
// both programs and stays at or below their own work.
func TestNaiveTestdata(t *testing.T) {
	specs, err := filepath.Glob("../testdata/models/*.yaml")
	require.NoError(t, err)
	specs = append(specs, "../testdata/demo/gearbox.yaml", "../testdata/mnist/digits.yaml")
	prof := DefaultProfile()
	for _, path := range specs {
		t.Run(filepath.Base(path), func(t *testing.T) {
			g, err := spec.Load(path)
			require.NoError(t, err)
			prog, st, err := Compile(g, Options{Naive: true})
			require.NoError(t, err)
			checkNaive(t, prog, st)
			x := randomInput(7, g.Input.Size)
			for i := range x {
				x[i] = g.Input.Min + (x[i]+1)/2*(g.Input.Max-g.Input.Min)
			}
			want, err := st.Model.Reference(x)
			require.NoError(t, err)
			got, err := prog.Simulate(x)
			require.NoError(t, err)
			require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9)

			opt, _, err := Compile(g, Options{})
			require.NoError(t, err)
			for _, p := range []*ir.Program{opt, prog} {
				b, err := LowerBound(p, prof)
				require.NoError(t, err)
				require.Greater(t, b.MS, 0.0)
				require.LessOrEqual(t, b.MS, programMS(p, prof)*(1+1e-9), "%s: %s", p.Layers[0].Kind, b)
			}
		})
	}
}

// checkNaive checks the program's shape: no hoisted rotation, every
// rotation is of a layer's input by one of its diagonals (one rotation per
// nonzero diagonal of each input ciphertext, none repeated), every
// plaintext product is rescaled before any other use, and every ciphertext
// product is relinearized by the very next op.
func checkNaive(t *testing.T, p *ir.Program, st *State) {
	t.Helper()
	def := map[ir.ValueID]*ir.Op{}
	for _, op := range p.Ops {
		for _, r := range op.Results {
			def[r] = op
		}
	}
	type rotation struct {
		arg  ir.ValueID
		step int
	}
	perLayer := map[int]map[rotation]bool{}
	for i, op := range p.Ops {
		switch op.Kind {
		case ir.OpRotHoisted:
			t.Fatalf("hoisted rotation in the naive program: %s", p.FormatOp(op))
		case ir.OpRotate:
			d := def[op.Args[0]]
			require.True(t, d == nil || d.Layer != op.Layer, "%s rotates a value of its own layer", p.FormatOp(op))
			if perLayer[op.Layer] == nil {
				perLayer[op.Layer] = map[rotation]bool{}
			}
			r := rotation{op.Args[0], op.Steps[0]}
			require.False(t, perLayer[op.Layer][r], "%s: a second rotation of one value by the same step", p.FormatOp(op))
			perLayer[op.Layer][r] = true
		case ir.OpMulPlain:
			us := uses(p, op.Results[0])
			require.Len(t, us, 1, "%s", p.FormatOp(op))
			require.Equal(t, ir.OpRescale, us[0].Kind, "%s is not rescaled at once", p.FormatOp(op))
		case ir.OpMul:
			require.Less(t, i+1, len(p.Ops))
			next := p.Ops[i+1]
			require.Equal(t, ir.OpRelinearize, next.Kind, "%s is not relinearized at once", p.FormatOp(op))
			require.Equal(t, op.Results[0], next.Args[0])
		}
	}
	// One rotation per nonzero diagonal k of each input chunk i of the
	// graph layer it lowers: entry (r, c) lies on diagonal (c − r) mod D of
	// chunk c div D (rows and columns taken within their chunks).
	for li, rots := range perLayer {
		l := st.Graph.Layers[li]
		D := p.Period
		sum := map[[2]int]float64{}
		switch l.Kind {
		case ir.Dense:
			for r, row := range l.Weights {
				for c, v := range row {
					sum[[2]int{r, c}] += v
				}
			}
		case ir.Linear:
			pitch := 0
			if li == 0 {
				pitch = p.Input.Pitch // the copy of the input the row's block reads
			}
			for r, row := range l.Map.Row {
				for _, e := range row {
					sum[[2]int{r, copyColumn(e.Col, r, pitch)}] += e.Val
				}
			}
		}
		want := map[[2]int]bool{} // input chunk, diagonal
		steps := map[int]bool{}
		for rc, v := range sum {
			if k := ((rc[1]%D-rc[0]%D)%D + D) % D; v != 0 && k != 0 {
				want[[2]int{rc[1] / D, k}] = true
				steps[k] = true
			}
		}
		require.Equal(t, len(want), len(rots), "layer %s: rotations", l.Name)
		for r := range rots {
			require.True(t, steps[r.step], "layer %s: rotation by %d is no diagonal", l.Name, r.step)
		}
	}
}

func rotations(p *ir.Program) int {
	n := 0
	for _, op := range p.Ops {
		if op.Kind == ir.OpRotate || op.Kind == ir.OpRotHoisted {
			n += len(op.Steps)
		}
	}
	return n
}
