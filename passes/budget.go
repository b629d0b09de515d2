package passes

import (
	"fmt"
	"math"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/runtime"
)

// BudgetReport records what the key budget did, so that a plan can show
// both points: the exact key set and the set the budget allows.
type BudgetReport struct {
	LimitBytes int64
	// Exact is the program with the exact key set, before any rotation was
	// composed; it shares values with the final program and is only read
	// (MakePlan prices it).
	Exact *ir.Program
	// ExactSteps is the exact rotation set; Steps the set kept (equal when
	// the exact set fits).
	ExactSteps, Steps []int
	// Composed counts the exact program's rotations whose step is not a
	// key (each becomes a chain or part of a nested sum), Added the key
	// switches this adds (the budgeted program's rotations minus the exact
	// program's).
	Composed, Added int
}

// keyBudget bounds the evaluation-keys file (keyFileBytes) at
// Options.MaxKeyBytes. When the exact rotation set (plus the
// relinearization key) is larger, it keeps as many rotation keys S as fit
// and composes every other rotation from them: the vectors are periodic in
// the layout's period D, so a rotation by k is a chain of rotations by keys
// of S whose steps sum to k mod D. Two rewrites use S:
//
//   - a sum of rotations (a giant-step accumulation) may be nested so that
//     it rotates by the differences of its steps (rotationSum), where that
//     takes fewer rotations with S;
//   - every rotation left whose step is not a key becomes a shortest chain
//     in Z_D (breadth first over S); a hoisted batch whose steps are not
//     all keys becomes one hoisted rotation by the first key step of each
//     chain, followed by the rest of the chains, sharing common prefixes.
//
// S is chosen to minimise the estimated time of the result, each rotation
// weighted by the cost of a key switch at its level (default profile) and
// each sum priced at the cheaper of its two forms: greedily, a key at a
// time from the used steps, the steps of the nested sums and the powers of
// two, each either way, then by exchanging a key for another while that
// helps.
//
// Keys are generated at the top level: the runtime has no keys restricted
// to the level of use, so each costs the same.
func keyBudget(s *State) error {
	limit := s.Opts.MaxKeyBytes
	if limit <= 0 {
		return nil
	}
	p := s.Prog
	steps := usedSteps(p)
	relin := needsRelinKey(p)
	fixed := 0
	if relin {
		fixed = 1
	}
	// A smaller set is sized as if every key were made for the top level
	// (which steps it keeps, and at which levels their chains run, is
	// what the search decides), so the budget holds whatever it keeps.
	size := func(rotations int) int64 { return keyFileBytes(p.Params, topLevels(p.Params, rotations), relin) }
	exact := snapshot(p)
	rep := &BudgetReport{LimitBytes: limit, Exact: exact, ExactSteps: steps, Steps: steps}
	s.Report.Budget = rep
	mb := func(b int64) float64 { return float64(b) / 1e6 }
	if b := keyFileBytes(p.Params, stepLevels(p, steps), relin); b <= limit {
		s.note("key budget %.1f MB: the exact set of %d keys (%.1f MB) fits", mb(limit), len(steps)+fixed, mb(b))
		return nil
	}
	least := min(len(steps), 1)
	if size(least) > limit {
		return fmt.Errorf("%s: key budget %.1f MB is below the smallest key set this program can use, %.1f MB (%d keys of %.2f MB each at logN %d with %d ciphertext and %d key-switching primes: %s)",
			s.Graph.SpecFile, mb(limit), mb(size(least)), least+fixed, mb(keyBytes(p.Params)), p.Params.LogN, len(p.Params.LogQ), len(p.Params.LogP), leastKeys(fixed, len(steps)))
	}
	room := least
	for room < len(steps) && size(room+1) <= limit {
		room++
	}
	sums := rotationSums(p)
	var uses []rotationUse
	cands := slices.Clone(steps)
	for _, u := range rotationUses(p) {
		if !slices.ContainsFunc(sums, func(r rotationSum) bool { return slices.Contains(r.rotations, u.op) }) {
			uses = append(uses, u)
		}
	}
	for _, r := range sums {
		cands = append(cands, r.nested()...)
	}
	slices.Sort(cands)
	cands = slices.Compact(cands)
	prof := s.profile()
	g := newStepGraph(p.Period)
	var targets []int
	for _, u := range rotationUses(p) {
		targets = append(targets, u.steps...)
	}
	for _, r := range sums {
		targets = append(targets, r.nested()...)
	}
	g.aim(targets)
	cost := func(set []int) float64 { return g.cost(set, uses, sums, prof, p.Params.LogN) }
	keys := chooseKeys(cands, room, p.Period, cost)
	est := func(set []int) float64 { return cost(set) / 1e6 }
	extraMS := est(keys) - est(steps)
	g.search(keys)
	for _, k := range targets {
		if g.dist[k] < 0 {
			return fmt.Errorf("internal error: key budget: keys %v do not reach step %d", keys, k)
		}
	}
	for _, u := range rotationUses(p) {
		for _, k := range u.steps {
			if g.dist[k] != 1 {
				rep.Composed++
			}
		}
	}
	nested := nestSums(p, g, sums)
	composeRotations(p, g, rotationUses(p))
	rep.Steps = usedSteps(p) // the keys the rewritten program uses, a subset of keys
	rep.Added = rotationCount(p) - rotationCount(exact)
	s.note("key budget %.1f MB: %d rotation keys %v instead of %d (%.1f MB instead of %.1f MB, relinearization key included, each key made for the highest level it is used at); %d rotations composed from them, %d key switches more, about %.1f ms more (estimated)",
		mb(limit), len(rep.Steps), rep.Steps, len(steps), mb(keyFileBytes(p.Params, stepLevels(p, rep.Steps), relin)), mb(keyFileBytes(p.Params, stepLevels(exact, steps), relin)), rep.Composed, rep.Added, extraMS)
	if nested > 0 {
		s.note("key budget: %d sums of rotations nested (Σ rot_k(b) as b1 + rot(b2 + rot(…)), so that they rotate by the differences of their steps", nested)
	}
	return nil
}

