package runtime

import (
	"bytes"
	"testing"

	"github.com/stretchr/testify/require"
)

// Rotation keys made for a level below the top: they rotate ciphertexts at
// that level or below as a top-level key does, are refused for a higher
// level with an error that names both levels (lattigo itself would use the
// shorter key's digits and return garbage), survive a file round trip with
// their levels, are smaller, and a file whose key is made for a lower level
// than the program rotates at is refused when read.
func TestRotationKeyLevels(t *testing.T) {
	e := getEnv(t, fileEnv) // chain of levels 0..2
	req := KeyRequest{Rotations: []int{1, 3}, Levels: []int{1, 2}, Relinearize: true}
	sk, evk, err := GenerateKeys(e.p, req)
	require.NoError(t, err)
	_, full, err := GenerateKeys(e.p, KeyRequest{Rotations: []int{1, 3}, Relinearize: true})
	require.NoError(t, err)
	require.Less(t, evk.Size(), full.Size(), "a key made for level 1 is smaller")

	const period = 16
	x := randVec(5, period, -1, 1)
	ct, err := Encrypt(e.p, sk, x, vecLayout(period, period))
	require.NoError(t, err)
	ev := NewEvaluator(e.p, evk)
	top := ct[0]
	low := ev.DropLevel(top, 1)
	r := ev.Rotate(low, 1)
	require.NoError(t, ev.Err())
	got, err := Decrypt(e.p, sk, []*Ciphertext{r}, vecLayout(period, period))
	require.NoError(t, err)
	requireClose(t, rotRef(x, 1), got, tol, "rotate 1 at level 1")
	h := ev.RotateHoisted(top, 3)
	require.NoError(t, ev.Err(), "step 3 has a top-level key")
	got, err = Decrypt(e.p, sk, h, vecLayout(period, period))
	require.NoError(t, err)
	requireClose(t, rotRef(x, 3), got, tol, "rotate 3 at the top level")

	ev.Rotate(top, 1)
	require.ErrorContains(t, ev.Err(), "the rotation key for step 1 is made for level 1, the ciphertext is at level 2")
	ev = NewEvaluator(e.p, evk)
	ev.RotateHoisted(top, 1, 3)
	require.ErrorContains(t, ev.Err(), "made for level 1, the ciphertext is at level 2")

	var buf bytes.Buffer
	require.NoError(t, MarshalEvaluationKeys(&buf, e.p, evk))
	back, err := UnmarshalEvaluationKeys(bytes.NewReader(buf.Bytes()), e.p, req)
	require.NoError(t, err)
	require.Equal(t, evk.Size(), back.Size())
	require.Equal(t, 1, back.galois[1].LevelQ())
	require.Equal(t, 2, back.galois[3].LevelQ())

	_, err = UnmarshalEvaluationKeys(bytes.NewReader(buf.Bytes()), e.p, KeyRequest{Rotations: []int{1, 3}, Levels: []int{2, 2}, Relinearize: true})
	require.ErrorContains(t, err, "the rotation key for step 1 is made for level 1, and the program rotates at level 2")

	_, _, err = GenerateKeys(e.p, KeyRequest{Rotations: []int{1}, Levels: []int{3}})
	require.ErrorContains(t, err, "rotation 1 at level 3, want 0..2")
	_, _, err = GenerateKeys(e.p, KeyRequest{Rotations: []int{1}, Levels: []int{0, 1}})
	require.ErrorContains(t, err, "2 levels for 1 rotations")
}
