package runtime

import (
	"math"
	"testing"

	"github.com/stretchr/testify/require"
)

func testWeights(t *testing.T) *Weights {
	t.Helper()
	blob, err := BuildWeights(
		[]string{"w4", "big", "cheb"},
		[][]float64{{1, 2, 3, 4}, {1e9, 0}, {0.25, 0, -0.5}})
	require.NoError(t, err)
	w, err := ParseWeights(blob, sha256Hex(blob))
	require.NoError(t, err)
	return w
}

func TestEncoderPlaintext(t *testing.T) {
	e := getEnv(t, evalEnv)
	enc := NewEncoder(e.p, testWeights(t))
	pt := enc.Plaintext("w4", 3, Scale{Num: []int{3}}, 4)
	require.NoError(t, enc.Err())
	require.Equal(t, 3, pt.Level())
	require.Equal(t, Scale{Num: []int{3}}, pt.ExactScale())

	// The plaintext replicates with its period: multiplying a ciphertext of
	// ones gives the vector in every block.
	ev := NewEvaluator(e.p, e.evk)
	ones := ev.DropLevel(e.encrypt(t, []float64{1, 1, 1, 1}, 4), e.p.MaxLevel()-3)
	out := ev.Rescale(ev.MulPlain(ones, pt))
	require.NoError(t, ev.Err())
	have := e.decrypt(t, out, 12)
	requireClose(t, []float64{1, 2, 3, 4, 1, 2, 3, 4, 1, 2, 3, 4}, have, tol, "replicated plaintext")

	poly := enc.Polynomial("cheb", Chebyshev)
	require.NoError(t, enc.Err())
	require.Equal(t, 2, poly.Degree())
}

func TestEncoderErrors(t *testing.T) {
	e := getEnv(t, evalEnv)
	w := testWeights(t)
	for _, tc := range []struct {
		name string
		run  func(enc *Encoder)
		msg  string
	}{
		{"missing", func(enc *Encoder) { enc.Plaintext("nope", 1, Scale{Pow2: 40}, 4) }, `"nope": not in the weights blob`},
		{"period", func(enc *Encoder) { enc.Plaintext("w4", 1, Scale{Pow2: 40}, 8) }, "4 values, want the period 8"},
		{"period a power of two", func(enc *Encoder) { enc.Plaintext("cheb", 1, Scale{Pow2: 40}, 3) }, "power of two"},
		{"level", func(enc *Encoder) { enc.Plaintext("w4", 9, Scale{Pow2: 40}, 4) }, "level 9, want 0..6"},
		{"scale", func(enc *Encoder) { enc.Plaintext("w4", 1, Scale{Num: []int{8}}, 4) }, "no prime q8"},
		{"overflow", func(enc *Encoder) { enc.Plaintext("big", 0, Scale{Pow2: 40}, 2) }, "needs"},
		{"poly basis", func(enc *Encoder) { enc.Polynomial("cheb", Basis(7)) }, "invalid basis"},
		{"poly missing", func(enc *Encoder) { enc.Polynomial("nope", Monomial) }, "not in the weights blob"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			enc := NewEncoder(e.p, w)
			tc.run(enc)
			require.ErrorContains(t, enc.Err(), tc.msg)
			// Sticky: later calls return nil and keep the first error.
			require.Nil(t, enc.Plaintext("w4", 1, Scale{Pow2: 40}, 4))
			require.ErrorContains(t, enc.Err(), tc.msg)
		})
	}
	require.ErrorContains(t, NewEncoder(nil, w).Err(), "nil parameters")
	require.ErrorContains(t, NewEncoder(e.p, nil).Err(), "nil weights")
	var nilEnc *Encoder
	require.Nil(t, nilEnc.Plaintext("w4", 1, Scale{}, 4))
	require.Error(t, nilEnc.Err())
	_, err := NewPolynomial("n", Monomial, []float64{1, math.Inf(-1)})
	require.ErrorContains(t, err, "coefficient 1 is -Inf")
}
