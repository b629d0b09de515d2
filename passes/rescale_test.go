package passes

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/spec"
)

// stateBefore runs the pipeline on g up to, not including, the pass named
// stop.
func stateBefore(t *testing.T, g *ir.Graph, opts Options, stop string) *State {
	t.Helper()
	s := &State{Source: g, Graph: cloneGraph(g), Opts: opts, Report: &Report{Dumps: map[string]string{}}}
	for _, p := range Pipeline {
		if p.Name == stop {
			return s
		}
		require.NoError(t, p.Run(s), p.Name)
	}
	t.Fatalf("no pass %s", stop)
	return nil
}

func layerIndex(t *testing.T, p *ir.Program, name string) int {
	t.Helper()
	i := slices.IndexFunc(p.Layers, func(l *ir.LayerInfo) bool { return l.Name == name })
	require.GreaterOrEqual(t, i, 0, name)
	return i
}

// The digit classifier's blocked dense layers are rescaled before their
// folds: each fold rotation runs one level below the layer's products,
// and each layer still rescales once.
func TestFoldsRunBelowProducts(t *testing.T) {
	g, err := spec.Load("../testdata/mnist/digits.yaml")
	require.NoError(t, err)
	prog, st, err := Compile(g, Options{})
	require.NoError(t, err)
	wantFolds := map[string]int{"dense1": 5, "dense2": 3} // steps 128…2048 and 16…64 (see the plan)
	for name, n := range wantFolds {
		li := layerIndex(t, prog, name)
		productLevel := -1
		for _, op := range prog.Ops {
			if op.Layer == li && (op.Kind == ir.OpDot || op.Kind == ir.OpMulPlain) {
				productLevel = prog.Values[op.Results[0]].Level
			}
		}
		require.Positive(t, productLevel, name)
		folds := 0
		seenRotSum := false
		for _, op := range prog.Ops {
			if op.Layer != li {
				continue
			}
			if op.Kind == ir.OpRotSum {
				seenRotSum = true
				continue
			}
			if op.Kind == ir.OpRotate && seenRotSum {
				require.Equal(t, productLevel-1, prog.Values[op.Args[0]].Level, "%s", prog.FormatOp(op))
				folds++
			}
		}
		require.Equal(t, n, folds, name)
		require.Equal(t, n, foldsAfterRescale(prog, st.Graph)[li], name)
		require.Equal(t, 1, prog.Layers[li].Rescales, name)
	}
	require.Contains(t, strings.Join(prog.Params.Why, "\n"), "dense1 ×7.94 for 5 folds after its rescale")
}

// The rule moves rescales, never adds one: placed with and without it,
// every layer rescales as often and the depth is the same; the naive
// lowering, which rescales every product at once, comes out the same.
func TestFoldFirstKeepsRescaleCount(t *testing.T) {
	g, err := spec.Load("../testdata/mnist/digits.yaml")
	require.NoError(t, err)
	for _, naive := range []bool{false, true} {
		s := stateBefore(t, g, Options{Naive: naive}, "rescale")
		with, without := cloneForRescale(s.Prog), cloneForRescale(s.Prog)
		place(s, with, nil)
		place(s, without, map[int]bool{})
		for _, p := range []*ir.Program{with, without} {
			require.NoError(t, ir.VerifyProgram(p, ir.Relinearized))
		}
		require.Equal(t, programDepth(without), programDepth(with))
		for i := range with.Layers {
			require.Equal(t, without.Layers[i].Rescales, with.Layers[i].Rescales, "layer %s", with.Layers[i].Name)
		}
		if naive {
			require.Equal(t, without.String(), with.String(), "naive lowering unchanged")
			require.Empty(t, slices.DeleteFunc(foldsAfterRescale(with, s.Graph), func(f int) bool { return f == 0 }))
		} else {
			require.NotEqual(t, without.String(), with.String())
			require.Equal(t, []int{0, 0, 5, 0, 3}, foldsAfterRescale(with, s.Graph))
			require.Equal(t, []int{0, 0, 0, 0, 0}, foldsAfterRescale(without, s.Graph))
		}
	}
}

// The gain grows by exactly the documented factor on the folded layers'
// terms, and the factor matches a simulation of the noise.
func TestFoldNoiseInGain(t *testing.T) {
	g, err := spec.Load("../testdata/mnist/digits.yaml")
	require.NoError(t, err)
	s := stateBefore(t, g, Options{}, "params")
	folds := foldsAfterRescale(s.Prog, s.Graph)
	require.Equal(t, []int{0, 0, 5, 0, 3}, folds)
	terms := noiseTerms(s.Graph)
	require.Len(t, terms, len(s.Graph.Layers)+1)
	base := weightedGain(terms, nil)
	require.InDelta(t, noiseGain(s.Graph, nil), base, 1e-9*base, "noiseGain is the sum of its terms")
	got := weightedGain(terms, foldNoiseFactors(folds))
	// Boundary k follows layer k-1: dense1 is layer 2, dense2 layer 4.
	want := base + terms[3]*(math.Sqrt(63)-1) + terms[5]*(math.Sqrt(15)-1)
	require.InDelta(t, want, got, 1e-9*want)
	require.Greater(t, got, base)
	require.Equal(t, 1.0, foldNoiseFactor(0))

	// Simulation: a rescale's noise e0 of standard deviation σ, then f
	// folds x ← x + rot(x, b·2^i) + e_i with key-switch noise e_i of the
	// same σ, over cyclic slots; the standard deviation of the result is
	// sqrt(2^(f+1) − 1)·σ.
	r := rand.New(rand.NewPCG(3, 4))
	const slots = 1 << 16
	for _, f := range []int{1, 3, 5} {
		x := make([]float64, slots)
		for i := range x {
			x[i] = r.NormFloat64()
		}
		for i := range f {
			step := 16 << i
			y := make([]float64, slots)
			for t := range y {
				y[t] = x[t] + x[(t+step)%slots] + r.NormFloat64()
			}
			x = y
		}
		var ss float64
		for _, v := range x {
			ss += v * v
		}
		require.InEpsilon(t, foldNoiseFactor(f), math.Sqrt(ss/slots), 0.03, "f = %d", f)
	}
}
