package runtime

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
)

// fileSet writes one file of each kind into a fresh directory.
type fileSet struct {
	dir          string
	sk, evk, ct  string
	x            []float64
	skB, evkB, c []byte
}

func writeFiles(t *testing.T) (*testEnv, fileSet) {
	t.Helper()
	e := getEnv(t, fileEnv)
	fs := fileSet{dir: t.TempDir(), x: randVec(20, 8, -1, 1)}
	fs.sk = filepath.Join(fs.dir, "client.sk")
	fs.evk = filepath.Join(fs.dir, "eval.keys")
	fs.ct = filepath.Join(fs.dir, "input.ct")
	require.NoError(t, WriteSecretKey(fs.sk, e.p, e.sk))
	require.NoError(t, WriteEvaluationKeys(fs.evk, e.p, e.evk))
	require.NoError(t, WriteCiphertext(fs.ct, e.p, e.encrypt(t, fs.x, 8)))
	var err error
	fs.skB, err = os.ReadFile(fs.sk)
	require.NoError(t, err)
	fs.evkB, err = os.ReadFile(fs.evk)
	require.NoError(t, err)
	fs.c, err = os.ReadFile(fs.ct)
	require.NoError(t, err)
	return e, fs
}

// readAny reads path as the given kind with e's parameters.
func readAny(e *testEnv, kind objectKind, path string) error {
	var err error
	switch kind {
	case kindSecretKey:
		_, err = ReadSecretKey(path, e.p)
	case kindEvalKeys:
		_, err = ReadEvaluationKeys(path, e.p, e.req)
	case kindCiphertext:
		_, err = ReadCiphertext(path, e.p)
	}
	return err
}

// reseal recomputes the header's length and checksum for a changed
// payload, as a forger would, so that the checks behind them are reached.
func reseal(file []byte) []byte {
	out := append([]byte{}, file...)
	payload := out[headerSize:]
	binary.LittleEndian.PutUint64(out[44:52], uint64(len(payload)))
	sum := sha256.Sum256(payload)
	copy(out[52:84], sum[:])
	return out
}

func writeBytes(t *testing.T, dir, name string, b []byte) string {
	t.Helper()
	p := filepath.Join(dir, name)
	require.NoError(t, os.WriteFile(p, b, 0o644))
	return p
}

func TestFilesRoundTrip(t *testing.T) {
	e, fs := writeFiles(t)
	sk, err := ReadSecretKey(fs.sk, e.p)
	require.NoError(t, err)
	require.True(t, sk.sk.Equal(e.sk.sk))
	k, err := ReadEvaluationKeys(fs.evk, e.p, e.req)
	require.NoError(t, err)
	require.Equal(t, e.evk.Rotations(), k.Rotations())
	require.True(t, k.HasRelinearization())
	require.Equal(t, e.evk.Size(), k.Size())
	require.Equal(t, int64(headerSize+k.Size()), int64(len(fs.evkB)))
	for _, s := range k.steps {
		require.True(t, k.galois[s].Equal(e.evk.galois[s]), "step %d", s)
	}
	require.True(t, k.relin.Equal(e.evk.relin))
	ct, err := ReadCiphertext(fs.ct, e.p)
	require.NoError(t, err)
	requireClose(t, fs.x, e.decrypt(t, ct, 8), tol, "ciphertext file")

	// The keys read back work: a product, relinearized, rescaled, rotated,
	// itself written and read back at its lower level and degree.
	ev := NewEvaluator(e.p, k)
	sq := ev.Mul(ct, ct)
	require.NoError(t, ev.Err())
	p2 := filepath.Join(fs.dir, "square.ct")
	require.NoError(t, WriteCiphertext(p2, e.p, sq))
	sq2, err := ReadCiphertext(p2, e.p)
	require.NoError(t, err)
	require.Equal(t, 2, sq2.Degree())
	out := ev.Rotate(ev.Rescale(ev.Relinearize(sq2)), 3)
	require.NoError(t, ev.Err())
	p3 := filepath.Join(fs.dir, "out.ct")
	require.NoError(t, WriteCiphertext(p3, e.p, out))
	out2, err := ReadCiphertext(p3, e.p)
	require.NoError(t, err)
	require.Equal(t, e.p.MaxLevel()-1, out2.Level())
	want := rotRef(SquareRef(fs.x), 3)
	requireClose(t, want, e.decrypt(t, out2, 8), tol, "square rotated, via files")

	// Overwriting an existing file works and leaves no temporary file.
	require.NoError(t, WriteCiphertext(p3, e.p, ct))
	entries, err := os.ReadDir(fs.dir)
	require.NoError(t, err)
	for _, de := range entries {
		require.NotContains(t, de.Name(), ".tmp", "temporary file left behind")
	}
}

