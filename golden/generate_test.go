package golden

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// generateLine is the directive of the README's "in a build" section.
const generateLine = "//go:generate go run github.com/lanthorn/lanthorn/cmd/lanthorn build spec.yaml -o gen"

// A user's module generates the program from a //go:generate line, as the
// README shows: lanthorn is added as a tool of the module (go get -tool),
// go generate ./... writes gen/, lanthorn check passes, a second go
// generate changes nothing, and the program in gen/ builds as a module of
// its own, with no replace line. A weight change makes check fail with the
// changed hash lines, and go generate brings the folder up to date again.
//
// lanthorn is not published, so the temporary module reaches this
// repository through a replace line in its own go.mod (the user's module,
// not the emitted program), and the go command runs with GOPROXY=off: the
// module cache is the only source of modules, so nothing is fetched and the
// proxy is never asked about the unpublished module.
func TestGoGenerate(t *testing.T) {
	if testing.Short() {
		t.Skip("runs go generate and go build in a temporary module; skipped with -short")
	}
	root, err := filepath.Abs(repoRoot)
	require.NoError(t, err)
	mod := t.TempDir()
	copyFolder(t, filepath.Join(root, "testdata", "demo", "weights"), filepath.Join(mod, "weights"))
	specData, err := os.ReadFile(filepath.Join(root, "testdata", "demo", "gearbox.yaml"))
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(filepath.Join(mod, "spec.yaml"), specData, 0o644))
	require.NoError(t, os.WriteFile(filepath.Join(mod, "go.mod"), []byte("module example.com/turbines\n\ngo 1.26\n\n"+
		"replace github.com/lanthorn/lanthorn => "+filepath.ToSlash(root)+"\n"), 0o644))
	require.NoError(t, os.WriteFile(filepath.Join(mod, "turbines.go"), []byte(
		"// Package turbines keeps the encrypted gearbox model next to its spec.\npackage turbines\n\n"+generateLine+"\n"), 0o644))

	// The user's go.sum starts as lanthorn's own: checksums are then known
	// locally, and the checksum database (not reachable from every build
	// machine while GOPROXY is off) is never asked.
	sums, err := os.ReadFile(filepath.Join(root, "go.sum"))
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(filepath.Join(mod, "go.sum"), sums, 0o644))

	env := userGoEnv("GOPROXY=off")
	mustGo(t, mod, env, "get", "-tool", "github.com/lanthorn/lanthorn/cmd/lanthorn@v0.0.0")
	mustGo(t, mod, env, "mod", "tidy")
	out := mustGo(t, mod, env, "generate", "./...")
	require.Contains(t, out, "wrote gen: ")

	check := func(args ...string) (string, int) {
		cmd := exec.Command("go", args...)
		cmd.Dir, cmd.Env = mod, env
		b, err := cmd.CombinedOutput()
		if exit, ok := err.(*exec.ExitError); ok {
			return string(b), exit.ExitCode()
		}
		require.NoError(t, err, "%s", b)
		return string(b), 0
	}
	for _, lanthorn := range [][]string{{"tool", "lanthorn"}, {"run", "github.com/lanthorn/lanthorn/cmd/lanthorn"}} {
		out, code := check(append(lanthorn, "check", "spec.yaml", "-o", "gen")...)
		require.Equal(t, 0, code, "go %s check:\n%s", strings.Join(lanthorn, " "), out)
		require.Contains(t, out, "gen is up to date")
	}
	out = mustGo(t, mod, env, "generate", "./...")
	require.Contains(t, out, "(0 changed)", "a second go generate must change nothing")

	model, err := os.ReadFile(filepath.Join(mod, "gen", "model.go"))
	require.NoError(t, err)
	require.Contains(t, string(model), "// Regenerate with: lanthorn build spec.yaml -o gen\n", "the regenerate line is the go:generate command")
	gomod, err := os.ReadFile(filepath.Join(mod, "gen", "go.mod"))
	require.NoError(t, err)
	require.NotContains(t, string(gomod), "replace", "the emitted program never has a replace line")
	mustGo(t, filepath.Join(mod, "gen"), userGoEnv("GOPROXY=off", "GOFLAGS=-mod=readonly"), "build", "./...")

	// A weight changes: check names the blob and the hash lines, and exits 1.
	w := filepath.Join(mod, "weights", "dense3_b.npy")
	b, err := os.ReadFile(w)
	require.NoError(t, err)
	b[len(b)-8] ^= 1 // the lowest mantissa bit of the last bias
	require.NoError(t, os.WriteFile(w, b, 0o644))
	out, code := check("tool", "lanthorn", "check", "spec.yaml", "-o", "gen")
	require.Equal(t, 1, code, out)
	for _, want := range []string{"stale   weights.bin", "stale   weights.go", "stale   model.go", "-// Inputs SHA-256: ", "+// Inputs SHA-256: ", "Run lanthorn build spec.yaml -o gen"} {
		require.Contains(t, out, want)
	}
	mustGo(t, mod, env, "generate", "./...")
	out, code = check("tool", "lanthorn", "check", "spec.yaml", "-o", "gen")
	require.Equal(t, 0, code, out)
}
