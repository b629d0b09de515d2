package emit

import (
	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/passes"
)

// Build compiles a graph and generates its program: the one path that the
// command line, the demo and the golden tests share. Variants are selected
// for popts.Objective (latency or key bytes) under the reference profile. The README's plan is
// priced with the embedded reference profile.
func Build(g *ir.Graph, popts passes.Options, opts Options) (Files, *passes.State, error) {
	prog, st, _, err := passes.Select(g, popts, passes.DefaultProfile(), popts.Objective)
	if err != nil {
		return nil, st, err
	}
	plan := passes.MakePlan(st, passes.DefaultProfile())
	files, err := Generate(Input{Prog: prog, Model: st.Model, Notes: st.Report.Notes, Plan: plan}, opts)
	return files, st, err
}
