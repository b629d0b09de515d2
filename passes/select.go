package passes

import (
	"errors"
	"fmt"
	"slices"
	"strings"

	"github.com/lanthorn/lanthorn/ir"
)

// Objective is what the selection minimises.
type Objective int

const (
	// Latency minimises the estimated time of one encrypted evaluation.
	Latency Objective = iota
	// KeyBytes minimises the size of the evaluation keys.
	KeyBytes
)

// ParseObjective reads an objective's name: latency or keys.
func ParseObjective(s string) (Objective, error) {
	switch s {
	case "latency":
		return Latency, nil
	case "keys":
		return KeyBytes, nil
	}
	return Latency, fmt.Errorf("unknown objective %q (want latency or keys)", s)
}

func (o Objective) String() string {
	if o == KeyBytes {
		return "keys"
	}
	return "latency"
}

// Candidate is one variant the selection compiled and priced: the best of
// its ring degree, depth and layout period.
type Candidate struct {
	Variant   string // its decisions, e.g. "b: kept apart; act1: degree 7 …; ring: logN 14, depth 6"
	Apart     []string
	Degrees   map[string]int
	Methods   map[string]Method
	LogN      int
	Depth     int
	Rotations int
	EstMS     float64
	KeyBytes  int64
	Err       error // the variant does not compile (e.g. no ring holds its depth)
}

func (c Candidate) String() string {
	if c.Err != nil {
		return fmt.Sprintf("%s: does not fit (%v)", c.Variant, c.Err)
	}
	return fmt.Sprintf("%s: logN %d, depth %d, %d rotations, %.1f ms, keys %.1f MB", c.Variant, c.LogN, c.Depth, c.Rotations, c.EstMS, float64(c.KeyBytes)/1e6)
}

// Choice is one decision of the selection with its runner-up: the best
// variant that decides otherwise, compiled and priced like the chosen one.
type Choice struct {
	Decision       string  `json:"decision"` // "b: merge", "act1: degree", "a_b: method", "ring"
	Chosen         string  `json:"chosen"`
	ChosenMS       float64 `json:"chosen_ms"`
	ChosenKeyBytes int64   `json:"chosen_key_bytes"`
	// RunnerUp is what the runner-up decides differently (its other
	// decisions follow), "" when nothing else is possible.
	RunnerUp         string  `json:"runner_up,omitempty"`
	RunnerUpMS       float64 `json:"runner_up_ms,omitempty"`
	RunnerUpKeyBytes int64   `json:"runner_up_key_bytes,omitempty"`
	RunnerUpErr      string  `json:"runner_up_error,omitempty"` // the runner-up does not compile
}

