package golden

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// An emitted program evaluates to the same ciphertext, byte for byte, on
// one thread and on several: the parallel evaluator only reorders
// independent ops. Checked on the demo (dense layers) and on a small
// convolution (hoisted rotations with many steps); bench -json then prints
// the object harnesses read.
func TestThreadsSameCiphertext(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs emitted programs; skipped with -short")
	}
	for _, name := range []string{"demo/gearbox", "models/conv_small"} {
		t.Run(name, func(t *testing.T) {
			c := goldenCase{name: name, spec: "testdata/" + name + ".yaml"}
			files, st, g, err := build(c)
			require.NoError(t, err)
			dir := writeProgram(t, files)
			bin := filepath.Join(dir, "bin", st.Prog.Name)
			goTool(t, dir, "build", "-o", bin, "./cmd/"+st.Prog.Name)
			x := exampleInputs(t, c, g)[0]
			require.NoError(t, os.WriteFile(filepath.Join(dir, "input.csv"), []byte(emitCSV(x)+"\n"), 0o644))
			run(t, dir, bin, "keygen", "-dir", "keys")
			run(t, dir, bin, "encrypt", "-keys", "keys", "-in", "input.csv", "-out", "x.ct")
			var want []byte
			for _, threads := range []string{"1", "2", "4"} {
				out := "y" + threads + ".ct"
				run(t, dir, bin, "eval", "-keys", "keys/eval", "-in", "x.ct", "-out", out, "-threads", threads)
				got, err := os.ReadFile(filepath.Join(dir, out))
				require.NoError(t, err)
				if want == nil {
					want = got
				}
				require.True(t, bytes.Equal(want, got), "%s: the result on %s threads differs from one thread's", name, threads)
			}

			js := run(t, dir, bin, "bench", "-n", "2", "-threads", "2", "-json", "-keys", "keys")
			var r map[string]any
			require.NoError(t, json.Unmarshal([]byte(js), &r), js)
			require.Equal(t, st.Prog.Name, r["model"])
			require.EqualValues(t, 2, r["threads"])
			require.EqualValues(t, 2, r["runs"])
			require.Len(t, r, 10, js)
			require.True(t, strings.HasSuffix(js, "}\n"))
		})
	}
}
