package golden

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/spec"
)

// Under a key budget of half the exact key set, the emitted demo program
// still meets its precision target encrypted (the composed rotations add
// key switches, hence noise), and the evaluation keys its keygen writes
// fit the budget.
func TestKeyBudgetEndToEnd(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs an emitted program; skipped with -short")
	}
	c := goldenCase{name: "demo/gearbox", spec: "testdata/demo/gearbox.yaml"}
	g, err := spec.Load(filepath.Join(repoRoot, filepath.FromSlash(c.spec)))
	require.NoError(t, err)
	_, exact, err := passes.Compile(g, passes.Options{})
	require.NoError(t, err)
	limit := passes.MakePlan(exact, passes.DefaultProfile()).Keys.Bytes / 2
	files, st, err := emit.Build(g, passes.Options{MaxKeyBytes: limit}, emit.Options{SpecPath: c.spec, Version: goldenVersion})
	require.NoError(t, err)
	require.NotNil(t, st.Report.Budget)
	require.Positive(t, st.Report.Budget.Added, "the budget must bite for this test to mean anything")

	dir := writeProgram(t, files)
	prog := st.Prog
	bin := filepath.Join(dir, "bin", prog.Name)
	goTool(t, dir, "build", "-o", bin, "./cmd/"+prog.Name)
	inputs := exampleInputs(t, c, g)
	var lines []string
	for _, x := range inputs {
		lines = append(lines, emitCSV(x))
	}
	require.NoError(t, os.WriteFile(filepath.Join(dir, "input.csv"), []byte(strings.Join(lines, "\n")+"\n"), 0o644))
	run(t, dir, bin, "keygen", "-dir", "keys")
	info, err := os.Stat(filepath.Join(dir, "keys", "eval", "eval.keys"))
	require.NoError(t, err)
	plan := passes.MakePlan(st, passes.DefaultProfile())
	t.Logf("evaluation keys file %d bytes, plan %d bytes, budget %d bytes", info.Size(), plan.Budget.Budgeted.Bytes, limit)
	require.Equal(t, plan.Budget.Budgeted.Bytes, info.Size(), "the plan's key file size is the file keygen writes")
	require.LessOrEqual(t, info.Size(), limit, "the keys written fit the budget")

	worst := 0.0
	for i, x := range inputs {
		ct, res := fmt.Sprintf("x%d.ct", i), fmt.Sprintf("y%d.ct", i)
		run(t, dir, bin, "encrypt", "-keys", "keys", "-in", "input.csv", "-row", strconv.Itoa(i+1), "-out", ct)
		run(t, dir, bin, "eval", "-keys", "keys/eval", "-in", ct, "-out", res)
		got := parseCSV(t, run(t, dir, bin, "decrypt", "-keys", "keys", "-in", res))
		want, err := st.Model.Reference(x)
		require.NoError(t, err)
		worst = math.Max(worst, ir.MaxAbsDiff(want, got))
	}
	bits := -math.Log2(worst)
	t.Logf("max abs error %.3g = %.1f bits (target %d)", worst, bits, g.Precision)
	require.GreaterOrEqual(t, bits, float64(g.Precision), "precision target missed under the budget")
	run(t, dir, bin, "selftest", "-n", "2")
}