func TestFileModes(t *testing.T) {
	_, fs := writeFiles(t)
	for path, mode := range map[string]os.FileMode{fs.sk: 0o600, fs.evk: 0o644, fs.ct: 0o644} {
		st, err := os.Stat(path)
		require.NoError(t, err)
		require.Equal(t, mode, st.Mode().Perm(), path)
	}
}

func TestFilesOtherModel(t *testing.T) {
	_, fs := writeFiles(t)
	other := getEnv(t, evalEnv)
	_, err := ReadCiphertext(fs.ct, other.p)
	require.ErrorContains(t, err, fs.ct+": ciphertext for another model (fingerprint ")
	require.ErrorContains(t, err, ", want "+other.p.Fingerprint()[:8]+"…)")
	_, err = ReadEvaluationKeys(fs.evk, other.p, KeyRequest{})
	require.ErrorContains(t, err, "evaluation keys for another model")
	_, err = ReadSecretKey(fs.sk, other.p)
	require.ErrorContains(t, err, "secret key for another model")
	// Writing an object with parameters it does not belong to is refused too.
	f := getEnv(t, fileEnv)
	require.ErrorContains(t, WriteSecretKey(filepath.Join(fs.dir, "x"), other.p, f.sk), "another model")
}

func TestFilesWrongKind(t *testing.T) {
	e, fs := writeFiles(t)
	_, err := ReadEvaluationKeys(fs.sk, e.p, KeyRequest{})
	require.EqualError(t, err, fs.sk+": this is a secret key, not evaluation keys")
	_, err = ReadCiphertext(fs.sk, e.p)
	require.EqualError(t, err, fs.sk+": this is a secret key, not a ciphertext")
	_, err = ReadSecretKey(fs.ct, e.p)
	require.EqualError(t, err, fs.ct+": this is a ciphertext, not a secret key")
	_, err = ReadCiphertext(fs.evk, e.p)
	require.EqualError(t, err, fs.evk+": this is evaluation keys, not a ciphertext")
}

func TestEvaluationKeysMissing(t *testing.T) {
	e, fs := writeFiles(t)
	_, err := ReadEvaluationKeys(fs.evk, e.p, KeyRequest{Rotations: []int{1, 5, 3, -2}})
	require.ErrorContains(t, err, "no rotation key for steps [5 2046] (the keys hold [1 3])")
	_, k, err := GenerateKeys(e.p, KeyRequest{Rotations: []int{1}})
	require.NoError(t, err)
	p := filepath.Join(fs.dir, "norelin.keys")
	require.NoError(t, WriteEvaluationKeys(p, e.p, k))
	_, err = ReadEvaluationKeys(p, e.p, KeyRequest{Relinearize: true})
	require.ErrorContains(t, err, "no relinearization key")
	got, err := ReadEvaluationKeys(p, e.p, KeyRequest{Rotations: []int{1}})
	require.NoError(t, err)
	require.False(t, got.HasRelinearization())
}

// Truncated files, at offsets in the header and in the payload, give clean
// errors.
func TestFilesTruncated(t *testing.T) {
	e, fs := writeFiles(t)
	for _, f := range []struct {
		kind objectKind
		data []byte
	}{{kindSecretKey, fs.skB}, {kindEvalKeys, fs.evkB}, {kindCiphertext, fs.c}} {
		n := len(f.data)
		for _, off := range []int{0, 1, 8, 43, 83, 84, 85, 84 + 7, n / 2, n - 8, n - 1} {
			p := writeBytes(t, fs.dir, "cut", f.data[:off])
			err := readAny(e, f.kind, p)
			require.Error(t, err, "%v cut at %d", f.kind, off)
			switch {
			case off == 0:
				require.EqualError(t, err, p+": empty file")
			case off < headerSize:
				require.ErrorContains(t, err, "truncated: header")
			default:
				require.ErrorContains(t, err, "truncated: payload")
			}
		}
	}
}

// A payload cut short but resealed (length and checksum made to match) is
// still refused: its layout is not that of the object.
func TestFilesTruncatedResealed(t *testing.T) {
	e, fs := writeFiles(t)
	for _, f := range []struct {
		kind objectKind
		data []byte
	}{{kindSecretKey, fs.skB}, {kindEvalKeys, fs.evkB}, {kindCiphertext, fs.c}} {
		n := len(f.data)
		// For the ciphertext, n - polynomial size is the exact size of a
		// ciphertext one level lower: the shape is found, the layout is not.
		poly := 8 + 8<<e.p.spec.LogN
		for _, off := range []int{headerSize, headerSize + 1, headerSize + 9, n / 2, n - 2*poly, n - 1} {
			p := writeBytes(t, fs.dir, "cut", reseal(f.data[:off]))
			require.Error(t, readAny(e, f.kind, p), "%v cut at %d", f.kind, off)
		}
	}
}

