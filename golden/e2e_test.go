package golden

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/emit"
	"github.com/lanthorn/lanthorn/ir"
)

// writeProgram writes an emitted program into a fresh folder outside the
// repository, so `go build` there sees no generator and no replace line.
func writeProgram(t testing.TB, files emit.Files) string {
	t.Helper()
	dir := t.TempDir()
	for _, name := range files.Paths() {
		p := filepath.Join(dir, filepath.FromSlash(name))
		require.NoError(t, os.MkdirAll(filepath.Dir(p), 0o755))
		require.NoError(t, os.WriteFile(p, files[name], 0o644))
	}
	return dir
}

// goTool runs the go command in dir, outside any workspace.
func goTool(t *testing.T, dir string, args ...string) string {
	t.Helper()
	cmd := exec.Command("go", args...)
	cmd.Dir = dir
	cmd.Env = append(os.Environ(), "GOWORK=off", "GOFLAGS=-mod=readonly")
	out, err := cmd.CombinedOutput()
	require.NoError(t, err, "go %s in %s:\n%s", strings.Join(args, " "), dir, out)
	return string(out)
}

// run runs the program's binary and returns stdout; stderr goes to the log.
func run(t testing.TB, dir, bin string, args ...string) string {
	t.Helper()
	var stdout, stderr bytes.Buffer
	cmd := exec.Command(bin, args...)
	cmd.Dir, cmd.Stdout, cmd.Stderr = dir, &stdout, &stderr
	err := cmd.Run()
	require.NoError(t, err, "%s %s:\nstdout:\n%s\nstderr:\n%s", filepath.Base(bin), strings.Join(args, " "), stdout.String(), stderr.String())
	return stdout.String()
}

// The emitted program of every testdata spec builds on its own with plain
// go build, is gofmt- and vet-clean with tidy module files, and its command
// line runs the client/server workflow: keygen → encrypt → eval → decrypt.
// The decrypted outputs are compared with the generator's own float64
// reference of the model (not the emitted one).
func TestEndToEnd(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs every emitted program; skipped with -short")
	}
	for _, c := range cases(t) {
		if c.bad {
			continue
		}
		t.Run(c.name, func(t *testing.T) {
			files, st, g, err := build(c)
			require.NoError(t, err)
			dir := writeProgram(t, files)
			prog := st.Prog

			goTool(t, dir, "mod", "tidy", "-diff")
			goTool(t, dir, "vet", "./...")
			out, err := exec.Command("gofmt", "-l", dir).CombinedOutput()
			require.NoError(t, err, "%s", out)
			require.Empty(t, strings.TrimSpace(string(out)), "gofmt would change emitted files")
			bin := filepath.Join(dir, "bin", prog.Name)
			goTool(t, dir, "build", "-o", bin, "./cmd/"+prog.Name)
			if c.name == "mnist/deep" {
				// TestMNIST runs this program encrypted on 50 test images
				// and checks its precision target; the command-line flow
				// here would add a minute to the default run.
				return
			}

			inputs := exampleInputs(t, c, g)
			csv := filepath.Join(dir, "input.csv")
			var lines []string
			for _, x := range inputs {
				lines = append(lines, emitCSV(x))
			}
			require.NoError(t, os.WriteFile(csv, []byte(strings.Join(lines, "\n")+"\n"), 0o644))

			run(t, dir, bin, "keygen", "-dir", "keys")
			info, err := os.Stat(filepath.Join(dir, "keys", "secret.key"))
			require.NoError(t, err)
			require.Equal(t, os.FileMode(0o600), info.Mode().Perm(), "secret key must be private")

			worst := 0.0
			for i, x := range inputs {
				ct := fmt.Sprintf("x%d.ct", i)
				res := fmt.Sprintf("y%d.ct", i)
				run(t, dir, bin, "encrypt", "-keys", "keys", "-in", "input.csv", "-row", strconv.Itoa(i+1), "-out", ct)
				run(t, dir, bin, "eval", "-keys", "keys/eval", "-in", ct, "-out", res)
				got := parseCSV(t, run(t, dir, bin, "decrypt", "-keys", "keys", "-in", res))
				want, err := st.Model.Reference(x)
				require.NoError(t, err)
				require.Len(t, got, len(want))
				worst = math.Max(worst, ir.MaxAbsDiff(want, got))
			}
			bits := -math.Log2(worst)
			t.Logf("%s: logN %d, %d levels, max abs error %.3g = %.1f bits of precision (target %d) over %d inputs",
				c.name, prog.Params.LogN, prog.Params.MaxLevel(), worst, bits, g.Precision, len(inputs))
			require.Less(t, worst, 1e-3, "encrypted result differs from the float64 reference")
			require.GreaterOrEqual(t, bits, float64(g.Precision), "precision target missed")

			// eval refuses a key folder holding the secret key.
			cmd := exec.Command(bin, "eval", "-keys", "keys", "-in", "x0.ct", "-out", "z.ct")
			cmd.Dir = dir
			msg, err := cmd.CombinedOutput()
			require.Error(t, err)
			require.Contains(t, string(msg), "holds a secret key")

			run(t, dir, bin, "selftest", "-n", "2")
		})
	}
}

// exampleInputs are the demo's own sample rows, or random vectors from the
// declared input range.
func exampleInputs(t *testing.T, c goldenCase, g *ir.Graph) [][]float64 {
	if c.name == "demo/gearbox" {
		data, err := os.ReadFile(filepath.Join(repoRoot, "testdata", "demo", "input.csv"))
		require.NoError(t, err)
		return parseRows(t, string(data))
	}
	r := rand.New(rand.NewPCG(uint64(len(c.name)), 3))
	var out [][]float64
	for range 3 {
		x := make([]float64, g.Input.Size)
		for i := range x {
			x[i] = g.Input.Min + r.Float64()*(g.Input.Max-g.Input.Min)
		}
		out = append(out, x)
	}
	return out
}

func emitCSV(x []float64) string {
	parts := make([]string, len(x))
	for i, v := range x {
		parts[i] = strconv.FormatFloat(v, 'g', -1, 64)
	}
	return strings.Join(parts, ",")
}

func parseRows(t *testing.T, s string) [][]float64 {
	var rows [][]float64
	for _, line := range strings.Split(strings.TrimSpace(s), "\n") {
		if line = strings.TrimSpace(line); line != "" && !strings.HasPrefix(line, "#") {
			rows = append(rows, parseCSV(t, line))
		}
	}
	return rows
}

func parseCSV(t *testing.T, line string) []float64 {
	var out []float64
	for _, f := range strings.Split(strings.TrimSpace(line), ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		require.NoError(t, err, "%q", line)
		out = append(out, v)
	}
	return out
}
