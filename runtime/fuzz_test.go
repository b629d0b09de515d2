package runtime

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	goruntime "runtime"
	"strings"
	"sync"
	"testing"
)

// Fuzz targets for everything the runtime reads from outside: key and
// ciphertext files, the weights blob and input CSV files. The invariant is
// the same for each: an error or a well-formed object, never a panic (not
// even one the boundary recovers: that would mean a check is missing), a
// hang, or an allocation beyond a bound set by the parameters.
//
// The seed corpora are in testdata/fuzz/<Target>; `go test` runs them.
// They hold files made with the small parameters below (valid objects,
// truncations, single-byte flips, forged headers) and are rewritten by
//
//	go test ./runtime -run TestWriteFuzzSeeds -fuzzseeds
//
// which draws new keys, so every seed changes. Fuzz one target for longer
// with, for example,
//
//	go test ./runtime -run '^$' -fuzz '^FuzzUnmarshalCiphertext$' -fuzztime 10m -parallel 1

var writeFuzzSeeds = flag.Bool("fuzzseeds", false, "rewrite the seed corpora under testdata/fuzz")

// fuzzParams are ring degree 2^10 parameter sets, far from secure, that keep
// objects small (16 to 66 KB) so each execution takes well under a
// millisecond. ctParams have two levels, for ciphertexts; keyParams have
// one prime in Q and one in P, so that a secret key takes 16 KB and a
// key-switching key is a single 33 KB row.
type fuzzParams struct {
	once  sync.Once
	logQ  []int
	logP  []int
	model string
	req   KeyRequest
	p     *Params
	sk    *SecretKey
	evk   *EvaluationKeys
	err   error
}

var (
	ctParams  = &fuzzParams{logQ: []int{40, 30}, logP: []int{45}, model: "fuzz-ciphertext"}
	keyParams = &fuzzParams{logQ: []int{40}, logP: []int{45}, model: "fuzz-keys",
		req: KeyRequest{Rotations: []int{3}, Relinearize: true}}
)

func (f *fuzzParams) get(t testing.TB) *fuzzParams {
	t.Helper()
	f.once.Do(func() {
		q, p, err := GeneratePrimes(10, f.logQ, f.logP)
		if err != nil {
			f.err = err
			return
		}
		if f.p, f.err = NewParams(ParamSpec{LogN: 10, Q: q, P: p, LogScale: 30, ModelID: f.model}); f.err != nil {
			return
		}
		f.sk, f.evk, f.err = GenerateKeys(f.p, f.req)
	})
	if f.err != nil {
		t.Fatal(f.err)
	}
	return f
}

// maxFuzzAlloc bounds what one read may allocate, in bytes: a few times
// the largest object of the parameters (lattigo's own buffers, the layout
// computation and the decoded object), and nowhere near what a forged
// length field would ask for.
const maxFuzzAlloc = 8 << 20

// allocated returns the bytes f allocates on the heap.
func allocated(f func()) uint64 {
	var before, after goruntime.MemStats
	goruntime.ReadMemStats(&before)
	f()
	goruntime.ReadMemStats(&after)
	return after.TotalAlloc - before.TotalAlloc
}

// fuzzFile turns a fuzz input into file bytes: with reseal, the header's
// length and checksum are made to match the payload, as a forger would, so
// that the checks behind them are reached.
func fuzzFile(data []byte, resealed bool) []byte {
	if resealed && len(data) >= headerSize {
		return reseal(data)
	}
	return data
}

// checkReadErr fails on an error that only a recovered panic makes.
func checkReadErr(t *testing.T, err error, alloc uint64) {
	t.Helper()
	if alloc > maxFuzzAlloc {
		t.Fatalf("allocated %d bytes (bound %d), then: %v", alloc, maxFuzzAlloc, err)
	}
	if err != nil && strings.Contains(err.Error(), "internal error") {
		t.Fatalf("a panic reached the boundary: %v", err)
	}
}

// consumed returns the part of data a reader took.
func consumed(data []byte, r *bytes.Reader) []byte {
	return data[:len(data)-r.Len()]
}

