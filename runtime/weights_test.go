package runtime

import (
	"crypto/sha256"
	"encoding/hex"
	"math"
	"testing"

	"github.com/stretchr/testify/require"
)

func sha256Hex(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

func TestWeightsRoundTrip(t *testing.T) {
	names := []string{"dense1.w", "dense1.b", "act1.coeffs", "empty"}
	vecs := [][]float64{{1, 2, 3, 4, 5, 6}, {-0.5, 0.25}, {0, 1.5e-300, -math.MaxFloat64}, {}}
	blob, err := BuildWeights(names, vecs)
	require.NoError(t, err)
	w, err := ParseWeights(blob, sha256Hex(blob))
	require.NoError(t, err)
	require.Equal(t, names, w.Names())
	for i, n := range names {
		v, err := w.Vector(n)
		require.NoError(t, err)
		require.Equal(t, len(vecs[i]), len(v))
		for j := range v {
			require.Equal(t, math.Float64bits(vecs[i][j]), math.Float64bits(v[j]), "bit-exact")
		}
	}
	m, err := w.Matrix("dense1.w", 2, 3)
	require.NoError(t, err)
	require.Equal(t, [][]float64{{1, 2, 3}, {4, 5, 6}}, m)
	m, err = w.Matrix("empty", 0, 5)
	require.NoError(t, err)
	require.Empty(t, m)
	for _, shape := range [][2]int{{3, 3}, {-2, -3}, {6, 0}, {0, 0}} {
		_, err = w.Matrix("dense1.w", shape[0], shape[1])
		require.ErrorContains(t, err, "not a", "%v", shape)
	}
	_, err = w.Vector("nope")
	require.ErrorContains(t, err, `weight "nope": not in the weights blob`)
	// Vectors are copies: changing one does not change the blob's.
	v, _ := w.Vector("dense1.b")
	v[0] = 99
	v2, _ := w.Vector("dense1.b")
	require.Equal(t, -0.5, v2[0])
}

func TestWeightsWrongSHA(t *testing.T) {
	blob, err := BuildWeights([]string{"a"}, [][]float64{{1}})
	require.NoError(t, err)
	other := sha256Hex(append([]byte{0}, blob...))
	_, err = ParseWeights(blob, other)
	require.ErrorContains(t, err, "not the one this program was built with")
	_, err = ParseWeights(blob, "xyz")
	require.ErrorContains(t, err, "not 64 hex digits")
}

// Truncated blobs are refused at every length, even when the SHA-256 given
// is that of the truncated bytes (so the parser itself must catch it).
func TestWeightsTruncated(t *testing.T) {
	blob, err := BuildWeights([]string{"alpha", "beta"}, [][]float64{{1, 2, 3}, {4}})
	require.NoError(t, err)
	for n := 0; n < len(blob); n++ {
		_, err := ParseWeights(blob[:n], sha256Hex(blob[:n]))
		require.Error(t, err, "length %d", n)
	}
	long := append(append([]byte{}, blob...), 0)
	_, err = ParseWeights(long, sha256Hex(long))
	require.ErrorContains(t, err, "after the last entry")
}

func TestWeightsMalformed(t *testing.T) {
	blob, err := BuildWeights([]string{"a"}, [][]float64{{1}})
	require.NoError(t, err)
	edit := func(off int, b ...byte) []byte {
		c := append([]byte{}, blob...)
		copy(c[off:], b)
		return c
	}
	for name, tc := range map[string]struct {
		blob []byte
		msg  string
	}{
		"magic":       {edit(0, 'X'), "bad magic"},
		"huge count":  {edit(8, 0xff, 0xff, 0xff, 0xff), "entries declared"},
		"huge values": {edit(15, 0xff, 0xff, 0xff, 0x7f), "values declared"},
		"nan":         {edit(19, 0, 0, 0, 0, 0, 0, 0xf8, 0x7f), "is NaN"},
		"empty name":  {edit(12, 0, 0), "empty name"},
	} {
		t.Run(name, func(t *testing.T) {
			_, err := ParseWeights(tc.blob, sha256Hex(tc.blob))
			require.ErrorContains(t, err, tc.msg)
		})
	}
	dup := []byte("LNTHW\x00\x01\x00\x02\x00\x00\x00\x01\x00a\x00\x00\x00\x00\x01\x00a\x00\x00\x00\x00")
	_, err = ParseWeights(dup, sha256Hex(dup))
	require.ErrorContains(t, err, `"a" appears twice`)
}

func TestBuildWeightsRejects(t *testing.T) {
	for name, tc := range map[string]struct {
		names []string
		vecs  [][]float64
		msg   string
	}{
		"lengths":   {[]string{"a"}, nil, "1 names, 0 vectors"},
		"empty":     {[]string{""}, [][]float64{{1}}, "empty name"},
		"duplicate": {[]string{"a", "a"}, [][]float64{{1}, {2}}, "twice"},
		"inf":       {[]string{"a"}, [][]float64{{math.Inf(1)}}, "+Inf"},
	} {
		t.Run(name, func(t *testing.T) {
			_, err := BuildWeights(tc.names, tc.vecs)
			require.ErrorContains(t, err, tc.msg)
		})
	}
}
