package golden

import (
	"bytes"
	"os"
	"path/filepath"
	"regexp"
	"testing"
	"testing/fstest"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/spec"
)

var yamlBlock = regexp.MustCompile("(?s)```yaml\n(.*?)```")

// The spec shown in README.md parses and compiles, with weight files of
// the shapes it declares.
func TestReadmeSpecCompiles(t *testing.T) {
	readme, err := os.ReadFile(filepath.Join(repoRoot, "README.md"))
	require.NoError(t, err)
	m := yamlBlock.FindSubmatch(readme)
	require.NotNil(t, m, "README.md has no yaml block")
	npy := func(data []float64, shape ...int) *fstest.MapFile {
		var b bytes.Buffer
		require.NoError(t, spec.WriteNPY(&b, data, shape))
		return &fstest.MapFile{Data: b.Bytes()}
	}
	w1 := make([]float64, 16*12)
	for i := range w1 {
		w1[i] = float64(i%7-3) / 20
	}
	fsys := fstest.MapFS{
		"weights/w1.npy": npy(w1, 16, 12),
		"weights/b1.npy": npy(make([]float64, 16), 16),
	}
	g, err := spec.Parse("readme.yaml", m[1], fsys)
	require.NoError(t, err)
	_, _, err = emit.Build(g, passes.Options{}, emit.Options{Version: goldenVersion})
	require.NoError(t, err)
}