// FuzzUnmarshalCiphertext reads a ciphertext file as a vector of one and of
// two ciphertexts. Whatever it accepts has a shape of these parameters,
// decrypts without error, and is written back byte for byte as it was read.
func FuzzUnmarshalCiphertext(f *testing.F) {
	e := ctParams.get(f)
	f.Fuzz(func(t *testing.T, data []byte, resealed bool) {
		data = fuzzFile(data, resealed)
		for n := 1; n <= 2; n++ {
			r := bytes.NewReader(data)
			var cts []*Ciphertext
			var err error
			alloc := allocated(func() { cts, err = UnmarshalCiphertexts(r, e.p, n) })
			checkReadErr(t, err, alloc)
			if err != nil {
				continue
			}
			if len(cts) != n {
				t.Fatalf("asked for %d ciphertexts, got %d", n, len(cts))
			}
			for _, ct := range cts {
				if err := e.p.checkCiphertext(ct); err != nil {
					t.Fatalf("accepted a malformed ciphertext: %v", err)
				}
				if _, err := decryptOne(e.p, e.sk, ct, e.p.Slots()); err != nil {
					t.Fatalf("accepted a ciphertext that does not decrypt: %v", err)
				}
			}
			var out bytes.Buffer
			if err := MarshalCiphertexts(&out, e.p, cts); err != nil {
				t.Fatalf("accepted ciphertexts that cannot be written back: %v", err)
			}
			if !bytes.Equal(out.Bytes(), consumed(data, r)) {
				t.Fatal("the ciphertexts read are not the ones written back (a non-canonical encoding was accepted)")
			}
		}
	})
}

// FuzzUnmarshalSecretKey reads a secret-key file.
func FuzzUnmarshalSecretKey(f *testing.F) {
	e := keyParams.get(f)
	f.Fuzz(func(t *testing.T, data []byte, resealed bool) {
		data = fuzzFile(data, resealed)
		r := bytes.NewReader(data)
		var sk *SecretKey
		var err error
		alloc := allocated(func() { sk, err = UnmarshalSecretKey(r, e.p) })
		checkReadErr(t, err, alloc)
		if err != nil {
			return
		}
		if err := e.p.checkSecretKey(sk); err != nil {
			t.Fatalf("accepted a malformed secret key: %v", err)
		}
		var out bytes.Buffer
		if err := MarshalSecretKey(&out, e.p, sk); err != nil {
			t.Fatalf("accepted a secret key that cannot be written back: %v", err)
		}
		if !bytes.Equal(out.Bytes(), consumed(data, r)) {
			t.Fatal("the secret key read is not the one written back")
		}
	})
}

// FuzzUnmarshalEvaluationKeys reads an evaluation-keys file for a program
// that needs a relinearization key and one rotation key.
func FuzzUnmarshalEvaluationKeys(f *testing.F) {
	e := keyParams.get(f)
	f.Fuzz(func(t *testing.T, data []byte, resealed bool) {
		data = fuzzFile(data, resealed)
		r := bytes.NewReader(data)
		var k *EvaluationKeys
		var err error
		alloc := allocated(func() { k, err = UnmarshalEvaluationKeys(r, e.p, e.req) })
		checkReadErr(t, err, alloc)
		if err != nil {
			return
		}
		if err := k.check(e.p, e.req); err != nil {
			t.Fatalf("accepted keys that miss what was asked: %v", err)
		}
		var out bytes.Buffer
		if err := MarshalEvaluationKeys(&out, e.p, k); err != nil {
			t.Fatalf("accepted keys that cannot be written back: %v", err)
		}
		if !bytes.Equal(out.Bytes(), consumed(data, r)) {
			t.Fatal("the keys read are not the ones written back")
		}
	})
}

