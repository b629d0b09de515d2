package passes

import (
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
)

// flatProfile prices every primitive the same at every level and ring
// degree: a rotation 10 ns, a hoisted set of four 19 ns (so each rotation
// after the first costs 3), a plaintext product 1, a rescale 1, a
// ciphertext product with relinearization 5, an addition nothing.
func flatProfile(logN int) *Profile {
	ns := map[string]float64{CostAdd: 0, CostMulPlain: 1, CostMulRelin: 5, CostRescale: 1, CostRotate: 10, CostHoisted: 19, CostEncode: 0}
	p := &Profile{Machine: "flat", Ops: map[string]map[int][]Point{}}
	for op, v := range ns {
		p.Ops[op] = map[int][]Point{logN: {{Level: 1, NS: v}, {Level: 9, NS: v}}}
	}
	return p
}

// The split is the exact minimum over baby-step counts, priced with
// hoisting: a 16×16 dense layer has all 16 diagonals of its period, and
// with the flat prices n1 = 8 is cheapest (7 hoisted baby steps, 10 + 6·3,
// plus one giant step, 10: 38 ns) — n1 = 4 costs 16 + 30, n1 = 16 costs 52,
// n1 = 1 costs 150 (worked by hand). With the 16 products, one rescale,
// and a square's product and rescale, the layer costs 55 + 6 ns.
func TestBoundSplitIsCheapest(t *testing.T) {
	g := randomGraph(1, 16, []int{16}, []ir.ActFunc{ir.Square})
	prog, _, err := Compile(g, Options{})
	require.NoError(t, err)
	require.Equal(t, 16, prog.Period)
	b, err := LowerBound(prog, flatProfile(prog.Params.LogN))
	require.NoError(t, err)
	require.Len(t, b.Layers, 2)
	l := b.Layers[0]
	require.Equal(t, BoundLayer{Layer: "dense1", Diagonals: 16, Split: 8, BabySteps: 7, GiantSteps: 1, Rescales: 1, MS: 55e-6}, roundMS(l))
	require.Equal(t, BoundLayer{Layer: "act1", Relins: 1, Rescales: 1, MS: 6e-6}, roundMS(b.Layers[1]))
	require.Equal(t, 16, b.PlainMuls)
	require.Equal(t, 7+1+1, b.KeySwitches)
	require.InDelta(t, 61e-6, b.MS, 1e-12)
}

func roundMS(l BoundLayer) BoundLayer {
	l.MS = float64(int64(l.MS*1e9+0.5)) / 1e9
	return l
}

// A layer in blocks of B rows sums D/B shifted copies: with the flat
// prices two hoisted sets of three rotations (16 + 16 ns) beat four single
// rotations (40) and one set of fifteen (52) for 16 copies.
func TestBoundFoldStaging(t *testing.T) {
	g := randomGraph(2, 64, []int{4}, nil)
	prog, _, err := Compile(g, Options{})
	require.NoError(t, err)
	require.Contains(t, prog.Layers[0].Kind, "in blocks of 4")
	b, err := LowerBound(prog, flatProfile(prog.Params.LogN))
	require.NoError(t, err)
	l := b.Layers[0]
	require.Equal(t, 6, l.Folds)
	require.LessOrEqual(t, l.Diagonals, 4)
	ms, rots := foldMS(flatProfile(prog.Params.LogN), prog.Params.LogN, 1, 16)
	require.Equal(t, 6, rots)
	require.InDelta(t, 32e-6, ms, 1e-12)
}

