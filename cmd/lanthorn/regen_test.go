package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// The regenerate line of every emitted file repeats the flags that shaped
// the program, so that running it (here as check, from the spec's folder,
// as the line says) finds the folder up to date; without them it would not.
func TestRegenerateLineRepeatsFlags(t *testing.T) {
	specDir, err := filepath.Abs("../../testdata/demo")
	require.NoError(t, err)
	out := filepath.Join(t.TempDir(), "gen")
	code, _, stderr := runCLI("build", filepath.Join(specDir, "gearbox.yaml"), "-o", out,
		"-module", "example.com/gearbox", "-objective", "keys", "-max-keys-mb", "150.5")
	require.Equal(t, 0, code, stderr)
	b, err := os.ReadFile(filepath.Join(out, "model.go"))
	require.NoError(t, err)
	lines := strings.Split(string(b), "\n")
	const prefix = "// Regenerate with: lanthorn "
	require.True(t, strings.HasPrefix(lines[2], prefix), lines[2])
	args := strings.Fields(strings.TrimPrefix(lines[2], prefix))
	require.Equal(t, []string{"-module", "example.com/gearbox", "-objective", "keys", "-max-keys-mb", "150.5"}, args[4:])

	// The line runs in the spec's folder; its paths are relative to it.
	wd, err := os.Getwd()
	require.NoError(t, err)
	require.NoError(t, os.Chdir(specDir))
	t.Cleanup(func() { _ = os.Chdir(wd) })
	args[0] = "check"
	code, stdout, stderr := runCLI(args...)
	require.Equal(t, 0, code, "%s\n%s", stdout, stderr)
	code, _, _ = runCLI("check", args[1], "-o", args[3])
	require.Equal(t, 1, code, "without the flags the program differs")
}
