package runtime

import (
	"bytes"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
)

// A file of several ciphertexts round-trips; its count is checked against
// the count the reader's layout wants before the payload is read.
func TestCiphertextsFile(t *testing.T) {
	e := getEnv(t, fileEnv)
	l := Layout{Size: 5, Chunk: 2, Copies: 1, Period: 4}
	x := []float64{0.5, -0.25, 1, 0.125, -1}
	cts, err := Encrypt(e.p, e.sk, x, l)
	require.NoError(t, err)
	require.Len(t, cts, 3)
	var buf bytes.Buffer
	require.NoError(t, MarshalCiphertexts(&buf, e.p, cts))
	file := buf.Bytes()

	got, err := UnmarshalCiphertexts(bytes.NewReader(file), e.p, 3)
	require.NoError(t, err)
	y, err := Decrypt(e.p, e.sk, got, l)
	require.NoError(t, err)
	requireClose(t, x, y, tol, "three ciphertexts through a file")

	for _, n := range []int{1, 2, 4} {
		_, err := UnmarshalCiphertexts(bytes.NewReader(file), e.p, n)
		require.ErrorContains(t, err, "file holds 3 ciphertexts, this program takes")
	}
	_, err = UnmarshalCiphertexts(bytes.NewReader(file), e.p, 0)
	require.ErrorContains(t, err, "0 ciphertexts asked")
	_, err = UnmarshalCiphertexts(bytes.NewReader(file), e.p, maxCiphertexts+1)
	require.ErrorContains(t, err, "ciphertexts asked")

	// A count that agrees with the reader but not with the length.
	forged := bytes.Clone(file)
	forged[84] = 2
	_, err = UnmarshalCiphertexts(bytes.NewReader(forged), e.p, 2)
	require.ErrorContains(t, err, "more than the")

	low := NewEvaluator(e.p, nil).DropLevel(cts[1], 1)
	require.NotNil(t, low)
	require.ErrorContains(t, MarshalCiphertexts(&bytes.Buffer{}, e.p, []*Ciphertext{cts[0], low}), "one file holds ciphertexts of one shape")
	require.ErrorContains(t, MarshalCiphertexts(&bytes.Buffer{}, e.p, nil), "0 ciphertexts")
	require.ErrorContains(t, MarshalCiphertexts(&bytes.Buffer{}, e.p, []*Ciphertext{cts[0], nil}), "ciphertext 1: nil ciphertext")
}

// The command line reads as many ciphertexts as the program's layouts say
// and refuses a file with another count, and a program whose layouts do not
// fit its ring, with an error rather than a panic.
func TestCLILayouts(t *testing.T) {
	info := toyInfo(t, "cli-layouts")
	dir := toyFiles(t, info)
	// x.ct holds the toy's two input ciphertexts; a one-ciphertext file is
	// refused by eval and by decrypt before anything is allocated.
	p, err := NewParams(info.Params)
	require.NoError(t, err)
	cts, err := ReadCiphertexts(filepath.Join(dir, "x.ct"), p, 2)
	require.NoError(t, err)
	require.NoError(t, WriteCiphertext(filepath.Join(dir, "one.ct"), p, cts[0]))
	r := runToy(t, info, dir, "eval", "-keys", "keys/eval", "-in", "one.ct", "-out", "z.ct")
	require.Equal(t, 1, r.code)
	require.Contains(t, r.stderr, "one.ct: file holds 1 ciphertext, this program takes 2")
	r = runToy(t, info, dir, "decrypt", "-keys", "keys", "-in", "one.ct")
	require.Equal(t, 1, r.code)
	require.Contains(t, r.stderr, "file holds 1 ciphertext, this program takes 2")

	for _, c := range []struct {
		name   string
		change func(*ModelInfo)
		want   string
	}{
		{"input period beyond the slots", func(m *ModelInfo) { m.Input.Period = 1 << 20 }, "input layout: period 1048576 does not divide the 512 slots"},
		{"output chunk 0", func(m *ModelInfo) { m.Output.Chunk = 0 }, "output layout: chunk 0"},
	} {
		t.Run(c.name, func(t *testing.T) {
			bad := info
			c.change(&bad)
			r := runToy(t, bad, dir, "encrypt", "-keys", "keys", "-in", "in.csv", "-out", "w.ct")
			require.Equal(t, 1, r.code)
			require.Contains(t, r.stderr, c.want)
		})
	}
}
