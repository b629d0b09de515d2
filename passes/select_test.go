package passes

import (
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
)

// banded is an n×n dense layer whose only nonzero diagonals are offsets.
func banded(name string, n int, offsets []int, line int) *ir.Layer {
	l := &ir.Layer{Name: name, Kind: ir.Dense, In: n, Out: n, Pos: ir.Pos{File: "sel.yaml", Line: line, Col: 3}, Bias: make([]float64, n)}
	for t := range n {
		row := make([]float64, n)
		for i, k := range offsets {
			row[(t+k)%n] = 0.3 / float64(i+1)
		}
		l.Weights = append(l.Weights, row)
	}
	return l
}

// selectionGraph: two banded linear layers with no activation between them
// (merging saves a level but multiplies their diagonals), then a square and
// a dense head, at a precision that makes the chain long.
func selectionGraph(precision int) *ir.Graph {
	n := 64
	g := &ir.Graph{Name: "sel", SpecFile: "sel.yaml", Input: ir.Input{Name: "x", Size: n, Min: -1, Max: 1}, OutputName: "y", Precision: precision}
	g.Layers = []*ir.Layer{
		banded("a", n, []int{0, 9, 27}, 10),
		banded("b", n, []int{0, 1, 3}, 20),
		{Name: "sq", Kind: ir.Activation, In: n, Out: n, Act: &ir.Act{Func: ir.Square}, Pos: ir.Pos{File: "sel.yaml", Line: 30}},
		banded("c", n, []int{0, 5}, 40),
	}
	return g
}

// The selection returns the cheapest of the variants, each compiled on its
// own (brute force over the merge decision, independently of Select).
func checkSelectIsCheapest(t *testing.T, g *ir.Graph) (*ir.Program, []Candidate) {
	t.Helper()
	prof := DefaultProfile()
	prog, st, cands, err := Select(g, Options{}, prof, Latency)
	require.NoError(t, err)
	require.Len(t, cands, 2)
	best := -1.0
	for _, apart := range []map[string]bool{nil, {"b": true}} {
		_, s, err := Compile(g, Options{KeepApart: apart})
		if err != nil {
			continue
		}
		if ms := MakePlan(s, prof).EstimateMS; best < 0 || ms < best {
			best = ms
		}
	}
	require.InDelta(t, best, MakePlan(st, prof).EstimateMS, 1e-9)
	return prog, cands
}

// On a model where only the merged (shallower) variant fits the 128-bit
// bound of ring degree 2^13, the selection picks it and that ring; with the
// ring pinned to 2^14 it picks the deeper variant, whose separate layers
// need fewer rotations (6 against 8). Both choices agree with compiling each
// variant on its own (checkSelectIsCheapest).
func TestSelectMergeOrApart(t *testing.T) {
	g := selectionGraph(24)
	g.Layers[0] = banded("a", 64, []int{0, 8, 16, 24, 32}, 10)
	g.Layers[1] = banded("b", 64, []int{0, 1, 2, 3}, 20)

	prog, cands := checkSelectIsCheapest(t, g)
	require.Equal(t, 13, prog.Params.LogN)
	require.Empty(t, cands[0].Apart, "merged")
	require.Equal(t, 14, cands[1].LogN, "kept apart needs the larger ring")

	g.Pin = &ir.ParamPin{LogN: 14}
	prog, cands = checkSelectIsCheapest(t, g)
	require.Equal(t, 14, prog.Params.LogN)
	require.Equal(t, []string{"b"}, cands[0].Apart, "kept apart")
	require.Less(t, cands[0].Rotations, cands[1].Rotations)

	// The chosen program still computes the model.
	x := randomInput(3, 64)
	want, err := g.Reference(x)
	require.NoError(t, err)
	got, err := prog.Simulate(x)
	require.NoError(t, err)
	require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9)
}