// rotationCount is the number of rotations (key switches) of a program.
func rotationCount(p *ir.Program) int {
	n := 0
	for _, op := range p.Ops {
		switch op.Kind {
		case ir.OpRotate, ir.OpRotHoisted:
			n += len(op.Steps)
		case ir.OpRotSum:
			for _, k := range op.Steps {
				if k != 0 {
					n++
				}
			}
		}
	}
	return n
}

// keyFileBytes is the size of the evaluation-keys file that keygen writes
// for rotation keys made for the given levels and, if relin, a
// relinearization key (at the top level): the runtime's 88-byte object
// header, its framing (a relinearization flag, a count, a 4-byte step and
// a 1-byte level per rotation key), and each key in lattigo's encoding
// (gadgetBytes); a Galois key adds 16 bytes. It is what the budget bounds,
// a few kilobytes per key above keyBytes; the key-budget end-to-end test
// checks it against the file keygen writes.
func keyFileBytes(pr ir.Params, levels []int, relin bool) int64 {
	size := int64(88 + 5 + 5*len(levels))
	for _, l := range levels {
		size += 16 + gadgetBytes(pr, l)
	}
	if relin {
		size += gadgetBytes(pr, pr.MaxLevel())
	}
	return size
}

// gadgetBytes is the encoded size of a key-switching key made for level ℓ:
// 16 bytes of decomposition bases and a matrix (8-byte length) of one row
// (8-byte length) per digit, a digit being as many of the ℓ+1 primes of Q
// as P has primes, holding one vector (8-byte length) of two polynomials
// over Q up to ℓ and P, each a matrix (8-byte length) of rows (8-byte
// length) of N 8-byte coefficients.
func gadgetBytes(pr ir.Params, level int) int64 {
	n := int64(1) << pr.LogN
	q, pp := int64(level+1), int64(len(pr.LogP))
	digits := (q + pp - 1) / pp
	poly := func(rows int64) int64 { return 8 + rows*(8+8*n) }
	return 16 + digits*(8+8+2*(poly(q)+poly(pp)))
}

