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
	one := func(n, period int) Layout { return vecLayout(n, period) }
	for _, tc := range []struct {
		name   string
		values []float64
		layout Layout
		sk     *SecretKey
		msg    string
	}{
		{"period 0", []float64{1}, one(1, 0), e.sk, "period 0"},
		{"period not a power of two", []float64{1}, one(1, 3), e.sk, "power of two"},
		{"period too big", []float64{1}, one(1, 4096), e.sk, "period 4096"},
		{"chunk wider than the period", []float64{1, 2, 3}, one(3, 2), e.sk, "more than the period 2"},
		{"size differs", []float64{1, 2, 3}, one(2, 2), e.sk, "3 values for a layout of 2"},
		{"no values", nil, one(0, 2), e.sk, "size 0"},
		{"chunk 0", []float64{1}, Layout{Size: 1, Copies: 1, Period: 2}, e.sk, "chunk 0"},
		{"copies 0", []float64{1}, Layout{Size: 1, Chunk: 1, Period: 2}, e.sk, "copies 0"},
		{"copies overlap", []float64{1, 2}, Layout{Size: 2, Chunk: 2, Copies: 2, Pitch: 1, Period: 8}, e.sk, "overlap"},
		{"copies beyond the period", []float64{1, 2}, Layout{Size: 2, Chunk: 2, Copies: 3, Pitch: 4, Period: 8}, e.sk, "span 10 slots"},
		{"huge pitch", []float64{1}, Layout{Size: 1, Chunk: 1, Copies: 2, Pitch: 1 << 62, Period: 8}, e.sk, "more than the period"},
		{"too many ciphertexts", make([]float64, 5000), one(1, 2), e.sk, "ciphertexts, at most"},
		{"negative pitch", []float64{1}, Layout{Size: 1, Chunk: 1, Copies: 1, Pitch: -1, Period: 2}, e.sk, "pitch -1"},
		{"nan", []float64{1, nan()}, one(2, 2), e.sk, "NaN"},
		{"nil key", []float64{1}, one(1, 1), nil, "nil secret key"},
		{"other model's key", []float64{1}, one(1, 1), f.sk, "another model"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if tc.name == "too many ciphertexts" {
				tc.layout.Size = len(tc.values)
			}
			_, err := Encrypt(e.p, tc.sk, tc.values, tc.layout)
			require.ErrorContains(t, err, tc.msg)
		})
	}
	ct := e.encrypt(t, []float64{1}, 1)
	_, err := Decrypt(e.p, e.sk, []*Ciphertext{ct}, vecLayout(e.p.Slots()+1, e.p.Slots()))
	require.ErrorContains(t, err, "more than the period")
	_, err = Decrypt(e.p, e.sk, []*Ciphertext{ct, ct}, vecLayout(1, 1))
	require.ErrorContains(t, err, "2 ciphertexts, the layout has 1")
	_, err = Decrypt(e.p, e.sk, []*Ciphertext{nil}, vecLayout(1, 1))
	require.ErrorContains(t, err, "nil ciphertext")
	_, err = Decrypt(nil, e.sk, []*Ciphertext{ct}, vecLayout(1, 1))
	require.ErrorContains(t, err, "nil parameters")
}

// A vector wider than one ciphertext is split in chunks, each chunk in its
// own ciphertext with its copies and periods; Decrypt reads the first copy
// back in order.
func TestEncryptLayoutChunksAndCopies(t *testing.T) {
	e := getEnv(t, evalEnv)
	slots := e.p.Slots()
	x := randVec(3, 2*slots/8+3, -1, 1) // three chunks, the last of 3 values
	l := Layout{Size: len(x), Chunk: slots / 8, Copies: 3, Pitch: slots / 4, Period: slots}
	cts, err := Encrypt(e.p, e.sk, x, l)
	require.NoError(t, err)
	require.Len(t, cts, 3)
	for j, ct := range cts {
		have := e.decrypt(t, ct, slots)
		want := make([]float64, slots)
		for i := j * l.Chunk; i < min(len(x), (j+1)*l.Chunk); i++ {
			for k := 0; k < l.Copies; k++ {
				want[i%l.Chunk+k*l.Pitch] = x[i]
			}
		}
		requireClose(t, want, have, tol, "ciphertext of one chunk with its copies")
	}
	y, err := Decrypt(e.p, e.sk, cts, l)
	require.NoError(t, err)
	requireClose(t, x, y, tol, "chunks read back in order")

	// Period 8 inside the slots: each chunk repeats every 8 slots.
	small := Layout{Size: 5, Chunk: 2, Copies: 2, Pitch: 4, Period: 8}
	cts, err = Encrypt(e.p, e.sk, []float64{1, 2, 3, 4, 5}, small)
	require.NoError(t, err)
	require.Len(t, cts, 3)
	have := e.decrypt(t, cts[1], 16)
	requireClose(t, []float64{3, 4, 0, 0, 3, 4, 0, 0, 3, 4, 0, 0, 3, 4, 0, 0}, have, tol, "chunk 1 with two copies, period 8")
}

// A ciphertext of another parameter set, here with other primes and another
// number of levels, is refused before lattigo sees it (lattigo panics on a
// ciphertext of another ring degree).
func TestDecryptOtherParams(t *testing.T) {
	e := getEnv(t, evalEnv)
	f := getEnv(t, fileEnv)
	ct := e.encrypt(t, []float64{1, 2}, 2)
	_, err := decryptOne(f.p, f.sk, ct, 2)
	require.ErrorContains(t, err, "ciphertext for another model")

	q, p, err := GeneratePrimes(13, []int{50, 40}, []int{50})
	require.NoError(t, err)
	big, err := NewParams(ParamSpec{LogN: 13, Q: q, P: p, LogScale: 40})
	require.NoError(t, err)
	bsk, _, err := GenerateKeys(big, KeyRequest{})
	require.NoError(t, err)
	_, err = decryptOne(big, bsk, ct, 2)
	require.ErrorContains(t, err, "another model")
	// Even a forged fingerprint does not reach lattigo: the ring degree is
	// checked too.
	low := NewEvaluator(e.p, nil).DropLevel(ct, e.p.MaxLevel()-1)
	require.NotNil(t, low)
	forged := *low
	forged.fp = big.fp
	_, err = decryptOne(big, bsk, &forged, 2)
	require.ErrorContains(t, err, "polynomial of degree 4096")
}
