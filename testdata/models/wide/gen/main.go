// Command gen writes the random weights of testdata/models/wide.yaml, a
// synthetic model whose input (5000 values) is wider than the 4096 slots of
// its pinned ring, so the compiler splits it over two ciphertexts. The
// weights are invented, for tests only: uniform in ±1/√in (rows of the first
// layer), drawn from a seeded PCG with plain arithmetic, so the files are
// byte-for-byte reproducible. Regenerate with, from the repository root:
//
//	go run ./testdata/models/wide/gen -o testdata/models/wide
package main

import (
	"bytes"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"

	"github.com/lanthorn/lanthorn/spec"
)

func main() {
	out := flag.String("o", "testdata/models/wide", "output `folder`")
	flag.Parse()
	if err := run(*out); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}

// layers are the model's dense layers: inputs and outputs.
var layers = []struct {
	name    string
	in, out int
}{{"dense1", 5000, 8}, {"dense2", 8, 3}}

func run(dir string) error {
	r := rand.New(rand.NewPCG(0x77696465, 3))
	for _, l := range layers {
		bound := 1 / math.Sqrt(float64(l.in))
		w := make([]float64, l.in*l.out)
		for i := range w {
			w[i] = round4(bound * (2*r.Float64() - 1))
		}
		b := make([]float64, l.out)
		for i := range b {
			b[i] = round4(0.1 * (2*r.Float64() - 1))
		}
		if err := write(filepath.Join(dir, l.name+"_w.npy"), w, []int{l.out, l.in}); err != nil {
			return err
		}
		if err := write(filepath.Join(dir, l.name+"_b.npy"), b, []int{l.out}); err != nil {
			return err
		}
	}
	return nil
}

// round4 keeps four decimal digits, so the files read the same everywhere.
func round4(x float64) float64 { return math.Round(x*1e4) / 1e4 }

func write(path string, data []float64, shape []int) error {
	var b bytes.Buffer
	if err := spec.WriteNPY(&b, data, shape); err != nil {
		return err
	}
	return os.WriteFile(path, b.Bytes(), 0o644)
}