func TestFilesCorrupted(t *testing.T) {
	e, fs := writeFiles(t)
	for _, f := range []struct {
		kind objectKind
		data []byte
	}{{kindSecretKey, fs.skB}, {kindEvalKeys, fs.evkB}, {kindCiphertext, fs.c}} {
		n := len(f.data)
		for _, off := range []int{headerSize, headerSize + 1, headerSize + 100, n / 2, n - 1} {
			b := append([]byte{}, f.data...)
			b[off] ^= 0x40
			err := readAny(e, f.kind, writeBytes(t, fs.dir, "flip", b))
			require.ErrorContains(t, err, "checksum mismatch", "%v flipped at %d", f.kind, off)
		}
		for _, tc := range []struct {
			name string
			edit func(b []byte)
			msg  string
		}{
			{"magic", func(b []byte) { b[0] = 'X' }, "bad magic"},
			{"version", func(b []byte) { b[8] = 9 }, "format version 9"},
			{"kind", func(b []byte) { b[10] = 7 }, "unknown kind 7"},
			{"fingerprint", func(b []byte) { b[20] ^= 1 }, "for another model"},
			{"huge length", func(b []byte) { binary.LittleEndian.PutUint64(b[44:52], 1<<62) }, "more than the"},
			{"max length", func(b []byte) { binary.LittleEndian.PutUint64(b[44:52], ^uint64(0)) }, "more than the"},
			{"longer length", func(b []byte) { binary.LittleEndian.PutUint64(b[44:52], uint64(n-headerSize+1)) }, ""},
			{"shorter length", func(b []byte) { binary.LittleEndian.PutUint64(b[44:52], uint64(n-headerSize-1)) }, ""},
		} {
			b := append([]byte{}, f.data...)
			tc.edit(b)
			err := readAny(e, f.kind, writeBytes(t, fs.dir, "hdr", b))
			require.Error(t, err, "%v %s", f.kind, tc.name)
			require.ErrorContains(t, err, tc.msg, "%v %s", f.kind, tc.name)
		}
		// Data after the object.
		err := readAny(e, f.kind, writeBytes(t, fs.dir, "long", append(append([]byte{}, f.data...), 0)))
		require.ErrorContains(t, err, "unexpected data after the end")
	}
	// Not a file at all.
	require.Error(t, readAny(e, kindCiphertext, fs.dir))
	require.Error(t, readAny(e, kindCiphertext, filepath.Join(fs.dir, "missing")))
	garbage := make([]byte, 5000)
	for i := range garbage {
		garbage[i] = byte(i * 7)
	}
	require.ErrorContains(t, readAny(e, kindCiphertext, writeBytes(t, fs.dir, "garbage", garbage)), "bad magic")
}

