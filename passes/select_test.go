package passes

import (
	"errors"
	"flag"
	"fmt"
	"maps"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/spec"
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

// short is an out×in dense layer with a few nonzero diagonals: a short
// output, where the block method applies.
func short(name string, in, out int, line int) *ir.Layer {
	l := &ir.Layer{Name: name, Kind: ir.Dense, In: in, Out: out, Pos: ir.Pos{File: "sel.yaml", Line: line, Col: 3}, Bias: make([]float64, out)}
	for t := range out {
		row := make([]float64, in)
		for c := range in {
			if (c+t)%5 == 0 {
				row[c] = 0.1 * float64(1+(c+t)%3)
			}
		}
		l.Weights = append(l.Weights, row)
	}
	return l
}

// bruteForce compiles every combination of the selection's choices on its
// own — each merge kept apart or not, each degree a tolerance offers, each
// matrix method where the block method applies — and returns the cheapest
// compiled cost under obj, independently of the search in selectdp.go.
func bruteForce(t *testing.T, g *ir.Graph, prof *Profile, obj Objective) (best float64, count int) {
	t.Helper()
	_, st, err := Compile(g, Options{})
	require.NoError(t, err)
	pre, err := graphBefore(g, Options{}, "merge-linear")
	require.NoError(t, err)
	names := st.Report.Mergeable
	var acts []string
	for _, l := range pre.Graph.Layers {
		if len(pre.Report.Degrees[l.Name]) > 0 {
			acts = append(acts, l.Name)
		}
	}
	cost := func(s *State) float64 {
		plan := MakePlan(s, prof)
		if obj == KeyBytes {
			return float64(plan.Keys.Bytes)
		}
		return plan.EstimateMS
	}
	best = math.Inf(1)
	var degrees func(i int, d map[string]int, apart map[string]bool)
	degrees = func(i int, d map[string]int, apart map[string]bool) {
		if i < len(acts) {
			for _, o := range pre.Report.Degrees[acts[i]] {
				nd := map[string]int{acts[i]: o.Degree}
				for k, v := range d {
					nd[k] = v
				}
				degrees(i+1, nd, apart)
			}
			return
		}
		// The linear layers of this variant and whether blocks apply.
		_, s0, err := Compile(g, Options{KeepApart: apart, Degree: d})
		if err != nil {
			return // no ring holds it
		}
		// Each such layer with each method: the copies method where
		// lowering accepts it (its input's zeros proven).
		var lin []string
		var methods [][]Method
		for _, l := range s0.Graph.Layers {
			if mergeable(l) && nextPow2(l.Out) < s0.Prog.Period {
				lin = append(lin, l.Name)
				ms := []Method{BSGS, Blocks}
				_, _, err := Compile(g, Options{KeepApart: apart, Degree: d, Method: map[string]Method{l.Name: Copies}})
				if !errors.Is(err, errNoCopies) {
					ms = append(ms, Copies)
				}
				methods = append(methods, ms)
			}
		}
		var each func(i int, m map[string]Method)
		each = func(i int, m map[string]Method) {
			if i < len(lin) {
				for _, k := range methods[i] {
					m[lin[i]] = k
					each(i+1, m)
				}
				return
			}
			// The objective and profile also choose the special primes.
			_, s, err := Compile(g, Options{KeepApart: apart, Degree: d, Method: maps.Clone(m), Objective: obj, Profile: prof})
			if err != nil {
				return
			}
			count++
			best = math.Min(best, cost(s))
		}
		each(0, map[string]Method{})
	}
	for mask := 0; mask < 1<<len(names); mask++ {
		apart := map[string]bool{}
		for i, n := range names {
			if mask&(1<<i) != 0 {
				apart[n] = true
			}
		}
		degrees(0, map[string]int{}, apart)
	}
	return best, count
}

// checkSelectIsCheapest: the selection's program costs what the cheapest
// variant found by brute force costs.
func checkSelectIsCheapest(t *testing.T, g *ir.Graph, obj Objective) (*ir.Program, *State, []Candidate) {
	t.Helper()
	prof := DefaultProfile()
	prog, st, cands, err := Select(g, Options{}, prof, obj)
	require.NoError(t, err)
	best, count := bruteForce(t, g, prof, obj)
	require.Positive(t, count)
	plan := MakePlan(st, prof)
	got := plan.EstimateMS
	if obj == KeyBytes {
		got = float64(plan.Keys.Bytes)
	}
	require.InDelta(t, best, got, 1e-9*best, "selection against %d variants compiled one by one", count)
	return prog, st, cands
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

	prog, st, cands := checkSelectIsCheapest(t, g, Latency)
	require.Equal(t, 13, prog.Params.LogN)
	require.Empty(t, cands[0].Apart, "merged")
	require.Equal(t, 14, cands[1].LogN, "kept apart needs the larger ring")
	require.Equal(t, []string{"b"}, cands[1].Apart)
	merge := choiceOf(t, st, "b: merge")
	require.Equal(t, "merged into a", merge.Chosen)
	require.Contains(t, merge.RunnerUp, "kept apart")
	require.Greater(t, merge.RunnerUpMS, merge.ChosenMS)

	g.Pin = &ir.ParamPin{LogN: 14}
	prog, st, cands = checkSelectIsCheapest(t, g, Latency)
	require.Equal(t, 14, prog.Params.LogN)
	require.Equal(t, []string{"b"}, cands[0].Apart, "kept apart")
	require.Less(t, cands[0].Rotations, cands[1].Rotations)
	require.Equal(t, "kept apart", choiceOf(t, st, "b: merge").Chosen)

	// The chosen program still computes the model.
	x := randomInput(3, 64)
	want, err := g.Reference(x)
	require.NoError(t, err)
	got, err := prog.Simulate(x)
	require.NoError(t, err)
	require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9)
}