// Select chooses, jointly with the parameters, every variant the compiler
// offers: whether each run of adjacent linear layers is merged into one map
// (one level, more diagonals) or kept apart (a level each, fewer
// rotations), the degree of each activation declared with a tolerance
// (fewer levels, or a closer fit), and each linear layer's matrix method
// (baby-step giant-step over the whole period, blocks for a short output,
// or blocks over shifted copies of a sparse input whose zeros are proven). The segments (a layer, or a merged run) are lowered once each
// and priced with the profile at the levels they would run at; for every
// layout period and depth, the params pass sizes the ring degree and chain,
// and dynamic programming over (layer, levels consumed) finds the cheapest
// sequence of segments (selectdp.go). The best of each period and depth is
// compiled and priced exactly; the cheapest that compiles wins. Every
// decision and its runner-up (the best variant that decides otherwise,
// compiled too) are recorded in the report with their estimated costs; a
// runner-up that beats the choice replaces it, and the runner-ups of the
// new choice are found in turn.
//
// Under a key budget the variants are chosen, and the decisions priced,
// with the exact key set (the search does not model the rotations a budget
// composes); the choice is then compiled under the budget, so that the
// budget's exact point is the program the same spec gets without one.
func Select(g *ir.Graph, opts Options, prof *Profile, obj Objective) (*ir.Program, *State, []Candidate, error) {
	opts.Profile, opts.Objective = prof, obj
	prog, st, err := Compile(g, opts)
	if err != nil {
		return prog, st, nil, err
	}
	budget := opts.MaxKeyBytes
	opts.MaxKeyBytes = 0
	pre, err := graphBefore(g, opts, "merge-linear")
	if err != nil {
		return nil, st, nil, err
	}
	se := &searcher{sp: newSegmentSpace(pre.Graph, pre.Report.Degrees, opts), prof: prof, obj: obj, final: st.Graph, cells: map[[2]int]*cell{}}
	sols, misfits := se.search(constraint{})
	done := se.compileAll(g, opts, sols)
	if len(done) == 0 || done[0].c.Err != nil {
		// Nothing the search proposed compiles: keep the default
		// compilation, which did, and say why.
		st.note("selection: no variant beyond the default compiled (%v)", errors.Join(misfits...))
		return prog, st, nil, nil
	}
	best := done[0]
	// The runner-ups are compiled and priced exactly; where one beats the
	// choice (the search's estimate of key bytes is an upper bound, the
	// search prices a layer whose input repeats with the full folds, and
	// variants may move the noise gain), it becomes the choice.
	chs, alts := se.choices(g, opts, best)
	for round := 0; round < 8; round++ {
		next := best
		// The search's key bytes are an upper bound (keys summed per
		// segment): under that objective, also try the choice with one
		// method or degree decided otherwise and the rest kept.
		if obj == KeyBytes {
			alts = append(alts, se.flips(g, opts, best)...)
		}
		for _, a := range alts {
			if better(se.exact(a.c), se.exact(next.c), obj) {
				next = a
			}
		}
		if next.sol == best.sol {
			break
		}
		best = next
		chs, alts = se.choices(g, opts, best)
	}
	cands := []Candidate{best.c}
	for _, d := range done {
		if d.c.Variant != best.c.Variant {
			cands = append(cands, d.c)
		}
	}
	if budget > 0 {
		opts.MaxKeyBytes = budget
		c, p, s := se.compile(g, opts, best.sol)
		if c.Err != nil {
			return nil, s, nil, c.Err
		}
		best.c, best.prog, best.st = c, p, s
		cands[0] = c
	}
	best.st.Report.Choices = chs
	return best.prog, best.st, cands, nil
}

// compiled is a solution compiled and priced.
type compiled struct {
	sol  *solution
	c    Candidate
	prog *ir.Program
	st   *State
}

// exact is a compiled candidate's score: its estimated ms and its
// evaluation-key bytes (compared when the objective is keys).
func (se *searcher) exact(c Candidate) score {
	if c.Err != nil {
		return inf
	}
	return score{ms: c.EstMS, keys: c.KeyBytes}
}

// compileAll compiles solutions and sorts them by their exact score,
// the ones that do not compile last.
func (se *searcher) compileAll(g *ir.Graph, opts Options, sols []*solution) []compiled {
	var done []compiled
	for _, sol := range sols {
		c, p, s := se.compile(g, opts, sol)
		done = append(done, compiled{sol, c, p, s})
	}
	slices.SortStableFunc(done, func(a, b compiled) int {
		switch {
		case better(se.exact(a.c), se.exact(b.c), se.obj):
			return -1
		case better(se.exact(b.c), se.exact(a.c), se.obj):
			return 1
		}
		return 0
	})
	return done
}

