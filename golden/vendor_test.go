package golden

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
)

// An emitted program vendors cleanly and then builds and passes its
// self-test with nothing but its folder, as the README's air-gapped steps
// say: go mod vendor once where the module cache is available, copy the
// folder, then go build with GOFLAGS=-mod=vendor, GOPROXY=off and an empty
// module cache. -trimpath keeps the folder's path out of the binary (and
// lets the build cache serve a second run). The environment of the offline build is set in full (GOENV
// off, so no go env file adds flags; no GOFLAGS from a CI job), except the
// build cache, which holds compiled packages but no sources and is kept
// only to save compile time. The smallest testdata model keeps it short.
func TestVendoredBuildOffline(t *testing.T) {
	if testing.Short() {
		t.Skip("vendors and builds an emitted program; skipped with -short")
	}
	var c goldenCase
	for _, k := range cases(t) {
		if k.name == "models/pinned" {
			c = k
		}
	}
	require.NotEmpty(t, c.name, "testdata/models/pinned.yaml is gone: pick another small model")
	files, st, _, err := build(c)
	require.NoError(t, err)
	name := st.Prog.Name
	online := writeProgram(t, files)
	mustGo(t, online, userGoEnv(), "mod", "vendor")
	_, err = os.Stat(filepath.Join(online, "vendor", "modules.txt"))
	require.NoError(t, err)
	for _, f := range []string{"go.mod", "go.sum"} {
		b, err := os.ReadFile(filepath.Join(online, f))
		require.NoError(t, err)
		require.True(t, bytes.Equal(files[f], b), "go mod vendor changed %s: the emitted module files are not tidy", f)
	}

	// The air-gapped machine: a copy of the folder, an empty module cache.
	airgap := filepath.Join(t.TempDir(), name)
	copyFolder(t, online, airgap)
	empty := t.TempDir()
	modcache := filepath.Join(empty, "modcache")
	require.NoError(t, os.Mkdir(modcache, 0o755))
	env := []string{
		"PATH=" + os.Getenv("PATH"),
		"HOME=" + empty,
		"TMPDIR=" + os.TempDir(),
		"GOENV=off",
		"GOFLAGS=-mod=vendor",
		"GOPROXY=off",
		"GOSUMDB=off",
		"GOMODCACHE=" + modcache,
		"GOPATH=" + filepath.Join(empty, "gopath"),
		"GOCACHE=" + goEnvValue(t, "GOCACHE"),
		"GOWORK=off",
		"GOTOOLCHAIN=local",
	}
	bin := filepath.Join("bin", name)
	mustGo(t, airgap, env, "build", "-trimpath", "-o", bin, "./cmd/"+name)
	out := run(t, airgap, filepath.Join(airgap, bin), "selftest", "-n", "2")
	t.Logf("offline self-test:\n%s", out)
	left, err := os.ReadDir(modcache)
	require.NoError(t, err)
	require.Empty(t, left, "the offline build put modules in the module cache")
}