// The same constructed model with a tanh declared by a tolerance after the
// square: the degrees that meet it (3 to 6 levels) join the merge decision
// and the matrix methods. The selection takes the shallowest degree, keeps
// the linear layers apart and stays in ring 2^14, where the deepest
// interpolant would need 2^15; it agrees with brute force under either
// objective, free or pinned to the larger ring.
func TestSelectDegreeWithMerge(t *testing.T) {
	g := selectionGraph(20)
	g.Layers[0] = banded("a", 64, []int{0, 8, 16, 24, 32}, 10)
	g.Layers[1] = banded("b", 64, []int{0, 1, 2, 3}, 20)
	g.Layers = append(g.Layers[:3:3],
		&ir.Layer{Name: "t", Kind: ir.Activation, In: 64, Out: 64, Pos: ir.Pos{File: "sel.yaml", Line: 35, Col: 3},
			Act: &ir.Act{Func: ir.Tanh, Interval: [2]float64{-2, 2}, Tolerance: 1e-2}},
		short("c", 64, 4, 40))

	pre, err := graphBefore(g, Options{}, "merge-linear")
	require.NoError(t, err)
	offers := pre.Report.Degrees["t"]
	require.GreaterOrEqual(t, len(offers), 2, "more than one degree meets the tolerance")

	for _, obj := range []Objective{Latency, KeyBytes} {
		t.Run(obj.String(), func(t *testing.T) {
			g := cloneGraph(g)
			prog, st, cands := checkSelectIsCheapest(t, g, obj)
			require.Equal(t, 14, prog.Params.LogN)
			deg := choiceOf(t, st, "t: degree")
			require.Contains(t, deg.Chosen, fmt.Sprintf("(%d levels", offers[0].Levels), "the shallowest degree")
			require.NotEmpty(t, deg.RunnerUp)
			require.Greater(t, deg.RunnerUpMS, deg.ChosenMS)
			deepest := cands[len(cands)-1]
			require.Equal(t, 15, deepest.LogN, "the deepest interpolant needs the larger ring: %s", deepest)

			x := randomInput(5, 64)
			_, s, err := Compile(g, Options{Degree: map[string]int{"t": offers[0].Degree}})
			require.NoError(t, err)
			want, err := s.Model.Reference(x)
			require.NoError(t, err)
			got, err := prog.Simulate(x)
			require.NoError(t, err)
			require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9)

			g.Pin = &ir.ParamPin{LogN: 15}
			prog, _, _ = checkSelectIsCheapest(t, g, obj)
			require.Equal(t, 15, prog.Params.LogN)
		})
	}
}

// The search prices a solution exactly as the compiled program is priced:
// the segments' ops at the levels they run at.
func TestSearchEstimateMatchesCompiled(t *testing.T) {
	g := selectionGraph(24)
	g.Layers = append(g.Layers, &ir.Layer{Name: "t", Kind: ir.Activation, In: 64, Out: 64, Pos: ir.Pos{File: "sel.yaml", Line: 45},
		Act: &ir.Act{Func: ir.Sigmoid, Interval: [2]float64{-4, 4}, Tolerance: 1e-2}}, short("d", 64, 8, 50))
	prof := DefaultProfile()
	_, st, err := Compile(g, Options{})
	require.NoError(t, err)
	pre, err := graphBefore(g, Options{}, "merge-linear")
	require.NoError(t, err)
	se := &searcher{sp: newSegmentSpace(pre.Graph, pre.Report.Degrees, Options{}), prof: prof, final: st.Graph, cells: map[[2]int]*cell{}}
	sols, _ := se.search(constraint{})
	require.NotEmpty(t, sols)
	for _, sol := range sols {
		c, _, _ := se.compile(g, Options{}, sol)
		require.NoError(t, c.Err)
		require.Equal(t, sol.params.LogN, c.LogN, c.Variant)
		require.Equal(t, sol.depth, c.Depth, c.Variant)
		require.InDelta(t, c.EstMS, sol.est.ms, 1e-9*c.EstMS, c.Variant)
	}
}

func choiceOf(t *testing.T, st *State, decision string) Choice {
	t.Helper()
	for _, c := range st.Report.Choices {
		if c.Decision == decision {
			return c
		}
	}
	t.Fatalf("no choice %q among %+v", decision, st.Report.Choices)
	return Choice{}
}

var bruteAll = flag.Bool("brute-all", false, "TestSelectTestdataAgreesWithBruteForce also enumerates the deeper MNIST classifier (about 3 minutes)")

// On every testdata model the selection agrees with brute force under both
// objectives: without -short the digit classifier too, and with -brute-all
// the deeper one (its enumeration alone takes minutes, too long for the
// default run).
func TestSelectTestdataAgreesWithBruteForce(t *testing.T) {
	specs, err := filepath.Glob("../testdata/*/*.yaml")
	require.NoError(t, err)
	require.NotEmpty(t, specs)
	for _, path := range specs {
		if strings.Contains(path, "/bad/") || (testing.Short() && strings.Contains(path, "/mnist/")) ||
			(!*bruteAll && strings.HasSuffix(path, "/mnist/deep.yaml")) {
			continue
		}
		t.Run(filepath.Base(path), func(t *testing.T) {
			g, err := spec.Load(path)
			require.NoError(t, err)
			for _, obj := range []Objective{Latency, KeyBytes} {
				checkSelectIsCheapest(t, g, obj)
			}
		})
	}
}
