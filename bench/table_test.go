package bench

import (
	"fmt"
	"io"
	"strings"
	"testing"
	"text/tabwriter"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/passes"
)

// writeTable prints the benchmark's table and, under it, what each figure
// means: why a program was not measured, the lower bound's definition and
// breakdown, and the primitives it was priced with.
func writeTable(w io.Writer, rows []modelRow, budgetMB float64) {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "model\tvariant\tmedian ms\tmin–max ms\tplan est. ms\teval keys MB\tpeak MB\tthreads\truns\topt/naive\topt/bound\t")
	var notes []string
	for _, r := range rows {
		name := r.name
		for _, v := range []variantRow{r.opt, r.naive} {
			cells := []string{name, v.variant}
			if res := v.result; res != nil {
				cells = append(cells, ms(res.MedianMS), ms(res.MinMS)+"–"+ms(res.MaxMS), ms(v.plan.EstimateMS),
					mb(res.KeysMB), mb(res.PeakMB), fmt.Sprint(res.Threads), fmt.Sprint(res.Runs))
			} else {
				cells = append(cells, "not measured*", "", ms(v.plan.EstimateMS), mb(v.planKeys)+" (plan)", "", "", "")
				notes = append(notes, fmt.Sprintf("* %s %s: %s", r.name, v.variant, v.skipped))
			}
			if v.variant == "optimised" {
				cells = append(cells, ratio(r.opt.result, r.naive.result), boundRatio(r))
			} else {
				cells = append(cells, "", "")
			}
			fmt.Fprintln(tw, strings.Join(cells, "\t")+"\t")
			name = ""
		}
		switch {
		case r.bound != nil:
			t := 1
			if r.opt.result != nil {
				t = max(r.opt.result.Threads, 1)
			}
			cells := []string{"", "lower bound", ms(boundMS(r)), "", "", "", "", fmt.Sprint(t), "", "", ""}
			fmt.Fprintln(tw, strings.Join(cells, "\t")+"\t")
			if t > 1 {
				notes = append(notes, fmt.Sprintf("%s lower bound: %s ms of work at one thread, divided by the optimised program's %d threads", r.name, ms(r.bound.MS), t))
			}
		default:
			fmt.Fprintf(tw, "\tlower bound\tnot computed*\t\t\t\t\t\t\t\t\t\n")
			notes = append(notes, fmt.Sprintf("* %s lower bound: %v", r.name, r.boundErr))
		}
	}
	tw.Flush()
	fmt.Fprintf(w, "\nopt/naive and opt/bound are ratios of medians measured in this run (below 1: the optimised program is faster).\n")
	fmt.Fprintf(w, "eval keys MB: the evaluation keys as the program generated them in memory (\"(plan)\": the planner's figure).\n")
	fmt.Fprintf(w, "naive programs whose planned keys exceed %.0f MB are not run; one planned above the -slow-ms limit is timed once.\n", budgetMB)
	for _, n := range notes {
		fmt.Fprintln(w, n)
	}
	fmt.Fprintf(w, "\n%s\n", passes.BoundDefinition)
	for _, r := range rows {
		if r.bound != nil {
			fmt.Fprintf(w, "  %s: %s (%s)\n", r.name, r.bound, r.ops)
		}
	}
}

func ms(v float64) string {
	switch {
	case v >= 100:
		return fmt.Sprintf("%.0f", v)
	case v >= 10:
		return fmt.Sprintf("%.1f", v)
	}
	return fmt.Sprintf("%.2f", v)
}

func mb(v float64) string { return fmt.Sprintf("%.1f", v) }

func ratio(a, b *benchResult) string {
	if a == nil || b == nil {
		return "–"
	}
	return fmt.Sprintf("%.3g×", a.MedianMS/b.MedianMS)
}

func boundRatio(r modelRow) string {
	if r.opt.result == nil || r.bound == nil {
		return "–"
	}
	return fmt.Sprintf("%.3g×", r.opt.result.MedianMS/boundMS(r))
}

// The table shows every variant of every model, the ratios of measured
// medians, and says plainly which figures were not measured and why.
func TestTable(t *testing.T) {
	plan := func(estMS float64, keys int64, count int) *passes.Plan {
		return &passes.Plan{EstimateMS: estMS, Keys: passes.PlanKeys{Bytes: keys, Count: count}}
	}
	rows := []modelRow{
		{name: "demo/gearbox",
			opt:   variantRow{variant: "optimised", plan: plan(440, 188e6, 8), planKeys: 188, result: &benchResult{Threads: 2, Runs: 7, MedianMS: 100, MinMS: 90, MaxMS: 120, KeysMB: 190, PeakMB: 400}},
			naive: variantRow{variant: "naive", plan: plan(1000, 377e6, 16), planKeys: 377, result: &benchResult{Threads: 2, Runs: 3, MedianMS: 400, MinMS: 390, MaxMS: 410, KeysMB: 380, PeakMB: 700}},
			bound: &passes.Bound{MS: 160, Layers: []passes.BoundLayer{{Layer: "dense1", Diagonals: 16, Split: 8, BabySteps: 7, GiantSteps: 1, MS: 160}}}, ops: "primitives"},
		{name: "mnist/digits",
			opt:      variantRow{variant: "optimised", plan: plan(1000, 671e6, 61), planKeys: 671, result: &benchResult{Threads: 1, Runs: 7, MedianMS: 300, MinMS: 290, MaxMS: 310, KeysMB: 670, PeakMB: 1200}},
			naive:    variantRow{variant: "naive", plan: plan(47000, 39482e6, 3586), planKeys: 39482, skipped: "not measured: keys above the budget"},
			boundErr: fmt.Errorf("measure: no levels")},
	}
	var sb strings.Builder
	writeTable(&sb, rows, 6000)
	out := sb.String()
	t.Log("\n" + out)
	lines := strings.Split(out, "\n")
	require.Regexp(t, `^\s*model\s+variant\s+median ms`, lines[0])
	require.Regexp(t, `demo/gearbox\s+optimised\s+100\s+90.0–120\s+440\s+190.0\s+400.0\s+2\s+7\s+0.25×\s+1.25×`, lines[1], "opt/bound is against 160 ms of work over 2 threads")
	require.Regexp(t, `^\s+naive\s+400\s+390–410\s+1000\s+380.0\s+700.0\s+2\s+3\s*$`, lines[2])
	require.Regexp(t, `^\s+lower bound\s+80.0\s+2\s*$`, lines[3])
	require.Regexp(t, `mnist/digits\s+optimised\s+300\s+290–310\s+1000\s+670.0\s+1200.0\s+1\s+7\s+–\s+–`, lines[4])
	require.Regexp(t, `naive\s+not measured\*\s+47000\s+39482.0 \(plan\)`, lines[5])
	require.Regexp(t, `lower bound\s+not computed\*`, lines[6])
	require.Contains(t, out, "* mnist/digits naive: not measured: keys above the budget")
	require.Contains(t, out, "* mnist/digits lower bound: measure: no levels")
	require.Contains(t, out, "demo/gearbox lower bound: 160 ms of work at one thread, divided by the optimised program's 2 threads")
	require.Contains(t, out, passes.BoundDefinition)
	require.Contains(t, out, "demo/gearbox: dense1: 16 products, 7+1 rotations (n1=8), 160.0 ms (primitives)")
}
