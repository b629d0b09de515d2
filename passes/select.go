package passes

import (
	"fmt"
	"math"
	"sort"
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

// maxSelect bounds the merge decisions enumerated exhaustively (2^maxSelect
// compilations); beyond it the remaining pairs are merged.
const maxSelect = 6

// Candidate is one variant the selection compiled and priced.
type Candidate struct {
	Apart     []string // linear layers kept apart from the one before them
	LogN      int
	Depth     int
	Rotations int
	EstMS     float64
	KeyBytes  int64
	Err       error // the variant does not compile (e.g. no ring holds its depth)
}

func (c Candidate) String() string {
	v := "all linear runs merged"
	if len(c.Apart) > 0 {
		v = "kept apart: " + strings.Join(c.Apart, ", ")
	}
	if c.Err != nil {
		return fmt.Sprintf("%s: does not fit (%v)", v, c.Err)
	}
	return fmt.Sprintf("%s: logN %d, depth %d, %d rotations, %.1f ms, keys %.1f MB", v, c.LogN, c.Depth, c.Rotations, c.EstMS, float64(c.KeyBytes)/1e6)
}

// Select chooses, jointly with the parameters, whether each run of adjacent
// linear layers is merged into one map (one level, more diagonals) or kept
// apart (a level each, fewer rotations): it compiles every combination —
// each compilation picks its own ring degree and chain for its depth — prices
// it with the cost model and keeps the cheapest. The choice and the
// runner-up, with their estimated costs, are recorded in the report.
// Enumeration is exhaustive, which is exact for up to maxSelect decisions;
// models with more are not searched beyond the first maxSelect.
func Select(g *ir.Graph, opts Options, prof *Profile, obj Objective) (*ir.Program, *State, []Candidate, error) {
	prog, st, err := Compile(g, opts)
	if st == nil || (err != nil && len(st.Report.Mergeable) == 0) {
		return prog, st, nil, err
	}
	names := st.Report.Mergeable
	if len(names) == 0 {
		return prog, st, nil, nil
	}
	if len(names) > maxSelect {
		names = names[:maxSelect]
	}
	type result struct {
		c    Candidate
		prog *ir.Program
		st   *State
	}
	var results []result
	for mask := 0; mask < 1<<len(names); mask++ {
		o := opts
		o.KeepApart = map[string]bool{}
		var apart []string
		for i, n := range names {
			if mask&(1<<i) != 0 {
				o.KeepApart[n] = true
				apart = append(apart, n)
			}
		}
		p, s, err := Compile(g, o)
		c := Candidate{Apart: apart, Err: err}
		if err == nil {
			plan := MakePlan(s, prof)
			c.LogN, c.Depth, c.Rotations = p.Params.LogN, plan.Params.Depth, len(p.Rotations)
			c.EstMS, c.KeyBytes = plan.EstimateMS, plan.Keys.Bytes
		}
		results = append(results, result{c, p, s})
	}
	cost := func(c Candidate) float64 {
		if c.Err != nil {
			return math.Inf(1)
		}
		if obj == KeyBytes {
			return float64(c.KeyBytes)
		}
		return c.EstMS
	}
	sort.SliceStable(results, func(i, j int) bool { return cost(results[i].c) < cost(results[j].c) })
	best := results[0]
	if best.c.Err != nil {
		return nil, best.st, nil, best.c.Err
	}
	cands := make([]Candidate, len(results))
	for i, r := range results {
		cands[i] = r.c
	}
	best.st.note("selection: chose %s", best.c)
	if len(results) > 1 {
		best.st.note("selection: runner-up %s", results[1].c)
	}
	return best.prog, best.st, cands, nil
}
