package runtime

import (
	"math"
	"math/rand/v2"
	"sync"
	"testing"

	"github.com/stretchr/testify/require"
)

// Test parameters: small rings (LogN 12, 2048 slots) and short chains keep
// the package's tests fast on a shared 2-core machine. They are far from
// 128-bit secure, which this package does not check (the generator does).

// testEnv is one parameter set with keys, built once per test binary.
type testEnv struct {
	p    *Params
	sk   *SecretKey
	evk  *EvaluationKeys
	req  KeyRequest
	once sync.Once
	err  error
}

var (
	// evalEnv has 7 levels for polynomials and products.
	evalEnv = &testEnv{req: KeyRequest{Rotations: []int{1, 2, 3, 5, 7, -1, 4, 16}, Relinearize: true}}
	// fileEnv has a short chain so that key files stay small.
	fileEnv = &testEnv{req: KeyRequest{Rotations: []int{1, 3}, Relinearize: true}}
)

func (e *testEnv) build(logQ, logP []int, model string) {
	q, p, err := GeneratePrimes(12, logQ, logP)
	if err != nil {
		e.err = err
		return
	}
	if e.p, err = NewParams(ParamSpec{LogN: 12, Q: q, P: p, LogScale: 40, ModelID: model}); err != nil {
		e.err = err
		return
	}
	e.sk, e.evk, e.err = GenerateKeys(e.p, e.req)
}

func getEnv(t testing.TB, e *testEnv) *testEnv {
	t.Helper()
	e.once.Do(func() {
		if e == evalEnv {
			e.build([]int{55, 40, 40, 40, 40, 40, 40}, []int{56}, "eval-test")
		} else {
			e.build([]int{50, 40, 40}, []int{50}, "file-test")
		}
	})
	require.NoError(t, e.err)
	return e
}

// randVec returns n values uniform in [lo, hi), from a fixed seed.
func randVec(seed uint64, n int, lo, hi float64) []float64 {
	r := rand.New(rand.NewPCG(seed, 99))
	v := make([]float64, n)
	for i := range v {
		v[i] = lo + (hi-lo)*r.Float64()
	}
	return v
}

// requireClose checks that have matches want within tol in every slot.
func requireClose(t *testing.T, want, have []float64, tol float64, msg string) {
	t.Helper()
	require.Len(t, have, len(want), msg)
	prec := Compare(want, have)
	require.Lessf(t, prec.MaxAbsErr, tol, "%s: max error %g (%.1f bits)", msg, prec.MaxAbsErr, prec.Bits)
}

// encrypt encrypts values with period len(values) (or period, if larger).
func (e *testEnv) encrypt(t *testing.T, values []float64, period int) *Ciphertext {
	t.Helper()
	cts, err := Encrypt(e.p, e.sk, values, vecLayout(len(values), period))
	require.NoError(t, err)
	require.Len(t, cts, 1)
	return cts[0]
}

// vecLayout is the layout of n values in one ciphertext, in slots [0, n) of
// each period.
func vecLayout(n, period int) Layout {
	return Layout{Size: n, Chunk: n, Copies: 1, Period: period}
}

func (e *testEnv) decrypt(t *testing.T, ct *Ciphertext, n int) []float64 {
	t.Helper()
	require.NotNil(t, ct)
	v, err := Decrypt(e.p, e.sk, []*Ciphertext{ct}, vecLayout(n, e.p.Slots()))
	require.NoError(t, err)
	return v
}

// tol is the accepted error of a short computation at scale 2^40 in
// LogN 12: fresh encryption noise is about 2^-30; a few ops and rescales
// keep it well below 2^-15 (common practice for these sizes).
var tol = math.Ldexp(1, -15)

// encryptOne encrypts values into one ciphertext, in slots [0, n) of each
// period.
func encryptOne(p *Params, sk *SecretKey, values []float64, period int) (*Ciphertext, error) {
	cts, err := Encrypt(p, sk, values, vecLayout(len(values), period))
	if err != nil {
		return nil, err
	}
	return cts[0], nil
}

// decryptOne decrypts the first n slots of one ciphertext.
func decryptOne(p *Params, sk *SecretKey, ct *Ciphertext, n int) ([]float64, error) {
	return Decrypt(p, sk, []*Ciphertext{ct}, vecLayout(n, p.Slots()))
}
