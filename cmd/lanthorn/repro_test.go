package main

import (
	"bytes"
	"go/ast"
	"go/parser"
	"go/token"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/spec"
)

// TestHelperProcess is not a test: other tests run the test binary with it
// to get the lanthorn command as a child process, with a working directory
// and an environment of their choosing.
func TestHelperProcess(t *testing.T) {
	if os.Getenv("LANTHORN_HELPER_PROCESS") != "1" {
		t.Skip("runs lanthorn for other tests")
	}
	args := os.Args
	for i, a := range args {
		if a == "--" {
			args = args[i+1:]
			break
		}
	}
	os.Exit(run(args, os.Stdout, os.Stderr))
}

// runChild runs lanthorn in dir with exactly the environment env.
func runChild(t *testing.T, dir string, env []string, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	cmd := exec.Command(os.Args[0], append([]string{"-test.run=^TestHelperProcess$", "--"}, args...)...)
	cmd.Dir = dir
	cmd.Env = append(env, "LANTHORN_HELPER_PROCESS=1")
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	if exit, ok := err.(*exec.ExitError); ok {
		return exit.ExitCode(), out.String(), errb.String()
	}
	require.NoError(t, err)
	return 0, out.String(), errb.String()
}

// Builds on "different machines" are byte-identical: the spec tree at
// different temporary paths, lanthorn run from different working
// directories with relative and absolute paths, and different HOME,
// TMPDIR, locale, time zone, user and GOMAXPROCS. The output names no
// path, user or setting of any of them. The header's first line is the
// pattern that go/ast.IsGenerated (Go standard library) recognises, the
// second the inputs hash, the third the command that regenerates the
// folder, which one of the runs is.
func TestBuildReproducible(t *testing.T) {
	path := "PATH=" + os.Getenv("PATH")
	type machine struct {
		name     string
		root     string // where the spec tree lies: ROOT/models/gearbox.yaml, output ROOT/models/gen
		cwd      func(root string) string
		relative bool // paths relative to cwd, else absolute
		env      []string
	}
	home1, home2 := t.TempDir(), t.TempDir()
	machines := []machine{
		{"relative paths, C locale", filepath.Join(t.TempDir(), "a"), func(root string) string { return root }, true,
			[]string{path, "HOME=" + home1, "TMPDIR=" + home1, "LANG=C", "LC_ALL=C", "TZ=UTC", "USER=alice", "GOMAXPROCS=1"}},
		{"absolute paths from elsewhere, other locale", filepath.Join(t.TempDir(), "deeper", "still", "b"), func(string) string { return home2 }, false,
			[]string{path, "HOME=" + home2, "TMPDIR=" + home2, "LANG=tr_TR.UTF-8", "LC_ALL=de_DE.UTF-8", "TZ=Asia/Kathmandu", "USER=bob", "GOMAXPROCS=2", "PWD=/nonexistent"}},
		{"the regenerate line, in the spec's folder, bare environment", filepath.Join(t.TempDir(), "c"), func(root string) string { return filepath.Join(root, "models") }, true,
			[]string{path}},
	}
	var first map[string]fileState
	var firstRoot string
	for _, m := range machines {
		spec := demoSpec(t, filepath.Join(m.root, "models"))
		out := filepath.Join(m.root, "models", "gen")
		cwd := m.cwd(m.root)
		specArg, outArg := spec, out+string(filepath.Separator)
		if m.relative {
			var err error
			specArg, err = filepath.Rel(cwd, spec)
			require.NoError(t, err)
			outArg, err = filepath.Rel(cwd, out)
			require.NoError(t, err)
		}
		code, stdout, stderr := runChild(t, cwd, m.env, "build", specArg, "-o", outArg)
		require.Equal(t, 0, code, "%s: %s%s", m.name, stdout, stderr)
		got := snapshot(t, out)
		for name, f := range got {
			for _, leak := range []string{m.root, home1, home2} {
				require.NotContains(t, f.data, leak, "%s: %s names a machine path", m.name, name)
			}
		}
		if first == nil {
			first, firstRoot = got, m.root
			checkHeaders(t, filepath.Join(m.root, "models"), out)
			continue
		}
		require.Equal(t, len(first), len(got), "%s: another file set", m.name)
		for name, f := range first {
			require.Equal(t, f.data, got[name].data, "%s: %s differs from the first build", m.name, name)
		}
	}
	// check agrees from anywhere: here with absolute paths from another folder.
	code, stdout, stderr := runChild(t, home2, []string{path}, "check",
		filepath.Join(firstRoot, "models", "gearbox.yaml"), "-o", filepath.Join(firstRoot, "models", "gen"))
	require.Equal(t, 0, code, stdout+stderr)
}

// checkHeaders checks every generated Go file's three header lines.
func checkHeaders(t *testing.T, specDir, out string) {
	t.Helper()
	g, inputs, err := spec.LoadWithFiles(filepath.Join(specDir, "gearbox.yaml"))
	require.NoError(t, err)
	require.Equal(t, "gearbox", g.Name)
	require.Len(t, inputs, 7, "the spec and its six weight files")
	sum, err := emit.InputsSHA256(os.DirFS(specDir), inputs)
	require.NoError(t, err)
	if _, err := exec.LookPath("sha256sum"); err == nil {
		// The recipe the header documents, with GNU coreutils.
		cmd := exec.Command("sh", "-c", `sha256sum "$@" | sha256sum`, "sh")
		cmd.Args = append(cmd.Args, inputs...)
		cmd.Dir = specDir
		b, err := cmd.Output()
		require.NoError(t, err)
		require.Equal(t, strings.Fields(string(b))[0], sum)
	}
	want := []string{
		"// Code generated by lanthorn " + emit.Version + " from gearbox.yaml. DO NOT EDIT.",
		"// Inputs SHA-256: " + sum + " (the spec and the weight files it reads)",
		"// Regenerate with: lanthorn build gearbox.yaml -o gen",
	}
	n := 0
	err = filepath.WalkDir(out, func(p string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() || filepath.Ext(p) != ".go" || strings.Contains(filepath.ToSlash(p), "/internal/runtime/") {
			return err
		}
		n++
		b, err := os.ReadFile(p)
		require.NoError(t, err)
		lines := strings.SplitN(string(b), "\n", 4)
		require.Equal(t, want, lines[:3], p)
		f, err := parser.ParseFile(token.NewFileSet(), p, b, parser.ParseComments|parser.PackageClauseOnly)
		require.NoError(t, err)
		require.True(t, ast.IsGenerated(f), "%s: go/ast.IsGenerated does not recognise the header", p)
		require.True(t, generatedHeader.MatchString(lines[0]), "build and check would not own %s", p)
		return nil
	})
	require.NoError(t, err)
	require.Equal(t, 5, n, "params, weights, model, reference, cmd/gearbox/main")
}

// The embedded demo's header names the same inputs hash as a build of the
// demo spec on disk.
func TestDemoInputsHash(t *testing.T) {
	sum, err := demoInputsSHA256()
	require.NoError(t, err)
	dir := filepath.Join("..", "..", "testdata", "demo")
	_, inputs, err := spec.LoadWithFiles(filepath.Join(dir, "gearbox.yaml"))
	require.NoError(t, err)
	want, err := emit.InputsSHA256(os.DirFS(dir), inputs)
	require.NoError(t, err)
	require.Equal(t, want, sum)
}
