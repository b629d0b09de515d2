package golden

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
)

// The result ciphertext must carry the model's outputs and nothing more of
// the model: every other slot of the layout's period is zero or a copy of
// an output (the block method leaves copies with period nextPow2(outputs)),
// never a partial sum the client could learn the weights from. Checked on
// the cleartext simulation of every testdata program.
func TestOutputSlotsHoldOnlyOutputs(t *testing.T) {
	for _, c := range cases(t) {
		if c.bad {
			continue
		}
		t.Run(c.name, func(t *testing.T) {
			_, st, g, err := build(c)
			require.NoError(t, err)
			full := *st.Prog
			full.Output = ir.PackedLayout(full.Output.Count()*full.Period, full.Period, full.Period)
			r := rand.New(rand.NewPCG(5, 5))
			x := make([]float64, g.Input.Size)
			for i := range x {
				x[i] = g.Input.Min + r.Float64()*(g.Input.Max-g.Input.Min)
			}
			y, err := full.Simulate(x)
			require.NoError(t, err)
			n := st.Prog.OutputSize
			block := 1
			for block < n {
				block <<= 1
			}
			for slot := n; slot < len(y); slot++ {
				copyOf := 0.0
				if k := slot % block; k < n {
					copyOf = y[k]
				}
				zero := math.Abs(y[slot]) < 1e-9
				replica := math.Abs(y[slot]-copyOf) < 1e-9
				require.True(t, zero || replica, "slot %d holds %g: neither zero nor a copy of an output", slot, y[slot])
			}
		})
	}
}