// FuzzParseWeights parses a weights blob. An empty want stands for the
// blob's own SHA-256, so that the decoder behind the checksum is reached.
// Whatever it accepts is finite and is rebuilt byte for byte by
// BuildWeights.
func FuzzParseWeights(f *testing.F) {
	f.Fuzz(func(t *testing.T, blob []byte, want string) {
		if want == "" {
			sum := sha256.Sum256(blob)
			want = hex.EncodeToString(sum[:])
		}
		var w *Weights
		var err error
		alloc := allocated(func() { w, err = ParseWeights(blob, want) })
		if alloc > uint64(16*len(blob))+1<<20 {
			t.Fatalf("allocated %d bytes for a blob of %d", alloc, len(blob))
		}
		if err != nil {
			if !strings.HasPrefix(err.Error(), "weights: ") {
				t.Fatalf("error without its subject: %v", err)
			}
			return
		}
		names := w.Names()
		vectors := make([][]float64, len(names))
		for i, name := range names {
			v, err := w.Vector(name)
			if err != nil {
				t.Fatal(err)
			}
			for j, x := range v {
				if math.IsNaN(x) || math.IsInf(x, 0) {
					t.Fatalf("%q[%d] = %v accepted", name, j, x)
				}
			}
			vectors[i] = v
		}
		again, err := BuildWeights(names, vectors)
		if err != nil {
			t.Fatalf("accepted a blob BuildWeights refuses to make: %v", err)
		}
		if !bytes.Equal(again, blob) {
			t.Fatal("BuildWeights does not give back the blob parsed")
		}
	})
}

// FuzzReadCSV reads an input CSV file of vectors of n values and picks
// vector row. What it accepts has n finite values and row is in range.
func FuzzReadCSV(f *testing.F) {
	f.Fuzz(func(t *testing.T, data []byte, n, row int) {
		var x []float64
		var count int
		var err error
		alloc := allocated(func() { x, count, err = readCSV(bytes.NewReader(data), "in.csv", n, row) })
		if alloc > uint64(8*len(data))+1<<20 {
			t.Fatalf("allocated %d bytes for %d bytes of CSV", alloc, len(data))
		}
		if err != nil {
			if !strings.HasPrefix(err.Error(), "in.csv") && !strings.HasPrefix(err.Error(), "-row") {
				t.Fatalf("error without the file name: %v", err)
			}
			return
		}
		if len(x) != n || count < 1 || row > count || (row < 1 && count != 1) {
			t.Fatalf("n %d, row %d: got %d values of %d vectors", n, row, len(x), count)
		}
		for i, v := range x {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("column %d = %v accepted", i+1, v)
			}
		}
	})
}

// TestWriteFuzzSeeds rewrites the seed corpora (with -fuzzseeds only).
func TestWriteFuzzSeeds(t *testing.T) {
	if !*writeFuzzSeeds {
		t.Skip("rewrites testdata/fuzz; run with -fuzzseeds")
	}
	write := func(target string, seeds map[string][]any) {
		dir := filepath.Join("testdata", "fuzz", target)
		if err := os.MkdirAll(dir, 0o755); err != nil {
			t.Fatal(err)
		}
		for name, args := range seeds {
			var b strings.Builder
			b.WriteString("go test fuzz v1\n")
			for _, a := range args {
				switch a := a.(type) {
				case []byte:
					fmt.Fprintf(&b, "[]byte(%q)\n", a)
				case string:
					fmt.Fprintf(&b, "string(%q)\n", a)
				case bool, int:
					fmt.Fprintf(&b, "%T(%v)\n", a, a)
				default:
					t.Fatalf("seed %s/%s: type %T", target, name, a)
				}
			}
			if err := os.WriteFile(filepath.Join(dir, name), []byte(b.String()), 0o644); err != nil {
				t.Fatal(err)
			}
		}
	}
	write("FuzzUnmarshalCiphertext", ciphertextSeeds(t))
	write("FuzzUnmarshalSecretKey", secretKeySeeds(t))
	write("FuzzUnmarshalEvaluationKeys", evalKeysSeeds(t))
	write("FuzzParseWeights", weightsSeeds(t))
	write("FuzzReadCSV", csvSeeds())
}

// marshal writes an object with its header.
func marshal(t *testing.T, write func(*bytes.Buffer) error) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := write(&b); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// flip returns b with byte i xor-ed with 0x20.
func flip(b []byte, i int) []byte {
	out := bytes.Clone(b)
	out[i] ^= 0x20
	return out
}

