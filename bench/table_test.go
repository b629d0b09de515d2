package bench

import (
	"fmt"
	"io"
	"slices"
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
		line := func(cells ...string) {
			fmt.Fprintln(tw, name+"\t"+strings.Join(cells, "\t")+"\t")
			name = ""
		}
		for _, v := range append(slices.Clone(r.opt), r.naive) {
			var cells []string
			if res := v.result; res != nil {
				cells = []string{v.variant, ms(res.MedianMS), ms(res.MinMS) + "–" + ms(res.MaxMS), ms(v.plan.EstimateMS),
					mb(res.KeysMB), mb(res.PeakMB), fmt.Sprint(res.Threads), fmt.Sprint(res.Runs)}
			} else {
				what := "not measured*"
				if v.failed {
					what = "failed*"
				}
				cells = []string{v.variant, what, "", ms(v.plan.EstimateMS), mb(v.planKeys) + " (plan)", "", fmt.Sprint(v.threads), ""}
				notes = append(notes, fmt.Sprintf("* %s %s on %d threads: %s", r.name, v.variant, v.threads, v.skipped))
			}
			if v.variant == "optimised" {
				vsNaive := "–"
				if v.threads == r.naive.threads {
					vsNaive = ratio(v.result, r.naive.result)
				}
				cells = append(cells, vsNaive, boundRatio(v, r.bound))
			} else {
				cells = append(cells, "", "")
			}
			line(cells...)
		}
		if r.bound == nil {
			line("lower bound", "not computed*", "", "", "", "", "", "", "", "")
			notes = append(notes, fmt.Sprintf("* %s lower bound: %v", r.name, r.boundErr))
			continue
		}
		for _, v := range r.opt {
			line("lower bound", ms(boundMS(r.bound, v.threads)), "", "", "", "", fmt.Sprint(v.threads), "", "", "")
		}
	}
	tw.Flush()
	fmt.Fprintf(w, "\nopt/naive and opt/bound are ratios of medians measured in this run (below 1: the optimised program is faster);\n")
	fmt.Fprintf(w, "opt/naive compares the two programs at the same thread count. The lower bound at T threads is the work priced at\n")
	fmt.Fprintf(w, "one thread divided by T (perfect parallelism).\n")
	fmt.Fprintf(w, "eval keys MB: the evaluation keys as the program made them (\"(plan)\": the planner's figure). peak MB: the program's\n")
	fmt.Fprintf(w, "peak resident memory, as its bench command reports it.\n")
	fmt.Fprintf(w, "naive programs whose planned keys exceed %.0f MB are not run; one planned above the -slow-ms limit is timed once.\n", budgetMB)
	for _, n := range notes {
		fmt.Fprintln(w, n)
	}
	fmt.Fprintf(w, "\n%s\n", passes.BoundDefinition)
	fmt.Fprintf(w, "The primitives: each the smaller of two medians (of -op-reps runs), measured with lattigo at the optimised program's\n")
	fmt.Fprintf(w, "parameters just before and just after its runs.\n")
	for _, r := range rows {
		if r.bound != nil {
			fmt.Fprintf(w, "  %s: %.1f ms of work at one thread: %s (%s)\n", r.name, r.bound.MS, r.bound, r.ops)
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

func boundRatio(v variantRow, b *passes.Bound) string {
	if v.result == nil || b == nil {
		return "–"
	}
	return fmt.Sprintf("%.3g×", v.result.MedianMS/boundMS(b, v.threads))
}

// The table shows every variant of every model, the ratios of measured
// medians, and says plainly which figures were not measured and why.
func TestTable(t *testing.T) {
	plan := func(estMS float64, keys int64, count int) *passes.Plan {
		return &passes.Plan{EstimateMS: estMS, Keys: passes.PlanKeys{Bytes: keys, Count: count}}
	}
	gear := plan(440, 188e6, 8)
	digits := plan(1000, 671e6, 61)
	rows := []modelRow{
		{name: "demo/gearbox",
			opt: []variantRow{
				{variant: "optimised", threads: 1, plan: gear, planKeys: 188, result: &benchResult{Threads: 1, Runs: 7, MedianMS: 180, MinMS: 170, MaxMS: 190, KeysMB: 190, PeakMB: 380}},
				{variant: "optimised", threads: 2, plan: gear, planKeys: 188, result: &benchResult{Threads: 2, Runs: 7, MedianMS: 100, MinMS: 90, MaxMS: 120, KeysMB: 190, PeakMB: 400}},
			},
			naive: variantRow{variant: "naive", threads: 2, plan: plan(1000, 377e6, 16), planKeys: 377, result: &benchResult{Threads: 2, Runs: 3, MedianMS: 400, MinMS: 390, MaxMS: 410, KeysMB: 380, PeakMB: 700}},
			bound: &passes.Bound{MS: 160, Layers: []passes.BoundLayer{{Layer: "dense1", Diagonals: 16, Split: 8, BabySteps: 7, GiantSteps: 1, MS: 160}}}, ops: "primitives"},
		{name: "mnist/digits",
			opt:      []variantRow{{variant: "optimised", threads: 2, plan: digits, planKeys: 671, result: &benchResult{Threads: 2, Runs: 7, MedianMS: 300, MinMS: 290, MaxMS: 310, KeysMB: 670, PeakMB: 1200}}},
			naive:    variantRow{variant: "naive", threads: 2, plan: plan(47000, 39482e6, 3586), planKeys: 39482, skipped: "not measured: keys above the budget"},
			boundErr: fmt.Errorf("measure: no levels")},
		{name: "models/tiny",
			opt:   []variantRow{{variant: "optimised", threads: 2, plan: plan(10, 1e6, 2), planKeys: 1, result: &benchResult{Threads: 2, Runs: 7, MedianMS: 5, MinMS: 4, MaxMS: 6, KeysMB: 1, PeakMB: 50}}},
			naive: variantRow{variant: "naive", threads: 2, plan: plan(20, 2e6, 3), planKeys: 2, failed: true, skipped: "failed: tiny bench: exit status 1: warm-up result differs"},
			bound: &passes.Bound{MS: 4}},
	}
	var sb strings.Builder
	writeTable(&sb, rows, 6000)
	out := sb.String()
	t.Log("\n" + out)
	lines := strings.Split(out, "\n")
	require.Regexp(t, `^\s*model\s+variant\s+median ms`, lines[0])
	require.Regexp(t, `demo/gearbox\s+optimised\s+180\s+170–190\s+440\s+190.0\s+380.0\s+1\s+7\s+–\s+1.12×\s*$`, lines[1], "against 160 ms of work on one thread")
	require.Regexp(t, `^\s+optimised\s+100\s+90.0–120\s+440\s+190.0\s+400.0\s+2\s+7\s+0.25×\s+1.25×\s*$`, lines[2], "against the naive program at 2 threads and 160 ms of work over 2 threads")
	require.Regexp(t, `^\s+naive\s+400\s+390–410\s+1000\s+380.0\s+700.0\s+2\s+3\s*$`, lines[3])
	require.Regexp(t, `^\s+lower bound\s+160\s+1\s*$`, lines[4])
	require.Regexp(t, `^\s+lower bound\s+80.0\s+2\s*$`, lines[5])
	require.Regexp(t, `mnist/digits\s+optimised\s+300\s+290–310\s+1000\s+670.0\s+1200.0\s+2\s+7\s+–\s+–`, lines[6])
	require.Regexp(t, `naive\s+not measured\*\s+47000\s+39482.0 \(plan\)\s+2\s*$`, lines[7])
	require.Regexp(t, `lower bound\s+not computed\*`, lines[8])
	require.Contains(t, out, "* mnist/digits naive on 2 threads: not measured: keys above the budget")
	require.Contains(t, out, "* mnist/digits lower bound: measure: no levels")
	require.Regexp(t, `^\s+naive\s+failed\*\s+20.0\s+2.0 \(plan\)\s+2\s*$`, lines[10])
	require.Contains(t, out, "* models/tiny naive on 2 threads: failed: tiny bench: exit status 1: warm-up result differs")
	require.Contains(t, out, passes.BoundDefinition)
	require.Contains(t, out, "demo/gearbox: 160.0 ms of work at one thread: dense1: 16 products, 7+1 rotations (n1=8), 160.0 ms (primitives)")
}
