package main

import (
	"encoding/json"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/passes"
)

// -objective keys makes plan and build choose the smallest evaluation keys
// (on the demo, fewer than the latency objective's keys, at no less
// estimated latency); check compares with what build -objective keys
// writes; an unknown objective is an error that names the flag.
func TestObjectiveFlag(t *testing.T) {
	root := t.TempDir()
	spec := demoSpec(t, root)
	plan := func(args ...string) passes.Plan {
		code, stdout, stderr := runCLI(append([]string{"plan", spec, "-format", "json"}, args...)...)
		require.Equal(t, 0, code, stderr)
		var p passes.Plan
		require.NoError(t, json.Unmarshal([]byte(stdout), &p))
		return p
	}
	lat, keys := plan(), plan("-objective", "keys")
	require.Less(t, keys.Keys.Bytes, lat.Keys.Bytes, "the demo has a smaller key set at some latency")
	require.GreaterOrEqual(t, keys.EstimateMS, lat.EstimateMS)
	require.NotEmpty(t, lat.Choices)
	require.Equal(t, lat, plan("-objective", "latency"))

	code, _, stderr := runCLI("plan", spec, "-objective", "speed")
	require.Equal(t, 1, code)
	require.Contains(t, stderr, `-objective: unknown objective "speed" (want latency or keys)`)

	out := filepath.Join(root, "keys")
	code, _, stderr = runCLI("build", spec, "-o", out, "-objective", "keys")
	require.Equal(t, 0, code, stderr)
	code, stdout, stderr := runCLI("check", spec, "-o", out, "-objective", "keys")
	require.Equal(t, 0, code, "stdout:\n%s\nstderr:\n%s", stdout, stderr)
	require.Contains(t, stdout, "-objective keys")
	code, _, _ = runCLI("check", spec, "-o", out, "-objective", "speed")
	require.Equal(t, 2, code)
}
