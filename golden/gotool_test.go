package golden

import (
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// Helpers for the tests that run the go command as a user would, with an
// environment set explicitly rather than inherited: a CI job's GOFLAGS
// (.ci/run sets -mod=readonly) or GOWORK must not leak into a user's build.

// userGoEnv is the environment of a user's go command: this process's
// environment without any Go setting, then the given ones. GOWORK=off and
// GOTOOLCHAIN=local always: no workspace, no toolchain download.
func userGoEnv(set ...string) []string {
	var env []string
	for _, kv := range os.Environ() {
		if k, _, _ := strings.Cut(kv, "="); strings.HasPrefix(k, "GO") || strings.HasPrefix(k, "CGO_") {
			if k != "GOCACHE" && k != "GOMODCACHE" && k != "GOPATH" && k != "GOROOT" {
				continue
			}
		}
		env = append(env, kv)
	}
	return append(env, append([]string{"GOWORK=off", "GOTOOLCHAIN=local", "GOFLAGS="}, set...)...)
}

// goWithEnv runs the go command in dir with exactly env and returns its
// combined output and error.
func goWithEnv(dir string, env []string, args ...string) (string, error) {
	cmd := exec.Command("go", args...)
	cmd.Dir, cmd.Env = dir, env
	out, err := cmd.CombinedOutput()
	return string(out), err
}

// mustGo is goWithEnv that fails the test on an error.
func mustGo(t *testing.T, dir string, env []string, args ...string) string {
	t.Helper()
	out, err := goWithEnv(dir, env, args...)
	require.NoError(t, err, "go %s in %s:\n%s", strings.Join(args, " "), dir, out)
	return out
}

// goEnvValue asks the go command for one of its settings.
func goEnvValue(t *testing.T, key string) string {
	t.Helper()
	out, err := exec.Command("go", "env", key).Output()
	require.NoError(t, err)
	return strings.TrimSpace(string(out))
}

// copyFolder copies a folder tree, keeping file modes.
func copyFolder(t *testing.T, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, err := filepath.Rel(src, p)
		if err != nil {
			return err
		}
		target := filepath.Join(dst, rel)
		if d.IsDir() {
			return os.MkdirAll(target, 0o755)
		}
		info, err := d.Info()
		if err != nil {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(target, b, info.Mode().Perm())
	})
	require.NoError(t, err)
}
