package passes

import (
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/runtime"
)

func TestDefaultProfileParses(t *testing.T) {
	p := DefaultProfile()
	for _, op := range costOps {
		require.NotEmpty(t, p.Ops[op], op)
	}
	// Key switching grows with the level; so does everything but encoding,
	// whose FFT does not depend on it.
	for _, op := range []string{CostRotate, CostHoisted, CostMulRelin, CostMulPlain} {
		require.Less(t, p.Cost(op, 14, 1), p.Cost(op, 14, 10), op)
		require.Less(t, p.Cost(op, 13, 5), p.Cost(op, 14, 5), op)
	}
}

func TestFitProfileFromTimings(t *testing.T) {
	var ts []runtime.OpTiming
	for _, l := range []int{1, 3, 5} {
		x := float64(l + 1)
		ts = append(ts, runtime.OpTiming{LogN: 13, Level: l, Add: 10 * x, MulPlain: 20 * x, MulRelin: 100 * x * x, Rescale: 30 * x, Rotate: 90 * x * x, Hoisted: 200 * x * x, Encode: 1000})
	}
	p, err := FitProfile("test", ts)
	require.NoError(t, err)
	require.InDelta(t, 90*4*4, p.Cost(CostRotate, 13, 3), 1e-6)                   // measured
	require.InDelta(t, (90*4*4+90*6*6)/2, p.Cost(CostRotate, 13, 4), 1e-6)        // interpolated
	require.InDelta(t, 90*6*6+(90*6*6-90*4*4)/2, p.Cost(CostRotate, 13, 6), 1e-6) // extrapolated
	require.InDelta(t, 10*5, p.Cost(CostAdd, 13, 4), 1e-6)
	// Extrapolated to a ring twice the size: N·log N.
	require.InDelta(t, 10*5*2*14.0/13, p.Cost(CostAdd, 14, 4), 1e-6)
	_, err = FitProfile("test", ts[:1])
	require.ErrorContains(t, err, "at least 2")
}

func TestPlanCountsMatchProgram(t *testing.T) {
	g := randomGraph(4, 10, []int{16, 8, 1}, []ir.ActFunc{ir.Tanh, ir.Square})
	prog, st, err := Compile(g, Options{})
	require.NoError(t, err)
	plan := MakePlan(st, DefaultProfile())
	require.Len(t, plan.Layers, len(prog.Layers))
	rot := 0
	for _, op := range prog.Ops {
		for _, k := range op.Steps {
			if k != 0 { // a rotate-sum's unrotated terms
				rot++
			}
		}
	}
	require.Equal(t, rot, plan.Total.Rotations)
	require.Equal(t, len(prog.Rotations)+1, plan.Keys.Count)
	require.Greater(t, plan.EstimateMS, 0.0)
	require.Contains(t, plan.Markdown(), "| dense1 |")
}
