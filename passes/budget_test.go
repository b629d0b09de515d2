package passes

import (
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/spec"
)

// budgetSpecs are the testdata specs the key budget is checked on.
func budgetSpecs(t *testing.T) []string {
	specs, err := filepath.Glob("../testdata/models/*.yaml")
	require.NoError(t, err)
	return append(specs, "../testdata/demo/gearbox.yaml", "../testdata/mnist/digits.yaml")
}

// fileBytes is the size of a compiled program's evaluation-keys file.
func fileBytes(p *ir.Program) int64 {
	return keyFileBytes(p.Params, p.RotationLevels, p.Relinearize)
}

// Under a tight budget (room for about a third of the exact rotation keys,
// at least one) every testdata program still agrees exactly with the
// float64 reference in simulation, passes the verifier after every pass
// (Compile runs it), needs no more key bytes than the budget, and compiles
// to the same program twice.
func TestBudgetTestdata(t *testing.T) {
	for _, path := range budgetSpecs(t) {
		t.Run(filepath.Base(path), func(t *testing.T) {
			g, err := spec.Load(path)
			require.NoError(t, err)
			exact, st, err := Compile(g, Options{})
			require.NoError(t, err)
			per := keyBytes(exact.Params)
			if len(exact.Rotations) < 2 {
				t.Skipf("%d rotation keys: nothing to compose", len(exact.Rotations))
			}
			room := max(1, len(exact.Rotations)/3)
			limit := keyFileBytes(exact.Params, topLevels(exact.Params, room), exact.Relinearize) + per/2
			prog, bst, err := Compile(g, Options{MaxKeyBytes: limit})
			require.NoError(t, err)
			again, _, err := Compile(g, Options{MaxKeyBytes: limit})
			require.NoError(t, err)
			require.Equal(t, prog.String(), again.String(), "deterministic")
			require.LessOrEqual(t, len(prog.Rotations), room)
			require.LessOrEqual(t, fileBytes(prog), limit, "the budget is respected")
			rep := bst.Report.Budget
			require.NotNil(t, rep)
			require.Equal(t, exact.Rotations, rep.ExactSteps)
			require.Equal(t, prog.Rotations, rep.Steps)
			require.Positive(t, rep.Composed)
			require.Equal(t, rotationCount(prog)-rotationCount(exact), rep.Added)
			for k := range 3 {
				x := randomInput(uint64(40+k), g.Input.Size)
				for i := range x {
					x[i] = g.Input.Min + (x[i]+1)/2*(g.Input.Max-g.Input.Min)
				}
				want, err := st.Model.Reference(x)
				require.NoError(t, err)
				got, err := prog.Simulate(x)
				require.NoError(t, err)
				require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9)
			}
			// The exact snapshot still prices as the unbudgeted program.
			prof := DefaultProfile()
			require.InDelta(t, EstimateProgram(exact, prof).TotalMS, EstimateProgram(rep.Exact, prof).TotalMS, 1e-9)
			require.Greater(t, EstimateProgram(prog, prof).TotalMS, EstimateProgram(exact, prof).TotalMS)
		})
	}
}

// A budget that holds the exact set changes nothing; one below the
// smallest usable set is an error that names that size.
func TestBudgetFitsOrRefuses(t *testing.T) {
	g, err := spec.Load("../testdata/demo/gearbox.yaml")
	require.NoError(t, err)
	exact, _, err := Compile(g, Options{})
	require.NoError(t, err)
	all := fileBytes(exact)
	prog, st, err := Compile(g, Options{MaxKeyBytes: all})
	require.NoError(t, err)
	require.Equal(t, exact.Rotations, prog.Rotations)
	require.Equal(t, len(exact.Ops), len(prog.Ops))
	require.Zero(t, st.Report.Budget.Added)

	least := keyFileBytes(exact.Params, topLevels(exact.Params, 1), exact.Relinearize)
	_, _, err = Compile(g, Options{MaxKeyBytes: least - 1})
	require.Error(t, err)
	require.Contains(t, err.Error(), fmt.Sprintf("smallest key set this program can use, %.1f MB", float64(least)/1e6))
	_, _, err = Compile(g, Options{MaxKeyBytes: least})
	require.NoError(t, err, "the smallest size named is achievable")
}

