package passes

import (
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"
)

// The taps of a 5×5 kernel with padding 1 on rows of 28 slots lie on the
// diagonals (a − 1)·28 + (b − 1), a, b < 5 (worked by hand): with n1 = 28
// and the window [−14, 14) the baby steps are −1, 1, 2, 3 and the giant
// steps −1, 1, 2, 3, eight rotations; a window from 0 needs more, as the
// taps above and left of the output wrap around the period.
func TestBestSplitConvolutionTaps(t *testing.T) {
	const D = 4096
	diags := map[int][]float64{}
	for a := range 5 {
		for b := range 5 {
			diags[((a-1)*28+(b-1)+D)%D] = nil
		}
	}
	sp := bestSplit(diags, D)
	require.Equal(t, 8, sp.rotations)
	for k := range diags {
		i, g := sp.parts(k, D)
		require.Equal(t, k, ((g*sp.n1+i)%D+D)%D, "diagonal %d", k)
	}
}

// On random sets of diagonals every split bestSplit returns rebuilds each
// diagonal from its parts, counts its rotations truly, and never needs
// more than the best split with the window at 0 (the plain split).
func TestBestSplitRandom(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 9))
	for range 200 {
		D := 1 << (2 + r.IntN(6))
		diags := map[int][]float64{}
		for range 1 + r.IntN(D) {
			diags[r.IntN(D)] = nil
		}
		sp := bestSplit(diags, D)
		babies, giants := map[int]bool{}, map[int]bool{}
		for k := range diags {
			i, g := sp.parts(k, D)
			require.Equal(t, k, ((g*sp.n1+i)%D+D)%D)
			require.True(t, sp.i0 <= i && i < sp.i0+sp.n1)
			if i != 0 {
				babies[i] = true
			}
			if g != 0 {
				giants[g] = true
			}
		}
		require.Equal(t, len(babies)+len(giants), sp.rotations)
		plain := len(diags) + 1
		for n1 := 1; n1 <= D; n1++ {
			bi, gi := map[int]bool{}, map[int]bool{}
			for k := range diags {
				if k%n1 != 0 {
					bi[k%n1] = true
				}
				if k/n1 != 0 {
					gi[k/n1] = true
				}
			}
			plain = min(plain, len(bi)+len(gi))
		}
		require.LessOrEqual(t, sp.rotations, plain)
	}
}
