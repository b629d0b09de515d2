package golden

import (
	"bytes"
	"flag"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/spec"
)

var update = flag.Bool("update", false, "rewrite the golden files")

// goldenVersion pins the generator version named in headers, so goldens do
// not change with every release.
const goldenVersion = "(golden)"

// repoRoot is the repository root, relative to this package.
const repoRoot = ".."

type goldenCase struct {
	name string // e.g. "demo/gearbox"
	spec string // path from the repository root, slash-separated
	bad  bool   // the case is meant to fail
}

// cases lists every spec under testdata in sorted order; those under
// testdata/bad are meant to fail.
func cases(t testing.TB) []goldenCase {
	var out []goldenCase
	err := filepath.WalkDir(filepath.Join(repoRoot, "testdata"), func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() || filepath.Ext(path) != ".yaml" {
			return nil
		}
		rel, _ := filepath.Rel(repoRoot, path)
		rel = filepath.ToSlash(rel)
		name := strings.TrimSuffix(strings.TrimPrefix(rel, "testdata/"), ".yaml")
		out = append(out, goldenCase{name: name, spec: rel, bad: strings.HasPrefix(name, "bad/")})
		return nil
	})
	require.NoError(t, err)
	sort.Slice(out, func(i, j int) bool { return out[i].name < out[j].name })
	require.NotEmpty(t, out)
	return out
}

// build runs the whole generator in memory, as `lanthorn build` does; the
// header names the real hash of the case's inputs.
func build(c goldenCase) (emit.Files, *passes.State, *ir.Graph, error) {
	path := filepath.Join(repoRoot, filepath.FromSlash(c.spec))
	g, inputs, err := spec.LoadWithFiles(path)
	if err != nil {
		return nil, nil, nil, err
	}
	sum, err := emit.InputsSHA256(os.DirFS(filepath.Dir(path)), inputs)
	if err != nil {
		return nil, nil, nil, err
	}
	files, st, err := emit.Build(g, passes.Options{}, emit.Options{SpecPath: c.spec, Version: goldenVersion, InputsSHA256: sum})
	return files, st, g, err
}

func TestGolden(t *testing.T) {
	for _, c := range cases(t) {
		t.Run(c.name, func(t *testing.T) {
			dir := filepath.Join("testdata", filepath.FromSlash(c.name))
			files, _, _, err := build(c)
			if c.bad {
				require.Error(t, err, "a spec under testdata/bad must fail")
				msg := []byte(err.Error() + "\n")
				compare(t, filepath.Join(dir, "errors.txt"), msg)
				return
			}
			require.NoError(t, err)
			want := map[string]bool{}
			for _, name := range files.Paths() {
				if strings.HasPrefix(name, "internal/runtime/") {
					continue
				}
				want[name] = true
				compare(t, filepath.Join(dir, filepath.FromSlash(name)), files[name])
			}
			// No stale golden files.
			_ = filepath.WalkDir(dir, func(path string, d fs.DirEntry, err error) error {
				if err != nil || d.IsDir() {
					return err
				}
				rel, _ := filepath.Rel(dir, path)
				if !want[filepath.ToSlash(rel)] {
					if *update {
						return os.Remove(path)
					}
					t.Errorf("stale golden file %s: the generator no longer writes it (go test ./golden -update)", path)
				}
				return nil
			})
		})
	}
}

func compare(t *testing.T, path string, got []byte) {
	t.Helper()
	if *update {
		require.NoError(t, os.MkdirAll(filepath.Dir(path), 0o755))
		require.NoError(t, os.WriteFile(path, got, 0o644))
		return
	}
	want, err := os.ReadFile(path)
	require.NoError(t, err, "missing golden file (go test ./golden -update writes it)")
	if !bytes.Equal(want, got) {
		t.Errorf("%s differs from the generator's output (review, then go test ./golden -update):\n%s", path, shortDiff(string(want), string(got)))
	}
}

// shortDiff shows the first differing lines.
func shortDiff(want, got string) string {
	w, g := strings.Split(want, "\n"), strings.Split(got, "\n")
	for i := 0; i < max(len(w), len(g)); i++ {
		var a, b string
		if i < len(w) {
			a = w[i]
		}
		if i < len(g) {
			b = g[i]
		}
		if a != b {
			return fmt.Sprintf("line %d:\n- %s\n+ %s", i+1, a, b)
		}
	}
	return "(lengths differ)"
}

// Identical input gives identical bytes.
func TestDeterministic(t *testing.T) {
	for _, c := range cases(t) {
		if c.bad {
			continue
		}
		a, _, _, err := build(c)
		require.NoError(t, err)
		b, _, _, err := build(c)
		require.NoError(t, err)
		require.Equal(t, a.Paths(), b.Paths())
		for _, p := range a.Paths() {
			require.True(t, bytes.Equal(a[p], b[p]), "%s: %s differs between two runs", c.name, p)
		}
	}
}

// The runtime copied into each program equals runtime/ byte for byte.
func TestRuntimeCopyVerbatim(t *testing.T) {
	files, err := emit.RuntimeFiles()
	require.NoError(t, err)
	entries, err := os.ReadDir(filepath.Join(repoRoot, "runtime"))
	require.NoError(t, err)
	n := 0
	for _, e := range entries {
		name := e.Name()
		if e.IsDir() || !strings.HasSuffix(name, ".go") || strings.HasSuffix(name, "_test.go") {
			continue
		}
		src, err := os.ReadFile(filepath.Join(repoRoot, "runtime", name))
		require.NoError(t, err)
		require.True(t, bytes.Equal(src, files["internal/runtime/"+name]), "internal/runtime/%s differs from runtime/%s", name, name)
		n++
	}
	require.Equal(t, n, len(files), "the copy has files runtime/ lacks")
}
