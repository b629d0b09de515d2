package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/passes"
)

// -naive reaches the naive lowering from plan, build and check: its plan
// has one rotation per diagonal, hence more rotations than the optimised
// plan and no hoisted ones; a folder built with -naive is up to date for
// check -naive and stale for plain check.
func TestNaiveFlag(t *testing.T) {
	root := t.TempDir()
	spec := demoSpec(t, root)
	plan := func(args ...string) passes.Plan {
		code, stdout, stderr := runCLI(append([]string{"plan", spec, "-format", "json"}, args...)...)
		require.Equal(t, 0, code, stderr)
		var p passes.Plan
		require.NoError(t, json.Unmarshal([]byte(stdout), &p))
		return p
	}
	opt, naive := plan(), plan("-naive")
	require.Greater(t, naive.Total.Rotations, opt.Total.Rotations)
	require.Greater(t, naive.Total.Rescales, opt.Total.Rescales, "a rescale after every product")
	require.Equal(t, naive.Params.Depth, opt.Params.Depth)
	for _, l := range naive.Layers {
		if strings.HasPrefix(l.Kind, "dense") {
			require.Contains(t, l.Kind, "naive: one rotation per diagonal")
		}
	}

	out := filepath.Join(root, "naive")
	code, _, stderr := runCLI("build", spec, "-o", out, "-naive")
	require.Equal(t, 0, code, stderr)
	code, stdout, stderr := runCLI("check", spec, "-o", out, "-naive")
	require.Equal(t, 0, code, "stdout:\n%s\nstderr:\n%s", stdout, stderr)
	require.Contains(t, stdout, "-naive")
	code, stdout, _ = runCLI("check", spec, "-o", out)
	require.Equal(t, 1, code, stdout)
	require.Contains(t, stdout, "stale   model.go")
}