// compile builds and prices one solution.
func (se *searcher) compile(g *ir.Graph, base Options, sol *solution) (Candidate, *ir.Program, *State) {
	o := se.options(base, sol)
	keys, val := se.decisions(sol)
	var parts []string
	for _, k := range keys {
		parts = append(parts, k+" "+val[k])
	}
	c := Candidate{Variant: strings.Join(parts, "; "), Degrees: o.Degree, Methods: o.Method}
	for _, l := range se.sp.layers {
		if o.KeepApart[l.Name] {
			c.Apart = append(c.Apart, l.Name)
		}
	}
	p, s, err := Compile(g, o)
	if err != nil {
		c.Err = err
		return c, nil, nil
	}
	plan := MakePlan(s, se.prof)
	c.LogN, c.Depth, c.Rotations = p.Params.LogN, plan.Params.Depth, len(p.Rotations)
	c.EstMS, c.KeyBytes = plan.EstimateMS, plan.Keys.Bytes
	return c, p, s
}

// choices lists every decision of the chosen solution with its
// runner-up: under the constraint that excludes the decision, the search's
// best solution of each period and depth are compiled and the exact best is
// the runner-up. It returns the runner-ups compiled, too.
func (se *searcher) choices(g *ir.Graph, opts Options, chosen compiled) ([]Choice, []compiled) {
	keys, val := se.decisions(chosen.sol)
	var out []Choice
	var runnerUps []compiled
	for _, k := range keys {
		ch := Choice{Decision: k, Chosen: val[k], ChosenMS: chosen.c.EstMS, ChosenKeyBytes: chosen.c.KeyBytes}
		sols, _ := se.search(se.forbidChoice(chosen.sol, k))
		if len(sols) > maxRunnerUps {
			sols = sols[:maxRunnerUps]
		}
		if alts := se.compileAll(g, opts, sols); len(alts) > 0 {
			alt := alts[0]
			akeys, aval := se.decisions(alt.sol)
			var diff []string
			for _, ak := range akeys {
				if ak != k && aval[ak] != val[ak] {
					diff = append(diff, ak+" "+aval[ak])
				}
			}
			switch {
			case aval[k] == "": // the runner-up splits the layers otherwise
				ch.RunnerUp = strings.Join(diff, "; ")
			case len(diff) > 0:
				ch.RunnerUp = aval[k] + " (" + strings.Join(diff, "; ") + ")"
			default:
				ch.RunnerUp = aval[k]
			}
			if alt.c.Err != nil {
				ch.RunnerUpErr = alt.c.Err.Error()
			} else {
				ch.RunnerUpMS, ch.RunnerUpKeyBytes = alt.c.EstMS, alt.c.KeyBytes
				runnerUps = append(runnerUps, alt)
			}
		}
		out = append(out, ch)
	}
	return out, runnerUps
}

// flips compiles the chosen solution with each of its method and degree
// decisions made otherwise, one at a time, the others kept.
func (se *searcher) flips(g *ir.Graph, opts Options, chosen compiled) []compiled {
	keys, _ := se.decisions(chosen.sol)
	var out []compiled
	for _, k := range keys {
		c, ok := se.flipChoice(chosen.sol, k)
		if !ok {
			continue
		}
		sols, _ := se.search(c)
		if len(sols) > maxRunnerUps {
			sols = sols[:maxRunnerUps]
		}
		for _, a := range se.compileAll(g, opts, sols) {
			if a.c.Err == nil {
				out = append(out, a)
				break
			}
		}
	}
	return out
}

// maxRunnerUps bounds the solutions compiled per decision to find its
// runner-up: the search's best few (by its estimate), of different depths
// or periods.
const maxRunnerUps = 3

// graphBefore runs the graph passes of the pipeline that come before the
// pass named stop and returns their state.
func graphBefore(g *ir.Graph, opts Options, stop string) (*State, error) {
	s := &State{Source: g, Graph: cloneGraph(g), Opts: opts, Report: &Report{Dumps: map[string]string{}}}
	for _, p := range Pipeline {
		if p.Name == stop {
			return s, nil
		}
		if err := p.Run(s); err != nil {
			return s, err
		}
	}
	return nil, fmt.Errorf("internal error: no pass %q in the pipeline", stop)
}