// The bound depends on the layout, not on how the program lowers it: the
// naive lowering of the same graph (one rotation per diagonal, a rescale
// per product) has the same diagonals, split and price wherever the
// optimised program does not block; and every layer's diagonals are
// exactly the nonzero diagonals of its matrix, counted here directly. The
// bound never exceeds the program's own work priced the same way.
func TestBoundIsTheLayoutsNotTheLowerings(t *testing.T) {
	for _, c := range naiveGraphs() {
		t.Run(c.name, func(t *testing.T) {
			opt, st, err := Compile(c.g, Options{})
			require.NoError(t, err)
			naive, _, err := Compile(c.g, Options{Naive: true})
			require.NoError(t, err)
			prof := DefaultProfile()
			bo, err := LowerBound(opt, prof)
			require.NoError(t, err)
			// The naive lowering keeps one special prime; the bound is the
			// layout's, so it is priced with the same parameters.
			naiveP := *naive
			naiveP.Params.LogP = opt.Params.LogP
			bn, err := LowerBound(&naiveP, prof)
			require.NoError(t, err)
			require.Len(t, bo.Layers, len(st.Graph.Layers))
			for i, l := range st.Graph.Layers {
				if l.Kind == ir.Activation || strings.Contains(opt.Layers[i].Kind, "in blocks of") {
					continue
				}
				pitch := 0
				if i == 0 {
					pitch = opt.Input.Pitch
				}
				require.Equal(t, countDiagonalsIn(l, opt.Period, pitch), bo.Layers[i].Diagonals, "layer %s", l.Name)
				require.Equal(t, roundMS(bo.Layers[i]), roundMS(bn.Layers[i]), "layer %s", l.Name)
			}
			require.LessOrEqual(t, bo.MS, programMS(opt, prof)*(1+1e-9))
			require.LessOrEqual(t, bn.MS, programMS(&naiveP, prof)*(1+1e-9))
		})
	}
}

// countDiagonalsIn counts the nonzero diagonals (c − r) mod D of a dense
// or linear layer's matrix, reading column c of row r from the copy of the
// input pitch slots apart that r's block reads (pitch 0: one copy).
func countDiagonalsIn(l *ir.Layer, D, pitch int) int {
	seen := map[int]bool{}
	switch l.Kind {
	case ir.Dense:
		for r, row := range l.Weights {
			for c, v := range row {
				if v != 0 {
					seen[((c-r)%D+D)%D] = true
				}
			}
		}
	case ir.Linear:
		sum := map[[2]int]float64{}
		for r, row := range l.Map.Row {
			for _, e := range row {
				sum[[2]int{r, copyColumn(e.Col, r, pitch)}] += e.Val
			}
		}
		for rc, v := range sum {
			if v != 0 {
				seen[((rc[1]-rc[0])%D+D)%D] = true
			}
		}
	}
	return len(seen)
}

// programMS prices a program's own ops the way LowerBound prices work:
// each rotation a full one, a hoisted set by hoistedMS, a polynomial by
// the planner's Paterson–Stockmeyer count (polyCost).
func programMS(p *ir.Program, prof *Profile) float64 {
	logN := p.Params.LogN
	ms := 0.0
	for _, op := range p.Ops {
		l := 0
		if len(op.Args) > 0 {
			l = p.Values[op.Args[0]].Level
		}
		c := func(name string) float64 { return prof.Cost(name, logN, l) / 1e6 }
		switch op.Kind {
		case ir.OpAdd, ir.OpAddPlain:
			ms += c(CostAdd)
		case ir.OpMulPlain:
			ms += c(CostMulPlain)
		case ir.OpMul:
			ms += c(CostMulRelin)
		case ir.OpRescale:
			ms += c(CostRescale)
		case ir.OpRotate:
			ms += c(CostRotate)
		case ir.OpRotHoisted:
			ms += hoistedMS(prof, logN, l, len(op.Steps))
		case ir.OpRotSum:
			ms += rotSumCost(prof, logN, l, op.Steps) / 1e6
		case ir.OpDot:
			ms += float64(len(op.Args)) * dotTerm(prof, logN, l) / 1e6
		case ir.OpPoly:
			ms += polyCost(prof, logN, l, len(p.Consts[op.Const].Data)-1) / 1e6
		}
	}
	return ms
}