// damaged are the usual damages of a file: truncations in the header, at
// the start of the payload, in the middle and at the last byte, a huge
// declared length, and single-byte flips of the header and of the first
// payload byte (the checksum catches any flip, so the payload ones are
// resealed). The fuzzer makes more flips of its own; full-size seeds are
// few because each takes some 3 bytes of text per byte of file.
func damaged(file []byte) map[string][]any {
	n := len(file)
	hdr := file[:headerSize]
	return map[string][]any{
		"empty":             {[]byte{}, false},
		"cut_in_magic":      {bytes.Clone(file[:5]), false},
		"cut_in_header":     {bytes.Clone(file[:44]), false},
		"header_only":       {bytes.Clone(hdr), false},
		"cut_payload_start": {bytes.Clone(file[:headerSize+1]), true},
		"cut_middle":        {bytes.Clone(file[:n/2]), true},
		"cut_last_byte":     {bytes.Clone(file[:n-1]), true},
		"flip_magic":        {flip(hdr, 3), false},
		"flip_version":      {flip(hdr, 8), false},
		"flip_kind":         {flip(hdr, 10), false},
		"flip_fingerprint":  {flip(hdr, 20), false},
		"flip_length":       {flip(hdr, 50), false},
		"flip_count":        {flip(hdr, 84), false},
		"flip_checksum":     {flip(file[:headerSize+16], 60), false},
		"flip_payload_0":    {flip(file, headerSize), true},
		"huge_length":       {append(append(bytes.Clone(file[:44]), 0, 0, 0, 0, 0, 0, 0, 0x40), file[52:headerSize]...), false},
	}
}

func ciphertextSeeds(t *testing.T) map[string][]any {
	e := ctParams.get(t)
	ct, err := encryptOne(e.p, e.sk, []float64{0.5, -0.25, 1}, 4)
	if err != nil {
		t.Fatal(err)
	}
	ev := NewEvaluator(e.p, nil)
	low := ev.DropLevel(ct, 1)
	sq := ev.Mul(low, low)
	if err := ev.Err(); err != nil {
		t.Fatal(err)
	}
	top := marshal(t, func(b *bytes.Buffer) error { return MarshalCiphertext(b, e.p, ct) })
	file := marshal(t, func(b *bytes.Buffer) error { return MarshalCiphertext(b, e.p, low) })
	deg2 := marshal(t, func(b *bytes.Buffer) error { return MarshalCiphertext(b, e.p, sq) })
	seeds := damaged(file)
	seeds["valid_level0"] = []any{file, false}
	seeds["valid_level1"] = []any{top, false}
	seeds["valid_degree2"] = []any{deg2, false}
	two := marshal(t, func(b *bytes.Buffer) error { return MarshalCiphertexts(b, e.p, []*Ciphertext{low, low}) })
	seeds["valid_two"] = []any{two, false}
	// Two ciphertexts under a count of one: read as one, the length is that
	// of no single ciphertext.
	one := bytes.Clone(two)
	binary.LittleEndian.PutUint32(one[84:88], 1)
	seeds["two_counted_one"] = []any{one, false}
	// The metadata starts right after the flag byte: "{"PlaintextMetaData":...".
	seeds["flip_metadata"] = []any{flip(file, headerSize+30), true}
	// Regression seeds: a JSON key in another case (lattigo's decoder
	// accepts it) and a scale modulus that does not parse (lattigo's decoder
	// dereferences nil on it).
	i := bytes.Index(file, []byte(`"PlaintextMetaData"`))
	seeds["metadata_key_case"] = []any{flip(file, i+1), true}
	i = bytes.Index(file, []byte(`"Mod":"0x0.`))
	bad := bytes.Clone(file)
	copy(bad[i+len(`"Mod":"`):], "zz")
	seeds["metadata_bad_modulus"] = []any{bad, true}
	// A level-1 payload under a level-0 length: the shape is another one.
	seeds["level1_cut_to_level0"] = []any{bytes.Clone(top[:len(file)]), true}
	return seeds
}