// topLevels is n times the top level: the levels of n rotation keys when
// it is not yet known which steps they serve.
func topLevels(pr ir.Params, n int) []int {
	out := make([]int, n)
	for i := range out {
		out[i] = pr.MaxLevel()
	}
	return out
}

// stepLevels is, for each step of steps, the highest level p rotates by
// it at (the level its key is made for); the top level for a step p does
// not use.
func stepLevels(p *ir.Program, steps []int) []int {
	level := rotationLevels(p)
	out := make([]int, len(steps))
	for i, k := range steps {
		out[i] = p.Params.MaxLevel()
		if l, ok := level[k]; ok {
			out[i] = l
		}
	}
	return out
}

func leastKeys(fixed, steps int) string {
	switch {
	case fixed == 1 && steps > 0:
		return "the relinearization key and one rotation key"
	case fixed == 1:
		return "the relinearization key"
	case steps > 0:
		return "one rotation key"
	default:
		return "no key, only the file's framing"
	}
}

// usedSteps is the sorted set of rotation steps the program uses.
func usedSteps(p *ir.Program) []int {
	var out []int
	for _, op := range p.Ops {
		if op.Kind == ir.OpRotate || op.Kind == ir.OpRotHoisted {
			out = append(out, op.Steps...)
		}
	}
	slices.Sort(out)
	return slices.Compact(out)
}

// needsRelinKey reports whether the program multiplies ciphertexts.
func needsRelinKey(p *ir.Program) bool {
	for _, op := range p.Ops {
		if op.Kind == ir.OpMul || op.Kind == ir.OpPoly {
			return true
		}
	}
	return false
}

// snapshot copies the program's op list and layer records, so that a later
// rewrite that replaces ops (never edits them) leaves the copy intact.
func snapshot(p *ir.Program) *ir.Program {
	c := *p
	c.Ops = slices.Clone(p.Ops)
	c.Layers = make([]*ir.LayerInfo, len(p.Layers))
	for i, l := range p.Layers {
		lc := *l
		c.Layers[i] = &lc
	}
	return &c
}

// rotationUse is one rotation op: its position, steps and level.
type rotationUse struct {
	op      int // index into Program.Ops
	steps   []int
	level   int
	hoisted bool
}

func rotationUses(p *ir.Program) []rotationUse {
	var out []rotationUse
	for i, op := range p.Ops {
		if op.Kind == ir.OpRotate || op.Kind == ir.OpRotHoisted {
			out = append(out, rotationUse{op: i, steps: op.Steps, level: p.Values[op.Args[0]].Level, hoisted: op.Kind == ir.OpRotHoisted})
		}
	}
	return out
}

// stepGraph finds shortest chains of key steps in Z_D. The breadth-first
// search is deterministic: keys are tried in ascending order and the first
// path found to a step is kept.
type stepGraph struct {
	D      int
	dist   []int // hops from 0; -1 unreachable (or not searched)
	parent []int // node before, on the kept path
	via    []int // key step from parent
	queue  []int
	// targets, when set, are the steps the search must reach; it stops
	// once it has reached them all.
	targets []int
	target  []bool
}

func newStepGraph(D int) *stepGraph {
	return &stepGraph{D: D, dist: make([]int, D), parent: make([]int, D), via: make([]int, D), queue: make([]int, 0, D)}
}

func (g *stepGraph) search(keys []int) {
	for i := range g.dist {
		g.dist[i] = -1
	}
	g.dist[0] = 0
	g.queue = append(g.queue[:0], 0)
	left := len(g.targets)
	for h := 0; h < len(g.queue); h++ {
		u := g.queue[h]
		for _, k := range keys {
			v := u + k
			if v >= g.D {
				v -= g.D // keys lie in (0, D)
			}
			if g.dist[v] < 0 {
				g.dist[v], g.parent[v], g.via[v] = g.dist[u]+1, u, k
				g.queue = append(g.queue, v)
				if g.target != nil && g.target[v] {
					if left--; left == 0 {
						return
					}
				}
			}
		}
	}
}

