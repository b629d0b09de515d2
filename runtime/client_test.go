package runtime

import (
	"testing"

	"github.com/stretchr/testify/require"
)

func TestEncryptDecryptRoundTrip(t *testing.T) {
	e := getEnv(t, evalEnv)
	x := randVec(1, 100, -4, 4)
	ct := e.encrypt(t, x, 128)
	require.Equal(t, e.p.MaxLevel(), ct.Level())
	require.Equal(t, 1, ct.Degree())
	require.Equal(t, 40.0, ct.Scale())
	requireClose(t, x, e.decrypt(t, ct, len(x)), tol, "round trip")
}

func TestEncryptReplicates(t *testing.T) {
	e := getEnv(t, evalEnv)
	x := []float64{0.5, -0.25, 0.125}
	ct := e.encrypt(t, x, 4)
	have := e.decrypt(t, ct, e.p.Slots())
	want := make([]float64, e.p.Slots())
	for i := range want {
		if i%4 < len(x) {
			want[i] = x[i%4]
		}
	}
	requireClose(t, want, have, tol, "replicated with period 4, zero-padded")
}

func TestEncryptDecryptRejects(t *testing.T) {
	e := getEnv(t, evalEnv)
	f := getEnv(t, fileEnv)
	for _, tc := range []struct {
		name   string
		values []float64
		period int
		sk     *SecretKey
		msg    string
	}{
		{"period 0", []float64{1}, 0, e.sk, "period 0"},
		{"period not dividing", []float64{1}, 3, e.sk, "does not divide"},
		{"period too big", []float64{1}, 4096, e.sk, "period 4096"},
		{"too many values", []float64{1, 2, 3}, 2, e.sk, "do not fit"},
		{"nan", []float64{1, nan()}, 2, e.sk, "NaN"},
		{"nil key", []float64{1}, 1, nil, "nil secret key"},
		{"other model's key", []float64{1}, 1, f.sk, "another model"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Encrypt(e.p, tc.sk, tc.values, tc.period)
			require.ErrorContains(t, err, tc.msg)
		})
	}
	ct := e.encrypt(t, []float64{1}, 1)
	_, err := Decrypt(e.p, e.sk, ct, e.p.Slots()+1)
	require.ErrorContains(t, err, "values asked")
	_, err = Decrypt(e.p, e.sk, nil, 1)
	require.ErrorContains(t, err, "nil ciphertext")
	_, err = Decrypt(nil, e.sk, ct, 1)
	require.ErrorContains(t, err, "nil parameters")
}

// A ciphertext of another parameter set, here with other primes and another
// number of levels, is refused before lattigo sees it (lattigo panics on a
// ciphertext of another ring degree).
func TestDecryptOtherParams(t *testing.T) {
	e := getEnv(t, evalEnv)
	f := getEnv(t, fileEnv)
	ct := e.encrypt(t, []float64{1, 2}, 2)
	_, err := Decrypt(f.p, f.sk, ct, 2)
	require.ErrorContains(t, err, "ciphertext for another model")

	q, p, err := GeneratePrimes(13, []int{50, 40}, []int{50})
	require.NoError(t, err)
	big, err := NewParams(ParamSpec{LogN: 13, Q: q, P: p, LogScale: 40})
	require.NoError(t, err)
	bsk, _, err := GenerateKeys(big, KeyRequest{})
	require.NoError(t, err)
	_, err = Decrypt(big, bsk, ct, 2)
	require.ErrorContains(t, err, "another model")
	// Even a forged fingerprint does not reach lattigo: the ring degree is
	// checked too.
	low := NewEvaluator(e.p, nil).DropLevel(ct, e.p.MaxLevel()-1)
	require.NotNil(t, low)
	forged := *low
	forged.fp = big.fp
	_, err = Decrypt(big, bsk, &forged, 2)
	require.ErrorContains(t, err, "polynomial of degree 4096")
}
