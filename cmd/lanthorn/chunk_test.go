package main

import (
	"encoding/json"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/passes"
)

// -chunk-slots reaches the lowering from plan, build and check: the plan
// counts the ciphertexts of a split input and output, a folder built with
// the flag is up to date only for check with the same flag, and a bad value
// is a usage error.
func TestChunkSlotsFlag(t *testing.T) {
	root := t.TempDir()
	spec := demoSpec(t, root) // 10 inputs
	code, stdout, stderr := runCLI("plan", spec, "-format", "json", "-chunk-slots", "4")
	require.Equal(t, 0, code, stderr)
	var p passes.Plan
	require.NoError(t, json.Unmarshal([]byte(stdout), &p))
	require.Equal(t, 3, p.UploadCts, "10 inputs in chunks of 4")
	require.Equal(t, 1, p.DownloadCts)
	code, stdout, stderr = runCLI("plan", spec, "-chunk-slots", "4")
	require.Equal(t, 0, code, stderr)
	require.Contains(t, stdout, "in 3 ciphertexts")

	out := filepath.Join(root, "chunked")
	code, _, stderr = runCLI("build", spec, "-o", out, "-chunk-slots", "4")
	require.Equal(t, 0, code, stderr)
	code, stdout, stderr = runCLI("check", spec, "-o", out, "-chunk-slots", "4")
	require.Equal(t, 0, code, "stdout:\n%s\nstderr:\n%s", stdout, stderr)
	require.Contains(t, stdout, "-chunk-slots 4")
	code, stdout, _ = runCLI("check", spec, "-o", out)
	require.Equal(t, 1, code, stdout)

	code, _, stderr = runCLI("plan", spec, "-chunk-slots", "-2")
	require.NotEqual(t, 0, code)
	require.Contains(t, stderr, "-chunk-slots -2: want 0 (no cap) to 16384 values")
}
