package golden

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/spec"
)

// A program whose input, hidden layer and output all span several
// ciphertexts (chunks of 8 asked with Options.ChunkSlots) builds on its own
// and runs encrypt → eval → decrypt through its command line, each file
// holding several ciphertexts, within its precision target of the float64
// reference. The wide testdata model covers the case forced by the ring;
// this one covers output chunks and activations on several ciphertexts.
func TestChunkedEndToEnd(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs an emitted program; skipped with -short")
	}
	dir := t.TempDir()
	specPath := filepath.Join(dir, "chunky.yaml")
	require.NoError(t, os.WriteFile(specPath, []byte(chunkySpec()), 0o644))
	g, err := spec.Load(specPath)
	require.NoError(t, err)
	files, st, err := emit.Build(g, passes.Options{ChunkSlots: 8}, emit.Options{SpecPath: "chunky.yaml", Version: goldenVersion})
	require.NoError(t, err)
	prog := st.Prog
	require.Equal(t, 8, prog.Period)
	require.Equal(t, 2, prog.Input.Count())
	require.Equal(t, 3, prog.Output.Count())

	out := writeProgram(t, files)
	bin := filepath.Join(out, "bin", prog.Name)
	goTool(t, out, "build", "-o", bin, "./cmd/"+prog.Name)
	r := rand.New(rand.NewPCG(8, 8))
	var inputs [][]float64
	var lines []string
	for range 2 {
		x := make([]float64, g.Input.Size)
		for i := range x {
			x[i] = math.Round((2*r.Float64()-1)*1e4) / 1e4
		}
		inputs = append(inputs, x)
		lines = append(lines, emitCSV(x))
	}
	require.NoError(t, os.WriteFile(filepath.Join(out, "input.csv"), []byte(strings.Join(lines, "\n")+"\n"), 0o644))
	run(t, out, bin, "keygen", "-dir", "keys")
	worst := 0.0
	for i, x := range inputs {
		ct, res := fmt.Sprintf("x%d.ct", i), fmt.Sprintf("y%d.ct", i)
		run(t, out, bin, "encrypt", "-keys", "keys", "-in", "input.csv", "-row", strconv.Itoa(i+1), "-out", ct)
		run(t, out, bin, "eval", "-keys", "keys/eval", "-in", ct, "-out", res)
		got := parseCSV(t, run(t, out, bin, "decrypt", "-keys", "keys", "-in", res))
		want, err := st.Model.Reference(x)
		require.NoError(t, err)
		require.Len(t, got, len(want))
		worst = math.Max(worst, ir.MaxAbsDiff(want, got))
	}
	bits := -math.Log2(worst)
	t.Logf("chunky: logN %d, %d input and %d output ciphertexts, max abs error %.3g = %.1f bits (target %d)",
		prog.Params.LogN, prog.Input.Count(), prog.Output.Count(), worst, bits, g.Precision)
	require.GreaterOrEqual(t, bits, float64(g.Precision), "precision target missed")
	run(t, out, bin, "selftest", "-n", "2")
}

// chunkySpec is a model of 12 inputs → dense 20 → square with random
// weights (fixed seed), for this test only: depth 2 keeps the ring small.
func chunkySpec() string {
	r := rand.New(rand.NewPCG(12, 20))
	matrix := func(rows, cols int) string {
		var b strings.Builder
		for range rows {
			b.WriteString("      - [")
			for c := range cols {
				if c > 0 {
					b.WriteString(", ")
				}
				fmt.Fprintf(&b, "%.4f", (2*r.Float64()-1)/math.Sqrt(float64(cols)))
			}
			b.WriteString("]\n")
		}
		return b.String()
	}
	vector := func(n int) string {
		parts := make([]string, n)
		for i := range parts {
			parts[i] = fmt.Sprintf("%.4f", 0.1*(2*r.Float64()-1))
		}
		return "[" + strings.Join(parts, ", ") + "]"
	}
	return "lanthorn: 1\nmodel: chunky\nprecision: 12\ninput:\n  size: 12\n  range: [-1, 1]\nlayers:\n" +
		"  - kind: dense\n    out: 20\n    weights:\n" + matrix(20, 12) + "    bias: " + vector(20) + "\n" +
		"  - kind: activation\n    function: square\n"
}
