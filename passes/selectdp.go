package passes

import (
	"fmt"
	"math"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// score is what the search compares: estimated ms and, for the key-size
// objective, keys: in the search a count of rotation keys (the sum over
// segments, an upper bound of the distinct rotations the compiled program
// needs), for compiled candidates their key bytes.
type score struct {
	ms   float64
	keys int64
}

func (a score) add(b score) score { return score{a.ms + b.ms, a.keys + b.keys} }

// better reports whether a beats b under obj; ties go to latency, then to b.
func better(a, b score, obj Objective) bool {
	if obj == KeyBytes && a.keys != b.keys {
		return a.keys < b.keys
	}
	return a.ms < b.ms-1e-12
}

// solution is one way to build the program: a segment per stretch of
// layers, at one period and depth, in the parameters sized for them.
type solution struct {
	segs   []*segment
	period int
	depth  int
	params ir.Params
	est    score
}

// searcher finds the cheapest solutions by dynamic programming over levels.
type searcher struct {
	sp    *segmentSpace
	prof  *Profile
	obj   Objective
	final *ir.Graph // a compiled graph: its value bounds and noise gain size the parameters
	cells map[[2]int]*cell
}

// cell is the parameters for one (depth, period), or why none fit.
type cell struct {
	params ir.Params
	err    error
}

// periods are the layout periods some choice of segments gives: the next
// power of two of the widest of the input and the segments' outputs.
func (se *searcher) periods() []int {
	ps := []int{se.sp.period(se.sp.inSize)}
	for _, ss := range se.sp.starts {
		for _, s := range ss {
			if p := se.sp.period(s.out); p > ps[0] && !slices.Contains(ps, p) {
				ps = append(ps, p)
			}
		}
	}
	slices.Sort(ps)
	return ps
}

// fits reports whether segment s can be laid out at period D (in chunks
// of D where the period is capped).
func (se *searcher) fits(s *segment, D int) bool {
	return se.sp.period(max(se.sp.layers[s.from].In, s.out)) <= D
}

// params sizes the parameters for a program of the given depth and period
// with the params pass itself, run on a stand-in program (a chain of depth
// rescales) over the compiled graph, so that the search and the compiled
// program agree on the ring degree and chain whenever the variants share
// their value bounds and noise gain (merging leaves them unchanged; another
// interpolant degree moves them slightly; the compiled program decides).
func (se *searcher) params(depth, period int) *cell {
	key := [2]int{depth, period}
	if c, ok := se.cells[key]; ok {
		return c
	}
	p := &ir.Program{Name: se.final.Name, Period: period}
	x := p.NewValue("x", ir.Cipher, -1)
	p.Ops = append(p.Ops, &ir.Op{Kind: ir.OpInput, Results: []ir.ValueID{x}, Const: -1, Layer: -1})
	for range depth {
		y := p.NewValue("y", ir.Cipher, -1)
		p.Ops = append(p.Ops, &ir.Op{Kind: ir.OpRescale, Args: []ir.ValueID{x}, Results: []ir.ValueID{y}, Const: -1, Layer: -1})
		x = y
	}
	st := &State{Source: se.final, Model: se.final, Graph: se.final, Prog: p, Report: &Report{}}
	c := &cell{err: chooseParams(st)}
	c.params = p.Params
	if c.err == nil && !se.sp.opts.Naive && (se.final.Pin == nil || len(se.final.Pin.LogP) == 0) {
		c.params, c.err = withSpecials(p.Params, se.prof, se.obj)
	}
	se.cells[key] = c
	return c
}

// constraint narrows the search: forbid excludes segments (nil excludes
// none), ring keeps only the ring degrees it accepts (nil keeps all).
type constraint struct {
	forbid func(*segment) bool
	ring   func(logN int) bool
}

func (c constraint) ok(s *segment) bool { return c.forbid == nil || !c.forbid(s) }

// search returns the cheapest solution of every (period, depth) whose
// parameters fit, and the cells that do not fit (as errors), under c.
//
// For one period D and depth R, the parameters fix the ring degree 2^logN
// and the top level T (R, or a pinned chain's length). The table is
// best[i][u][w]: the cheapest way to build layers [0, i) consuming u
// levels, w recording whether some output already needs the period D.
// A segment from i entered after u levels runs at level T − u, where it
// costs what its ops cost at their levels, and leads to best[j+1][u+d]
// (d its depth). The answer is best[n][R][true].
func (se *searcher) search(c constraint) (sols []*solution, misfits []error) {
	n := len(se.sp.layers)
	for _, D := range se.periods() {
		// Depths reachable at this period, before any parameters.
		maxDepth := 0
		var depthOf = map[*segment]int{}
		for i := range n {
			deepest := 0
			for _, s := range se.sp.variants(i, D) {
				if !se.fits(s, D) || !c.ok(s) {
					continue
				}
				lp, err := se.sp.lower(s, D)
				if err != nil {
					misfits = append(misfits, err)
					continue
				}
				depthOf[s] = lp.depth
				deepest = max(deepest, lp.depth)
			}
			maxDepth += deepest
		}
		reach := se.reachable(D, maxDepth, depthOf)
		for R := 0; R <= maxDepth; R++ {
			if !reach[R] {
				continue
			}
			cl := se.params(R, D)
			if cl.err != nil {
				misfits = append(misfits, fmt.Errorf("depth %d, period %d: %w", R, D, cl.err))
				continue
			}
			if c.ring != nil && !c.ring(cl.params.LogN) {
				continue
			}
			if sol := se.best(D, R, cl.params, depthOf); sol != nil {
				sols = append(sols, sol)
			}
		}
	}
	slices.SortStableFunc(sols, func(a, b *solution) int {
		switch {
		case better(a.est, b.est, se.obj):
			return -1
		case better(b.est, a.est, se.obj):
			return 1
		}
		return 0
	})
	return sols, misfits
}

// reachable marks the depths some sequence of allowed segments consumes
// at period D with the period reached.
func (se *searcher) reachable(D, maxDepth int, depthOf map[*segment]int) []bool {
	n := len(se.sp.layers)
	type key struct{ i, u, w int }
	seen := map[key]bool{}
	out := make([]bool, maxDepth+1)
	var walk func(i, u, w int)
	walk = func(i, u, w int) {
		k := key{i, u, w}
		if seen[k] {
			return
		}
		seen[k] = true
		if i == n {
			if w == 1 {
				out[u] = true
			}
			return
		}
		for _, s := range se.sp.variants(i, D) {
			d, ok := depthOf[s]
			if !ok {
				continue
			}
			walk(s.to+1, u+d, max(w, se.hits(s.out, D)))
		}
	}
	walk(0, 0, se.hits(se.sp.inSize, D))
	return out
}

// hits is 1 when a vector of size values sets the period to D.
func (se *searcher) hits(size, D int) int {
	if se.sp.period(size) == D {
		return 1
	}
	return 0
}

// best fills the table for period D and depth R and returns its answer.
func (se *searcher) best(D, R int, pr ir.Params, depthOf map[*segment]int) *solution {
	n := len(se.sp.layers)
	top := pr.MaxLevel()
	type entry struct {
		ok       bool
		sc       score
		seg      *segment
		pu, pw   int
		prevFrom int
	}
	best := make([][][2]entry, n+1)
	for i := range best {
		best[i] = make([][2]entry, R+1)
	}
	best[0][0][se.hits(se.sp.inSize, D)] = entry{ok: true}
	for i := range n {
		for u := 0; u <= R; u++ {
			for w := range 2 {
				e := best[i][u][w]
				if !e.ok {
					continue
				}
				for _, s := range se.sp.variants(i, D) {
					d, ok := depthOf[s]
					if !ok || u+d > R || top-u < d {
						continue
					}
					lp := s.lowered[D]
					sc := e.sc.add(score{ms: lp.price(se.prof, pr, top-u), keys: int64(lp.rotations)})
					nw := max(w, se.hits(s.out, D))
					nx := &best[s.to+1][u+d][nw]
					if !nx.ok || better(sc, nx.sc, se.obj) {
						*nx = entry{ok: true, sc: sc, seg: s, pu: u, pw: w, prevFrom: i}
					}
				}
			}
		}
	}
	end := best[n][R][1]
	if !end.ok {
		return nil
	}
	sol := &solution{period: D, depth: R, params: pr, est: end.sc}
	for i, u, w := n, R, 1; i > 0; {
		e := best[i][u][w]
		sol.segs = append(sol.segs, e.seg)
		i, u, w = e.prevFrom, e.pu, e.pw
	}
	slices.Reverse(sol.segs)
	return sol
}

// options are the compile options that build sol.
func (se *searcher) options(base Options, sol *solution) Options {
	o := base
	o.KeepApart, o.Degree, o.Method = map[string]bool{}, map[string]int{}, map[string]Method{}
	for _, s := range sol.segs {
		if s.from > 0 && mergeable(se.sp.layers[s.from]) && mergeable(se.sp.layers[s.from-1]) {
			o.KeepApart[se.sp.layers[s.from].Name] = true
		}
		if s.degree > 0 {
			o.Degree[s.name] = s.degree
		}
		if s.method != "" {
			o.Method[s.name] = s.method
		}
	}
	return o
}

// decisions describes sol as one phrase per decision, keyed by the
// decision's name, in layer order; the ring degree last.
func (se *searcher) decisions(sol *solution) (keys []string, val map[string]string) {
	val = map[string]string{}
	add := func(k, v string) {
		keys = append(keys, k)
		val[k] = v
	}
	layers := se.sp.layers
	for _, s := range sol.segs {
		for k := s.from; k <= s.to; k++ {
			if k > 0 && mergeable(layers[k]) && mergeable(layers[k-1]) {
				if k == s.from {
					add(layers[k].Name+": merge", "kept apart")
				} else {
					add(layers[k].Name+": merge", "merged into "+layers[k-1].Name)
				}
			}
		}
		if s.degree > 0 {
			for _, o := range se.sp.degrees[s.name] {
				if o.Degree == s.degree {
					add(s.name+": degree", fmt.Sprintf("%d (%d levels, max error %.2e)", len(o.Coeffs)-1, o.Levels, o.MaxErr))
				}
			}
		}
		if s.method != "" {
			add(s.name+": method", string(s.method))
		}
	}
	add("ring", fmt.Sprintf("logN %d, depth %d", sol.params.LogN, sol.depth))
	return keys, val
}

// forbidChoice is the constraint that excludes decision key's value in
// sol: the runner-up of that decision is the best solution under it.
func (se *searcher) forbidChoice(sol *solution, key string) constraint {
	layers := se.sp.layers
	if key == "ring" {
		logN := sol.params.LogN
		return constraint{ring: func(n int) bool { return n != logN }}
	}
	for _, s := range sol.segs {
		for k := s.from; k <= s.to; k++ {
			if key != layers[k].Name+": merge" {
				continue
			}
			if k == s.from { // kept apart: forbid every segment that ends just before k
				return constraint{forbid: func(t *segment) bool { return t.to == k-1 }}
			}
			return constraint{forbid: func(t *segment) bool { return t.from < k && k <= t.to }}
		}
		if key == s.name+": degree" && s.degree > 0 {
			from, d := s.from, s.degree
			return constraint{forbid: func(t *segment) bool { return t.from == from && t.degree == d }}
		}
		if key == s.name+": method" && s.method != "" {
			from, to, m := s.from, s.to, s.method
			return constraint{forbid: func(t *segment) bool { return t.from == from && t.to == to && t.method == m }}
		}
	}
	return constraint{forbid: func(*segment) bool { return true }}
}

// flipChoice is the constraint that keeps every segment of sol but the
// one deciding key, a method or degree decision, which must decide
// otherwise; false for other decisions.
func (se *searcher) flipChoice(sol *solution, key string) (constraint, bool) {
	in := map[*segment]bool{}
	for _, s := range sol.segs {
		in[s] = true
	}
	for _, s := range sol.segs {
		if key != s.name+": method" && key != s.name+": degree" {
			continue
		}
		chosen := s
		return constraint{forbid: func(t *segment) bool {
			if t.from == chosen.from && t.to == chosen.to {
				return t == chosen
			}
			return !in[t]
		}}, true
	}
	return constraint{}, false
}

// inf is the score of nothing.
var inf = score{ms: math.Inf(1), keys: math.MaxInt64}
