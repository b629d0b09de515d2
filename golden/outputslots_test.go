package golden

import (
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/passes"
	"github.com/lanthorn/lanthorn/spec"
)

// The result ciphertext must carry the model's outputs and nothing more of
// the model: every other slot of the layout's period is zero or a copy of
// an output (the block method leaves copies with period nextPow2(outputs)),
// never a partial sum the client could learn the weights from, nor p(0) of
// a final activation in padding slots (the output mask zeroes those).
// Checked on the cleartext simulation of every testdata program, on a few
// inputs from the declared range; the outputs themselves must match the
// float64 reference.
func TestOutputSlotsHoldOnlyOutputs(t *testing.T) {
	for _, c := range cases(t) {
		if c.bad {
			continue
		}
		t.Run(c.name, func(t *testing.T) {
			_, st, g, err := build(c)
			require.NoError(t, err)
			for k := range 3 {
				x := sampleInput(g, uint64(k))
				want, err := st.Model.Reference(x)
				require.NoError(t, err)
				got, err := st.Prog.Simulate(x)
				require.NoError(t, err)
				require.LessOrEqual(t, ir.MaxAbsDiff(want, got), 1e-9, "outputs")
				for _, bad := range strayValues(t, st.Prog, x) {
					t.Errorf("input %d: %s", k, bad)
				}
			}
		})
	}
}

// With the mask turned off (output: {mask: false}), the model that ends in
// a sigmoid leaves p(0) in its padding slots, and the check above sees it:
// the check can fail.
func TestOutputSlotsCheckSeesUnmaskedPadding(t *testing.T) {
	g, err := spec.Load(filepath.Join(repoRoot, "testdata", "models", "sigmoid_head.yaml"))
	require.NoError(t, err)
	g.NoOutputMask = true
	prog, _, err := passes.Compile(g, passes.Options{})
	require.NoError(t, err)
	require.NotEmpty(t, strayValues(t, prog, sampleInput(g, 0)))
}

func sampleInput(g *ir.Graph, seed uint64) []float64 {
	r := rand.New(rand.NewPCG(5, 5+seed))
	x := make([]float64, g.Input.Size)
	for i := range x {
		x[i] = g.Input.Min + r.Float64()*(g.Input.Max-g.Input.Min)
	}
	return x
}

// strayValues describes every slot of every output ciphertext past its
// chunk's outputs that is neither zero nor a copy of output t mod
// nextPow2(chunk outputs) of that ciphertext.
func strayValues(t *testing.T, p *ir.Program, x []float64) []string {
	t.Helper()
	full := *p
	full.Output = ir.PackedLayout(p.Output.Count()*p.Period, p.Period, p.Period)
	y, err := full.Simulate(x)
	require.NoError(t, err)
	var bad []string
	for j := range p.Output.Count() {
		ct := y[j*p.Period : (j+1)*p.Period]
		n := p.Output.ChunkLen(j)
		block := 1
		for block < n {
			block <<= 1
		}
		for slot := n; slot < len(ct); slot++ {
			copyOf := 0.0
			if k := slot % block; k < n {
				copyOf = ct[k]
			}
			zero := math.Abs(ct[slot]) < 1e-9
			replica := math.Abs(ct[slot]-copyOf) < 1e-9
			if !zero && !replica {
				bad = append(bad, fmt.Sprintf("ciphertext %d slot %d holds %g: neither zero nor a copy of an output", j, slot, ct[slot]))
			}
		}
	}
	return bad
}
