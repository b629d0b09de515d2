package runtime

import (
	"bytes"
	"fmt"
	"testing"

	"github.com/stretchr/testify/require"
)

// Tests of the hazards of lattigo v5.0.7 that this package guards against,
// as observed on this machine (see also TestSliceReaderTruncated,
// TestFilesTruncatedResealed, TestFilesForgedLayout, TestFilesCorrupted and
// TestAddMismatchedScaleIsError).

// lattigo accepts most single-byte changes of the first bytes of a
// ciphertext's encoding (its metadata) without a word. Here every such
// change is refused: by the checksum when the file is only damaged, and
// when it is resealed as a forger would, by the layout and metadata checks,
// unless the change is a valid other scale: the level-and-scale check of
// eval and decrypt then refuses it, or the scale is the same but for digits
// below lattigo's 2^-128 precision, and so is the value.
func TestHazardFirstBytes(t *testing.T) {
	e := ctParams.get(t)
	ct, err := encryptOne(e.p, e.sk, []float64{0.5, -1}, 2)
	require.NoError(t, err)
	var buf bytes.Buffer
	require.NoError(t, MarshalCiphertext(&buf, e.p, ct))
	file := buf.Bytes()
	fresh := LevelScale{Level: e.p.MaxLevel(), Scale: e.p.DefaultScale()}
	// The flag, the metadata and the three lengths before the first
	// coefficient: past them, a resealed change is a change of coefficient
	// data, which no check can tell from a valid ciphertext (the checksum
	// detects damage, not forgery).
	end := headerSize + 1 + metaDataSize() + 24
	accepted := 0
	for off := 0; off < end; off++ {
		for _, bit := range []byte{0x01, 0x20, 0x80} {
			b := bytes.Clone(file)
			b[off] ^= bit
			_, err := UnmarshalCiphertext(bytes.NewReader(b), e.p)
			require.Error(t, err, "offset %d ^ %#x", off, bit)
			if off < headerSize {
				continue
			}
			got, err := UnmarshalCiphertext(bytes.NewReader(reseal(b)), e.p)
			if err != nil {
				continue
			}
			accepted++
			if e.p.checkAt(got, fresh, 1) == nil {
				y, err := decryptOne(e.p, e.sk, got, 2)
				require.NoError(t, err)
				requireClose(t, []float64{0.5, -1}, y, tol, fmt.Sprintf("resealed offset %d ^ %#x, same scale", off, bit))
			}
		}
	}
	t.Logf("%d of %d resealed changes decode (each to another scale, or one equal to 2^-60)", accepted, 3*(end-headerSize))
}

// lattigo v5.0.7 panics in Decrypt on a well-formed ciphertext of another
// ring degree. Here such a ciphertext never reaches it: its file names
// other parameters, and forged to name these, it has the size of no
// ciphertext of these parameters; in memory, Decrypt refuses it by its
// fingerprint.
func TestHazardOtherRingDegree(t *testing.T) {
	small := ctParams.get(t)  // ring degree 2^10
	big := getEnv(t, fileEnv) // ring degree 2^12
	ct, err := encryptOne(small.p, small.sk, []float64{1}, 1)
	require.NoError(t, err)
	var buf bytes.Buffer
	require.NoError(t, MarshalCiphertext(&buf, small.p, ct))
	file := buf.Bytes()
	_, err = UnmarshalCiphertext(bytes.NewReader(file), big.p)
	require.ErrorContains(t, err, "ciphertext for another model")
	forged := bytes.Clone(file)
	copy(forged[12:44], big.p.fp[:])
	_, err = UnmarshalCiphertext(bytes.NewReader(forged), big.p)
	require.ErrorContains(t, err, "the size of no ciphertext for these parameters")
	_, err = decryptOne(big.p, big.sk, ct, 1)
	require.ErrorContains(t, err, "decrypt: ciphertext for another model")
	// The same object relabelled in memory: the ring degree is checked too.
	relabelled := &Ciphertext{ct: ct.ct, fp: big.p.fp}
	_, err = decryptOne(big.p, big.sk, relabelled, 1)
	require.ErrorContains(t, err, "ciphertext polynomial of degree 1024")
}

// A huge declared length costs nothing: the header is refused before a
// byte of payload is read, for each kind, and for evaluation keys the
// bound is the size of the keys the program needs, not of keys for every
// rotation (193 GB at ring degree 2^14).
func TestHazardHugeLength(t *testing.T) {
	e := keyParams.get(t)
	var buf bytes.Buffer
	require.NoError(t, MarshalEvaluationKeys(&buf, e.p, e.evk))
	file := buf.Bytes()
	size := int64(len(file) - headerSize)
	require.LessOrEqual(t, size, maxEvalKeysSize(e.p, e.req))
	require.Less(t, maxEvalKeysSize(e.p, e.req), size+100, "the bound is tight")
	for _, n := range []uint64{uint64(maxEvalKeysSize(e.p, e.req)) + 1, 1 << 40, ^uint64(0)} {
		b := bytes.Clone(file[:headerSize])
		putU64(b[44:], n)
		var r countingReader
		r.r = bytes.NewReader(b)
		_, err := UnmarshalEvaluationKeys(&r, e.p, e.req)
		require.ErrorContains(t, err, "more than the")
		require.Equal(t, headerSize, r.n, "read past the header")
	}
}

// countingReader counts the bytes read through it.
type countingReader struct {
	r *bytes.Reader
	n int
}

// Read reads and counts.
func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += n
	return n, err
}

func putU64(b []byte, v uint64) {
	for i := range 8 {
		b[i] = byte(v >> (8 * i))
	}
}

// lattigo reads coefficients as they come; one at or above its prime is
// refused here, for ciphertexts and keys, before any arithmetic uses it.
func TestForgedUnreducedCoefficient(t *testing.T) {
	e := keyParams.get(t)
	q0 := e.p.spec.Q[0]
	ct, err := encryptOne(e.p, e.sk, []float64{1}, 1)
	require.NoError(t, err)
	var buf bytes.Buffer
	require.NoError(t, MarshalCiphertext(&buf, e.p, ct))
	first := headerSize + 1 + metaDataSize() + 24 // the first coefficient
	for _, tc := range []struct {
		kind  string
		file  []byte
		off   int
		read  func([]byte) error
		wants string
	}{
		{"ciphertext", buf.Bytes(), first, func(b []byte) error {
			_, err := UnmarshalCiphertext(bytes.NewReader(b), e.p)
			return err
		}, "decode ciphertext: polynomial 0: coefficient 0 of row 0"},
		{"secret key", marshalled(t, func(b *bytes.Buffer) error { return MarshalSecretKey(b, e.p, e.sk) }), headerSize + 16,
			func(b []byte) error {
				_, err := UnmarshalSecretKey(bytes.NewReader(b), e.p)
				return err
			}, "decode secret key: coefficient 0 of row 0"},
	} {
		b := bytes.Clone(tc.file)
		putU64(b[tc.off:], q0)
		require.ErrorContains(t, tc.read(reseal(b)), tc.wants+fmt.Sprintf(" is %d, not below its prime %d", q0, q0), tc.kind)
		putU64(b[tc.off:], q0-1)
		require.NoError(t, tc.read(reseal(b)), tc.kind)
	}
}

func marshalled(t *testing.T, write func(*bytes.Buffer) error) []byte {
	t.Helper()
	var b bytes.Buffer
	require.NoError(t, write(&b))
	return b.Bytes()
}