// Chains are shortest in Z_D: with keys {1, 4} in period 16, 6 = 4+1+1
// takes three hops and 15 = 4+4+4+1+1+1 six. Hop counts are checked
// against a brute-force count over key multisets, and every path sums to
// its step (common practice: breadth-first search gives shortest paths in
// an unweighted graph).
func TestStepGraphShortestChains(t *testing.T) {
	cases := []struct {
		D    int
		keys []int
	}{
		{16, []int{1, 4}},
		{16, []int{3}},
		{64, []int{1, 8, 60}},
		{32, []int{2, 16}}, // odd steps unreachable
	}
	for _, c := range cases {
		t.Run(fmt.Sprint(c.D, c.keys), func(t *testing.T) {
			g := newStepGraph(c.D)
			g.search(c.keys)
			brute := bruteHops(c.D, c.keys)
			for k := 1; k < c.D; k++ {
				require.Equal(t, brute[k], g.dist[k], "step %d", k)
				if g.dist[k] < 0 {
					continue
				}
				sum := 0
				for _, v := range g.path(k) {
					require.Contains(t, c.keys, g.via[v])
					sum += g.via[v]
				}
				require.Equal(t, k, sum%c.D)
			}
		})
	}
}

// bruteHops counts, for each step, the fewest keys (with repetition) that
// sum to it mod D, by trying every count vector up to D keys of each.
func bruteHops(D int, keys []int) []int {
	best := make([]int, D)
	for i := range best {
		best[i] = -1
	}
	best[0] = 0
	var rec func(i, sum, n int)
	rec = func(i, sum, n int) {
		if i == len(keys) {
			if best[sum] < 0 || n < best[sum] {
				best[sum] = n
			}
			return
		}
		for c := 0; c < D; c++ {
			rec(i+1, (sum+c*keys[i])%D, n+c)
		}
	}
	rec(0, 0, 0)
	return best
}

// A hoisted batch whose steps are not all keys becomes one hoisted
// rotation by the first hop of each chain and the rest of the chains,
// sharing prefixes; the simulation is unchanged.
func TestComposeHoistedBatch(t *testing.T) {
	p := &ir.Program{Name: "h", InputSize: 8, OutputSize: 8, Period: 16,
		Input: ir.PackedLayout(8, 16, 16), Output: ir.PackedLayout(8, 16, 16)}
	x := p.NewValue("x", ir.Cipher, -1)
	p.Ops = append(p.Ops, &ir.Op{Kind: ir.OpInput, Results: []ir.ValueID{x}, Const: -1, Layer: -1})
	steps := []int{1, 5, 6, 9}
	h := &ir.Op{Kind: ir.OpRotHoisted, Args: []ir.ValueID{x}, Steps: steps, Const: -1}
	for _, s := range steps {
		h.Results = append(h.Results, p.NewValue(fmt.Sprintf("r%d", s), ir.Cipher, 0))
	}
	p.Ops = append(p.Ops, h)
	sum := x
	for _, r := range h.Results {
		v := p.NewValue("s", ir.Cipher, 0)
		p.Ops = append(p.Ops, &ir.Op{Kind: ir.OpAdd, Args: []ir.ValueID{sum, r}, Results: []ir.ValueID{v}, Const: -1})
		sum = v
	}
	p.Ops = append(p.Ops, &ir.Op{Kind: ir.OpOutput, Args: []ir.ValueID{sum}, Const: -1})
	p.Layers = []*ir.LayerInfo{{Name: "l", Rotations: 4, Hoisted: 4}}
	x0 := randomInput(3, 8)
	want, err := p.Simulate(x0)
	require.NoError(t, err)

	keys := []int{1, 4}
	g := newStepGraph(p.Period)
	g.search(keys)
	added := composeRotations(p, g, rotationUses(p))
	require.NoError(t, ir.VerifyProgram(p, ir.Lowered))
	got, err := p.Simulate(x0)
	require.NoError(t, err)
	require.Equal(t, want, got)
	// Breadth first from 0 with keys 1, 4: 5 = 1+4, 6 = 2+4 (2 = 1+1),
	// 9 = 5+4, so the nodes are 1, 5, 2, 6, 9 with one first hop: one
	// hoisted rotation and four chained, five rotations for four.
	require.Equal(t, 1, added)
	var hoisted []int
	for _, op := range p.Ops {
		if op.Kind == ir.OpRotHoisted {
			hoisted = append(hoisted, op.Steps...)
		}
		if op.Kind == ir.OpRotate {
			require.True(t, slices.Contains(keys, op.Steps[0]))
		}
	}
	require.Equal(t, []int{1}, hoisted)
	require.Equal(t, 5, p.Layers[0].Rotations)
}

