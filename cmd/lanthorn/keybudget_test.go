package main

import (
	"encoding/json"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/passes"
)

// -max-keys-mb reaches the key budget from plan, build and check: the plan
// shows both points (the exact key set and the budget's, keys and
// estimated latency), the budget is respected, one too small is an error
// naming the smallest size, and a folder built under a budget is up to
// date only for check with the same budget.
func TestKeyBudgetFlag(t *testing.T) {
	root := t.TempDir()
	spec := demoSpec(t, root)
	plan := func(args ...string) passes.Plan {
		code, stdout, stderr := runCLI(append([]string{"plan", spec, "-format", "json"}, args...)...)
		require.Equal(t, 0, code, stderr)
		var p passes.Plan
		require.NoError(t, json.Unmarshal([]byte(stdout), &p))
		return p
	}
	exact := plan()
	require.Nil(t, exact.Budget)
	limit := exact.Keys.Bytes / 2
	mb := float64(limit) / 1e6
	flag := []string{"-max-keys-mb", fmtMB(mb)}
	p := plan(flag...)
	require.NotNil(t, p.Budget)
	b := p.Budget
	require.LessOrEqual(t, p.Keys.Bytes, b.LimitBytes, "the budget is respected")
	require.Equal(t, exact.Keys.Count, b.Exact.Count)
	require.InEpsilon(t, exact.Keys.Bytes, b.Exact.Bytes, 1e-3, "file bytes: the keys and a little framing")
	require.Equal(t, exact.Keys.Rotations, b.Exact.Rotations)
	require.InDelta(t, exact.EstimateMS, b.Exact.EstimateMS, 1e-6)
	require.Equal(t, p.Keys.Count, b.Budgeted.Count)
	require.LessOrEqual(t, b.Budgeted.Bytes, b.LimitBytes)
	require.InDelta(t, p.EstimateMS, b.Budgeted.EstimateMS, 1e-6)
	require.Greater(t, b.Budgeted.EstimateMS, b.Exact.EstimateMS, "composed rotations cost time")
	require.Positive(t, b.Added)

	code, stdout, stderr := runCLI(append([]string{"plan", spec}, flag...)...)
	require.Equal(t, 0, code, stderr)
	require.Regexp(t, `key budget [0-9.]+ MB: exact key set \d+ keys, [0-9.]+ MB, est\. [0-9.]+ ms; within the budget \d+ keys, [0-9.]+ MB, est\. [0-9.]+ ms`, stdout)
	code, stdout, stderr = runCLI(append([]string{"plan", spec, "-format", "md"}, flag...)...)
	require.Equal(t, 0, code, stderr)
	require.Regexp(t, `\nKey budget [0-9.]+ MB: exact key set`, stdout)

	code, _, stderr = runCLI("plan", spec, "-max-keys-mb", "1")
	require.Equal(t, 1, code)
	require.Regexp(t, `key budget 1\.0 MB is below the smallest key set this program can use, [0-9.]+ MB \(2 keys`, stderr)
	code, _, stderr = runCLI("plan", spec, "-max-keys-mb", "-3")
	require.NotEqual(t, 0, code)
	require.Contains(t, stderr, "-max-keys-mb -3: want a size in MB")

	out := filepath.Join(root, "budget")
	code, _, stderr = runCLI(append([]string{"build", spec, "-o", out}, flag...)...)
	require.Equal(t, 0, code, stderr)
	code, stdout, stderr = runCLI(append([]string{"check", spec, "-o", out}, flag...)...)
	require.Equal(t, 0, code, "stdout:\n%s\nstderr:\n%s", stdout, stderr)
	require.Contains(t, stdout, "-max-keys-mb")
	code, stdout, _ = runCLI("check", spec, "-o", out)
	require.Equal(t, 1, code, stdout)
}

func fmtMB(mb float64) string {
	b, _ := json.Marshal(mb)
	return string(b)
}