// aim makes later searches stop once they reach every step given.
func (g *stepGraph) aim(steps []int) {
	g.target = make([]bool, g.D)
	g.targets = nil
	for _, k := range steps {
		if k > 0 && k < g.D && !g.target[k] {
			g.target[k] = true
			g.targets = append(g.targets, k)
		}
	}
}

// path returns the nodes from 0 (excluded) to k on the kept path.
func (g *stepGraph) path(k int) []int {
	var nodes []int
	for v := k; v != 0; v = g.parent[v] {
		nodes = append(nodes, v)
	}
	slices.Reverse(nodes)
	return nodes
}

// hops is the number of rotations of chains for the given steps (after a
// search); an unreachable step counts as unreachablePenalty.
func (g *stepGraph) hops(steps []int) int {
	n := 0
	for _, k := range steps {
		if d := g.dist[k]; d >= 0 {
			n += d
		} else {
			n += g.unreachablePenalty()
		}
	}
	return n
}

// unreachablePenalty prices a step the keys cannot reach as this many
// rotations: far more than all the chains of any program together, so that
// a key set that reaches every step always costs less than one that does
// not (the key 1 reaches every step).
func (g *stepGraph) unreachablePenalty() int { return 1 << 40 }

// cost is the estimated time in nanoseconds of every rotation of the
// program when its steps are chains of the given keys: a plain rotation
// costs one key switch per hop; a hoisted batch costs a hoisted rotation
// per distinct first hop plus one key switch per other distinct node of
// its chains. With the exact set it is the program's own rotation cost.
func (g *stepGraph) cost(keys []int, uses []rotationUse, sums []rotationSum, prof *Profile, logN int) float64 {
	g.search(keys)
	var total float64
	for _, r := range sums {
		total += float64(min(g.hops(r.steps), g.hops(r.nested()))) * prof.Cost(CostRotate, logN, r.level)
	}
	seen := map[int]bool{}
	for _, u := range uses {
		rot := prof.Cost(CostRotate, logN, u.level)
		if !u.hoisted {
			d := g.dist[u.steps[0]]
			if d < 0 {
				d = g.unreachablePenalty()
			}
			total += float64(d) * rot
			continue
		}
		clear(seen)
		first, deeper := 0, 0
		for _, k := range u.steps {
			if g.dist[k] < 0 {
				deeper += g.unreachablePenalty()
				continue
			}
			for _, v := range g.path(k) {
				if seen[v] {
					continue
				}
				seen[v] = true
				if g.dist[v] == 1 {
					first++
				} else {
					deeper++
				}
			}
		}
		total += prof.Cost(CostHoisted, logN, u.level)*float64(first)/runtime.HoistedSteps + float64(deeper)*rot
	}
	return total
}

// chooseKeys picks at most room keys among the used steps and the powers of
// two, each in either direction, minimising cost: greedily, then by single
// exchanges until none helps (a few rounds at most). Keys are returned in
// ascending order.
func chooseKeys(steps []int, room, D int, cost func([]int) float64) []int {
	cands := slices.Clone(steps)
	for _, k := range steps {
		cands = append(cands, D-k) // the same rotation the other way
	}
	for k := 1; k < D; k *= 2 {
		cands = append(cands, k, D-k)
	}
	slices.Sort(cands)
	cands = slices.Compact(cands)
	with := func(set []int, k int) []int {
		out := append(slices.Clone(set), k)
		slices.Sort(out)
		return out
	}
	var set []int
	best := math.Inf(1)
	for len(set) < room {
		pick, pickCost := -1, best
		for _, c := range cands {
			if slices.Contains(set, c) {
				continue
			}
			if v := cost(with(set, c)); v < pickCost {
				pick, pickCost = c, v
			}
		}
		if pick < 0 {
			break // no key lowers the cost
		}
		set, best = with(set, pick), pickCost
	}
	set, _ = exchangeKeys(set, best, cands, cost)
	return set
}