// On small random programs the greedy choice with exchanges finds the best
// key set in most cases and comes within 15% of it in all, the best being
// found by trying every set of the same size among the same candidates.
func TestChooseKeysNearOptimal(t *testing.T) {
	prof := DefaultProfile()
	worst, optimal, total := 1.0, 0, 0
	for seed := range 12 {
		r := rand.New(rand.NewPCG(uint64(seed), 17))
		D := 32
		var uses []rotationUse
		for range 6 {
			u := rotationUse{level: 1 + r.IntN(5), hoisted: r.IntN(2) == 0}
			for range 1 + r.IntN(3) {
				if k := 1 + r.IntN(D-1); !slices.Contains(u.steps, k) {
					u.steps = append(u.steps, k)
				}
			}
			if !u.hoisted {
				u.steps = u.steps[:1]
			}
			uses = append(uses, u)
		}
		var steps []int
		for _, u := range uses {
			steps = append(steps, u.steps...)
		}
		slices.Sort(steps)
		steps = slices.Compact(steps)
		g := newStepGraph(D)
		cost := func(set []int) float64 { return g.cost(set, uses, nil, prof, 13) }
		for room := 1; room <= 3 && room < len(steps); room++ {
			got := cost(chooseKeys(steps, room, D, cost))
			cands := slices.Clone(steps)
			for _, k := range steps {
				cands = append(cands, D-k)
			}
			for k := 1; k < D; k *= 2 {
				cands = append(cands, k, D-k)
			}
			slices.Sort(cands)
			cands = slices.Compact(cands)
			best := math.Inf(1)
			var rec func(from int, set []int)
			rec = func(from int, set []int) {
				if len(set) == room {
					best = math.Min(best, cost(set))
					return
				}
				for i := from; i < len(cands); i++ {
					rec(i+1, append(set, cands[i]))
				}
			}
			rec(0, nil)
			require.GreaterOrEqual(t, got, best-1e-6)
			worst = math.Max(worst, got/best)
			if got <= best*(1+1e-9) {
				optimal++
			}
			total++
		}
	}
	t.Logf("best set found in %d of %d cases; worst ratio to the best %.3f", optimal, total, worst)
	require.LessOrEqual(t, worst, 1.15)
	require.GreaterOrEqual(t, 5*optimal, 4*total, "the best set in at least four cases of five")
}

// A sum of rotations b0 + rot_10(b1) + rot_20(b2) + rot_30(b3) + c with
// the key 10 alone becomes b0 + rot_10(b1 + rot_10(b2 + rot_10(b3))) + c:
// three rotations, as before, all by the key; the simulation is unchanged.
func TestNestSums(t *testing.T) {
	h, x := newHand(4, 4, 64)
	w := func(base float64) []float64 {
		d := make([]float64, 64)
		for i := range d {
			d[i] = base + float64(i%7)/10
		}
		return d
	}
	acc := h.mulPlain(x, w(0.3))
	for j := 1; j <= 3; j++ {
		acc = h.add(acc, h.rotate(h.mulPlain(x, w(float64(j))), 10*j))
	}
	h.output(h.addPlain(acc, w(0.05)))
	in := randomInput(5, 4)
	want := fullSlots(t, h.p, in)
	sums := rotationSums(h.p)
	require.Len(t, sums, 1)
	require.Equal(t, []int{10, 20, 30}, sums[0].steps)
	require.Equal(t, []int{10, 10, 10}, sums[0].nested())
	g := newStepGraph(64)
	g.search([]int{10})
	require.Equal(t, 1, nestSums(h.p, g, sums))
	require.NoError(t, ir.VerifyProgram(h.p, ir.Lowered))
	require.Equal(t, []int{10}, usedSteps(h.p))
	require.Equal(t, 3, rotationCount(h.p))
	got := fullSlots(t, h.p, in)
	require.InDeltaSlice(t, want, got, 1e-12)
}

// A key set that leaves a step unreachable is never chosen, however cheap
// it makes the other steps: 100 rotations by 8 at a high level and one by
// 1 at level 0, with room for one key, take the key 1.
func TestChooseKeysReachesEveryStep(t *testing.T) {
	uses := []rotationUse{{steps: []int{1}, level: 0}}
	for range 100 {
		uses = append(uses, rotationUse{steps: []int{8}, level: 9})
	}
	g := newStepGraph(16)
	cost := func(set []int) float64 { return g.cost(set, uses, nil, DefaultProfile(), 13) }
	require.Equal(t, []int{1}, chooseKeys([]int{1, 8}, 1, 16, cost))
}