// Forged payloads with a valid checksum: the internal length fields lattigo
// trusts are checked against the expected layout first, so a huge one is a
// clean error instead of a giant allocation.
func TestFilesForgedLayout(t *testing.T) {
	e, fs := writeFiles(t)
	meta := metaDataSize()
	frame := evkFramingSize(len(e.evk.steps))
	galoisStart := frame + e.evk.relin.BinarySize()
	putU64 := func(off int, v uint64) func([]byte) {
		return func(b []byte) { binary.LittleEndian.PutUint64(b[headerSize+off:], v) }
	}
	for _, tc := range []struct {
		name string
		kind objectKind
		data []byte
		edit func([]byte)
		msg  string
	}{
		{"sk rows", kindSecretKey, fs.skB, putU64(0, 1<<40), "not a secret key for these parameters: malformed at byte 0"},
		{"sk row length", kindSecretKey, fs.skB, putU64(8, 1<<40), "malformed at byte 9"},
		{"ct poly count", kindCiphertext, fs.c, putU64(1+meta, 1<<40), "malformed at byte"},
		{"ct row length", kindCiphertext, fs.c, putU64(1+meta+16, 1<<61), "malformed at byte"},
		{"ct no metadata", kindCiphertext, fs.c, func(b []byte) { b[headerSize] = 0 }, "malformed at byte 0"},
		{"ct metadata json", kindCiphertext, fs.c, func(b []byte) { b[headerSize+1] = '[' }, "decode ciphertext"},
		{"ct not ntt", kindCiphertext, fs.c, func(b []byte) {
			i := bytes.Index(b, []byte(`"IsNTT":"0x01"`))
			b[i+len(`"IsNTT":"0x0`)] = '0'
		}, "not in NTT form"},
		{"ct slots", kindCiphertext, fs.c, func(b []byte) {
			i := bytes.Index(b, []byte(`"LogDimensions":["0x00","0x0b"]`))
			b[i+len(`"LogDimensions":["0x00","0x0`)] = 'a'
		}, "slot layout"},
		// lattigo's JSON decoding takes keys in any case; the file must be
		// exactly what lattigo writes.
		{"ct metadata key case", kindCiphertext, fs.c, func(b []byte) {
			i := bytes.Index(b, []byte(`"PlaintextMetaData"`))
			b[i+1] = 'p'
		}, "metadata not in the form lattigo writes"},
		// lattigo dereferences nil on a scale modulus that does not parse.
		{"ct scale modulus", kindCiphertext, fs.c, func(b []byte) {
			i := bytes.Index(b, []byte(`"Mod":"0x0.`))
			copy(b[i+len(`"Mod":"`):], "zz")
		}, "ciphertext scale has a modulus"},
		{"evk relin flag", kindEvalKeys, fs.evkB, func(b []byte) { b[headerSize] = 2 }, "relinearization flag 2"},
		{"evk count", kindEvalKeys, fs.evkB, func(b []byte) { binary.LittleEndian.PutUint32(b[headerSize+1:], 1<<30) }, "rotation keys, at most"},
		{"evk step order", kindEvalKeys, fs.evkB, func(b []byte) { binary.LittleEndian.PutUint32(b[headerSize+9:], 1) }, "want ascending steps"},
		{"evk relin rows", kindEvalKeys, fs.evkB, putU64(frame+8, 1<<40), "relinearization key: malformed"},
		{"evk galois element", kindEvalKeys, fs.evkB, putU64(galoisStart, 7), "Galois element 7, want 5"},
		{"evk galois rows", kindEvalKeys, fs.evkB, putU64(galoisStart+24, 1<<40), "rotation key for step 1: malformed"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			b := append([]byte{}, tc.data...)
			tc.edit(b)
			err := readAny(e, tc.kind, writeBytes(t, fs.dir, "forged", reseal(b)))
			require.ErrorContains(t, err, tc.msg)
		})
	}
}

// Random single-byte changes, resealed: whatever they hit, reading returns
// an error or an object, and never panics or crashes.
func TestFilesRandomForgeries(t *testing.T) {
	e, fs := writeFiles(t)
	r := rand.New(rand.NewPCG(5, 6))
	for _, f := range []struct {
		kind objectKind
		data []byte
	}{{kindSecretKey, fs.skB}, {kindEvalKeys, fs.evkB}, {kindCiphertext, fs.c}} {
		for i := 0; i < 40; i++ {
			b := append([]byte{}, f.data...)
			// Bias towards the start of the payload, where the structure is.
			off := headerSize + r.IntN(min(len(b)-headerSize, 600))
			if i%4 == 0 {
				off = headerSize + r.IntN(len(b)-headerSize)
			}
			b[off] = byte(r.Uint32())
			_ = readAny(e, f.kind, writeBytes(t, fs.dir, "rand", reseal(b)))
		}
	}
}

func TestMarshalStreams(t *testing.T) {
	e := getEnv(t, fileEnv)
	var buf bytes.Buffer
	ct := e.encrypt(t, []float64{1, -1}, 2)
	require.NoError(t, MarshalCiphertext(&buf, e.p, ct))
	require.NoError(t, MarshalSecretKey(&buf, e.p, e.sk))
	require.NoError(t, MarshalEvaluationKeys(&buf, e.p, e.evk))
	// Three objects back to back in one stream.
	ct2, err := UnmarshalCiphertext(&buf, e.p)
	require.NoError(t, err)
	requireClose(t, []float64{1, -1}, e.decrypt(t, ct2, 2), tol, "stream")
	_, err = UnmarshalSecretKey(&buf, e.p)
	require.NoError(t, err)
	_, err = UnmarshalEvaluationKeys(&buf, e.p, e.req)
	require.NoError(t, err)
	require.Zero(t, buf.Len())
	_, err = UnmarshalCiphertext(&buf, e.p)
	require.EqualError(t, err, "empty file")

	require.ErrorContains(t, MarshalCiphertext(&buf, e.p, nil), "nil ciphertext")
	require.ErrorContains(t, MarshalSecretKey(&buf, nil, e.sk), "nil parameters")
	require.ErrorContains(t, MarshalEvaluationKeys(&buf, e.p, nil), "nil evaluation keys")
}

