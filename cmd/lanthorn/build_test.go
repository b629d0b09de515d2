package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"
)

// A second build with the same inputs changes nothing: every file keeps its
// bytes and modification time, no temporary file is left, and build says
// 0 changed. The times are first set far in the past, so that a rewrite
// could not hide inside the file system's timestamp resolution.
func TestBuildTwiceChangesNothing(t *testing.T) {
	root := t.TempDir()
	spec := demoSpec(t, root)
	out := filepath.Join(root, "gen")
	code, stdout, stderr := runCLI("build", spec, "-o", out)
	require.Equal(t, 0, code, stderr)
	require.Regexp(t, `^wrote .*gen: \d+ files \((\d+) changed\)\n$`, stdout)
	addUserFiles(t, out)

	past := time.Date(2001, 2, 3, 4, 5, 6, 0, time.UTC)
	before := snapshot(t, out)
	for name := range before {
		require.NoError(t, os.Chtimes(filepath.Join(out, filepath.FromSlash(name)), past, past))
	}
	before = snapshot(t, out)

	code, stdout, stderr = runCLI("build", spec, "-o", out)
	require.Equal(t, 0, code, stderr)
	require.Contains(t, stdout, "(0 changed)")
	require.Empty(t, stderr)
	after := snapshot(t, out)
	require.Equal(t, len(before), len(after), "files appeared or vanished")
	for name, b := range before {
		a, ok := after[name]
		require.True(t, ok, "%s vanished", name)
		require.Equal(t, b.data, a.data, "%s changed", name)
		require.True(t, b.mtime.Equal(a.mtime), "%s was rewritten: mtime %v, was %v", name, a.mtime, b.mtime)
	}
}

// A changed input rewrites only the files whose bytes change, each by a
// rename (no temporary file stays behind).
func TestBuildRewritesOnlyChangedFiles(t *testing.T) {
	root := t.TempDir()
	spec := demoSpec(t, root)
	out := filepath.Join(root, "gen")
	code, _, stderr := runCLI("build", spec, "-o", out)
	require.Equal(t, 0, code, stderr)
	before := snapshot(t, out)

	// Another module path changes every Go file that imports the runtime
	// but neither the weights nor the runtime copy.
	code, stdout, stderr := runCLI("build", spec, "-o", out, "-module", "example.com/fleet/gearbox")
	require.Equal(t, 0, code, stderr)
	after := snapshot(t, out)
	require.Equal(t, len(before), len(after))
	changed := 0
	for name, b := range before {
		if after[name].data != b.data {
			changed++
			require.False(t, strings.HasPrefix(name, "internal/runtime/") || name == "weights.bin", "%s changed", name)
		}
		require.False(t, strings.Contains(name, ".tmp"), "temporary file %s left behind", name)
	}
	require.Positive(t, changed)
	require.Contains(t, stdout, "(")
	require.Contains(t, stdout, " changed)")
}

// Files that an earlier build wrote and this one does not are removed (a
// renamed model's command, a temporary file an interrupted build left);
// nothing without lanthorn's header is, and an extra runtime file is kept
// with a warning.
func TestBuildRemovesStaleGeneratedFiles(t *testing.T) {
	root := t.TempDir()
	spec := demoSpec(t, root)
	out := filepath.Join(root, "gen")
	code, _, stderr := runCLI("build", spec, "-o", out)
	require.Equal(t, 0, code, stderr)
	addUserFiles(t, out)
	model, err := os.ReadFile(filepath.Join(out, "model.go"))
	require.NoError(t, err)
	writeFile(t, out, ".model.go.tmp123456", string(model))
	writeFile(t, out, "internal/runtime/retired.go", "package runtime\n")

	// Renaming the model renames its command: cmd/gearbox → cmd/turbine.
	b, err := os.ReadFile(spec)
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(spec, []byte(strings.Replace(string(b), "model: gearbox", "model: turbine", 1)), 0o644))
	code, stdout, stderr := runCLI("build", spec, "-o", out)
	require.Equal(t, 0, code, stderr)
	require.Contains(t, stdout, "2 removed: .model.go.tmp123456, cmd/gearbox/main.go")
	require.Contains(t, stderr, "warning: internal/runtime/retired.go")

	for _, gone := range []string{".model.go.tmp123456", "cmd/gearbox/main.go"} {
		_, err := os.Stat(filepath.Join(out, filepath.FromSlash(gone)))
		require.True(t, os.IsNotExist(err), "%s should be removed", gone)
	}
	_, err = os.Stat(filepath.Join(out, "cmd", "turbine", "main.go"))
	require.NoError(t, err)
	// cmd/gearbox still holds the user's README, so it stays.
	requireUserFiles(t, out)
	_, err = os.Stat(filepath.Join(out, "internal", "runtime", "retired.go"))
	require.NoError(t, err, "a file without the header is never removed")

	// Now only the retired runtime file stands between the folder and check.
	code, stdout, _ = runCLI("check", spec, "-o", out)
	require.Equal(t, 1, code)
	require.Contains(t, stdout, "1 extra")
	require.NoError(t, os.Remove(filepath.Join(out, "internal", "runtime", "retired.go")))
	code, stdout, stderr = runCLI("check", spec, "-o", out)
	require.Equal(t, 0, code, stdout+stderr)
}

// A folder emptied by the removal goes too.
func TestBuildRemovesEmptiedFolders(t *testing.T) {
	root := t.TempDir()
	spec := demoSpec(t, root)
	out := filepath.Join(root, "gen")
	code, _, stderr := runCLI("build", spec, "-o", out)
	require.Equal(t, 0, code, stderr)
	b, err := os.ReadFile(spec)
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(spec, []byte(strings.Replace(string(b), "model: gearbox", "model: turbine", 1)), 0o644))
	code, _, stderr = runCLI("build", spec, "-o", out)
	require.Equal(t, 0, code, stderr)
	_, err = os.Stat(filepath.Join(out, "cmd", "gearbox"))
	require.True(t, os.IsNotExist(err), "cmd/gearbox should be gone")
	_, err = os.Stat(filepath.Join(out, "cmd"))
	require.NoError(t, err)
}