// exchangeKeys replaces a key of set by another candidate while that
// lowers the cost, for a few rounds at most, and returns the set and its
// cost.
func exchangeKeys(set []int, best float64, cands []int, cost func([]int) float64) ([]int, float64) {
	const rounds = 3
	for range rounds {
		improved := false
		for i := 0; i < len(set); i++ {
			for _, c := range cands {
				if slices.Contains(set, c) {
					continue
				}
				trial := append(slices.Delete(slices.Clone(set), i, i+1), c)
				slices.Sort(trial)
				if v := cost(trial); v < best {
					set, best, improved = trial, v, true
					break
				}
			}
		}
		if !improved {
			break
		}
	}
	return set, best
}

// composeRotations rewrites every rotation whose step is not a key as a
// chain over g's paths (g must hold the search for the chosen keys) and
// returns the number of key switches added. Ops are replaced, never edited,
// so the exact snapshot stays valid.
func composeRotations(p *ir.Program, g *stepGraph, uses []rotationUse) int {
	added := 0
	replace := map[int][]*ir.Op{}
	for _, u := range uses {
		op := p.Ops[u.op]
		if !slices.ContainsFunc(u.steps, func(k int) bool { return g.dist[k] != 1 }) {
			continue // every step is a key (a key is one hop from 0)
		}
		src := op.Args[0]
		info := p.Layers[op.Layer]
		// Nodes of the chains in order of first appearance; a node that is
		// one of the op's steps keeps that step's result value.
		result := map[int]ir.ValueID{}
		for i, k := range u.steps {
			result[k] = op.Results[i]
		}
		value := map[int]ir.ValueID{0: src}
		var order []int
		for _, k := range u.steps {
			for _, v := range g.path(k) {
				if _, ok := value[v]; ok {
					continue
				}
				if r, ok := result[v]; ok {
					value[v] = r
				} else {
					value[v] = newLike(p, op.Results[0], fmt.Sprintf("Via%d", v))
				}
				order = append(order, v)
			}
		}
		var ops []*ir.Op
		var first []int
		for _, v := range order {
			if g.dist[v] == 1 {
				first = append(first, v)
			}
		}
		if u.hoisted {
			h := &ir.Op{Kind: ir.OpRotHoisted, Args: []ir.ValueID{src}, Steps: first, Const: -1, Layer: op.Layer}
			for _, v := range first {
				h.Results = append(h.Results, value[v])
			}
			ops = append(ops, h)
		} else {
			for _, v := range first {
				ops = append(ops, &ir.Op{Kind: ir.OpRotate, Args: []ir.ValueID{src}, Results: []ir.ValueID{value[v]}, Steps: []int{v}, Const: -1, Layer: op.Layer})
			}
		}
		// Deeper nodes by depth, so that each parent comes first.
		deeper := slices.DeleteFunc(slices.Clone(order), func(v int) bool { return g.dist[v] == 1 })
		slices.SortStableFunc(deeper, func(a, b int) int { return g.dist[a] - g.dist[b] })
		for _, v := range deeper {
			ops = append(ops, &ir.Op{Kind: ir.OpRotate, Args: []ir.ValueID{value[g.parent[v]]}, Results: []ir.ValueID{value[v]}, Steps: []int{g.via[v]}, Const: -1, Layer: op.Layer})
		}
		before := len(u.steps)
		if u.hoisted {
			if before > 1 {
				info.Hoisted -= before
			}
			if len(first) > 1 {
				info.Hoisted += len(first)
			}
		}
		info.Rotations += len(first) + len(deeper) - before
		added += len(first) + len(deeper) - before
		replace[u.op] = ops
	}
	if len(replace) == 0 {
		return 0
	}
	var out []*ir.Op
	for i, op := range p.Ops {
		if r, ok := replace[i]; ok {
			out = append(out, r...)
		} else {
			out = append(out, op)
		}
	}
	p.Ops = out
	return added
}

// newLike adds a ciphertext value with the level, scale, degree and layer
// of v, named after it.
func newLike(p *ir.Program, v ir.ValueID, suffix string) ir.ValueID {
	old := p.Values[v]
	id := p.NewValue(old.Name+suffix, ir.Cipher, old.Layer)
	nv := p.Values[id]
	nv.Level, nv.Scale, nv.Degree = old.Level, old.Scale, old.Degree
	return id
}