// lattigo's encoding prints the scale with a two-digit binary exponent; a
// ciphertext at 2^120 cannot be stored and is refused before writing.
func TestWriteCiphertextHugeScale(t *testing.T) {
	e := getEnv(t, fileEnv)
	ev := NewEvaluator(e.p, e.evk)
	ct := e.encrypt(t, []float64{1}, 1)
	big := ev.Mul(ev.Relinearize(ev.Mul(ct, ct)), ct)
	require.NoError(t, ev.Err())
	require.InDelta(t, 120.0, big.Scale(), 1e-9)
	var buf bytes.Buffer
	require.ErrorContains(t, MarshalCiphertext(&buf, e.p, big), "cannot store a ciphertext at scale 2^120")
}

// The size formula matches lattigo's own BinarySize for every shape.
func TestCiphertextSize(t *testing.T) {
	e := getEnv(t, fileEnv)
	for d := 1; d <= 2; d++ {
		for l := 0; l <= e.p.MaxLevel(); l++ {
			ct := hefloat.NewCiphertext(e.p.hp, d, l)
			require.Equal(t, int64(ct.BinarySize()), ciphertextSize(e.p, d, l), "degree %d level %d", d, l)
			gd, gl, ok := ciphertextShape(e.p, ciphertextSize(e.p, d, l))
			require.True(t, ok)
			require.Equal(t, [2]int{d, l}, [2]int{gd, gl})
		}
	}
}

// The reader handed to lattigo fails on exhausted input instead of letting
// lattigo's slice readers recurse without end (what lattigo's own buffer does
// in v5.0.7, with a fatal stack overflow).
func TestSliceReaderTruncated(t *testing.T) {
	e := getEnv(t, fileEnv)
	full := ciphertextPayload(t, e)
	for _, n := range []int{0, 1, 300, len(full) / 2, len(full) - 1} {
		ct := hefloat.NewCiphertext(e.p.hp, 1, e.p.MaxLevel())
		require.Error(t, readInto(ct, full[:n]), "cut at %d", n)
	}
	ct := hefloat.NewCiphertext(e.p.hp, 1, e.p.MaxLevel())
	require.NoError(t, readInto(ct, full))
}

func ciphertextPayload(t *testing.T, e *testEnv) []byte {
	t.Helper()
	var buf bytes.Buffer
	require.NoError(t, MarshalCiphertext(&buf, e.p, e.encrypt(t, []float64{1}, 1)))
	return buf.Bytes()[headerSize:]
}

// The key-switching key size formula matches lattigo's BinarySize.
func TestGadgetSize(t *testing.T) {
	params := []*Params{getEnv(t, fileEnv).p, getEnv(t, evalEnv).p}
	// Two P primes: the decomposition has ceil(5/2) = 3 rows.
	q, pp, err := GeneratePrimes(11, []int{50, 40, 40, 40, 40}, []int{50, 50})
	require.NoError(t, err)
	two, err := NewParams(ParamSpec{LogN: 11, Q: q, P: pp, LogScale: 40})
	require.NoError(t, err)
	for _, p := range append(params, two) {
		require.Equal(t, int64(rlwe.NewRelinearizationKey(p.hp).BinarySize()), gadgetSize(p))
		require.Equal(t, int64(rlwe.NewGaloisKey(p.hp).BinarySize()), 16+gadgetSize(p))
		require.Equal(t, int64(rlwe.NewSecretKey(p.hp).BinarySize()), secretKeySize(p))
	}
}

// Writing a ciphertext over a key file is refused and the key is left
// intact (eval -out pointed at the secret key by mistake); replacing a
// ciphertext, or a file that is not ours, is allowed.
func TestCiphertextNeverReplacesKeys(t *testing.T) {
	e, fs := writeFiles(t)
	ct, err := ReadCiphertext(fs.ct, e.p)
	require.NoError(t, err)
	for _, path := range []string{fs.sk, fs.evk} {
		before, err := os.ReadFile(path)
		require.NoError(t, err)
		err = WriteCiphertext(path, e.p, ct)
		require.ErrorContains(t, err, "refusing to overwrite it with a ciphertext")
		after, err := os.ReadFile(path)
		require.NoError(t, err)
		require.Equal(t, before, after, "%s untouched", path)
	}
	require.NoError(t, WriteCiphertext(fs.ct, e.p, ct))
	other := filepath.Join(t.TempDir(), "notes.txt")
	require.NoError(t, os.WriteFile(other, []byte("not a lanthorn object"), 0o644))
	require.NoError(t, WriteCiphertext(other, e.p, ct))
}