func secretKeySeeds(t *testing.T) map[string][]any {
	e := keyParams.get(t)
	file := marshal(t, func(b *bytes.Buffer) error { return MarshalSecretKey(b, e.p, e.sk) })
	seeds := damaged(file)
	seeds["valid"] = []any{file, false}
	return seeds
}

func evalKeysSeeds(t *testing.T) map[string][]any {
	e := keyParams.get(t)
	file := marshal(t, func(b *bytes.Buffer) error { return MarshalEvaluationKeys(b, e.p, e.evk) })
	// Damages are made to a file of the rotation key alone (half the size),
	// which the program refuses for lack of a relinearization key once read.
	_, rot, err := GenerateKeys(e.p, KeyRequest{Rotations: e.req.Rotations})
	if err != nil {
		t.Fatal(err)
	}
	small := marshal(t, func(b *bytes.Buffer) error { return MarshalEvaluationKeys(b, e.p, rot) })
	seeds := damaged(small)
	seeds["valid"] = []any{file, false}
	seeds["rotation_only"] = []any{small, false}
	// The step list: relinearization flag, count, steps.
	seeds["flip_relin_flag"] = []any{flip(small[:headerSize+9], headerSize), true}
	seeds["flip_step"] = []any{flip(small, headerSize+5), true}
	seeds["cut_in_steps"] = []any{bytes.Clone(small[:headerSize+7]), true}
	return seeds
}

func weightsSeeds(t *testing.T) map[string][]any {
	blob, err := BuildWeights([]string{"dense1.w", "dense1.b", "act.poly"},
		[][]float64{{0.5, -0.25, 1e-3, 7}, {0.125, 0}, {0, 1, 0, -1.0 / 3}})
	if err != nil {
		t.Fatal(err)
	}
	empty, err := BuildWeights(nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	n := len(blob)
	sum := sha256.Sum256(blob)
	return map[string][]any{
		"valid":          {blob, ""},
		"valid_sum":      {blob, hex.EncodeToString(sum[:])},
		"no_entries":     {empty, ""},
		"empty":          {[]byte{}, ""},
		"cut_in_magic":   {bytes.Clone(blob[:4]), ""},
		"cut_in_name":    {bytes.Clone(blob[:16]), ""},
		"cut_middle":     {bytes.Clone(blob[:n/2]), ""},
		"cut_last_byte":  {bytes.Clone(blob[:n-1]), ""},
		"flip_count":     {flip(blob, 8), ""},
		"flip_name_len":  {flip(blob, 13), ""},
		"flip_value":     {flip(blob, n-2), ""},
		"wrong_sum":      {blob, strings.Repeat("0", 64)},
		"not_hex_sum":    {blob, "xyz"},
		"trailing_bytes": {append(bytes.Clone(blob), 0), ""},
	}
}

func csvSeeds() map[string][]any {
	return map[string][]any{
		"one_row":      {[]byte("0.5,-1,2.25\n"), 3, 0},
		"rows":         {[]byte("# inputs\n1,2\n\n3,4\r\n5,6"), 2, 2},
		"row_range":    {[]byte("1,2\n3,4\n"), 2, 3},
		"no_row":       {[]byte("1,2\n3,4\n"), 2, 0},
		"nan":          {[]byte("NaN,1\n"), 2, 1},
		"inf":          {[]byte("1,-Inf\n"), 2, 1},
		"few_columns":  {[]byte("1,2\n"), 3, 1},
		"many_columns": {[]byte("1,2,3,4\n"), 3, 1},
		"not_a_number": {[]byte("1,two\n"), 2, 1},
		"huge_number":  {[]byte("1e309,0\n"), 2, 1},
		"hex_float":    {[]byte("0x1p-2,1_0\n"), 2, 1},
		"empty":        {[]byte(""), 1, 0},
		"comments":     {[]byte("#\n# only\n"), 1, 0},
		"binary":       {[]byte("\x00\xff\xfe,\x01\n"), 2, 1},
		"zero_n":       {[]byte("1\n"), 0, 0},
		"negative_row": {[]byte("1\n"), 1, -1},
	}
}
