package golden

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// Offsets in the header of key and ciphertext files (see
// runtime/header.go): the test forges headers the way an attacker would.
const (
	hdrSize     = 88
	hdrKind     = 10
	hdrFPrint   = 12
	hdrLength   = 44
	hdrChecksum = 52
	hdrCount    = 84
)

// program is an emitted program built into dir/bin/NAME.
type program struct {
	dir, bin string
	// result: the program states the level and scale of its result, so
	// that decrypt can refuse an encrypted input.
	result bool
}

// buildProgram emits, writes and builds the program of case name.
func buildProgram(t *testing.T, name string) program {
	t.Helper()
	for _, c := range cases(t) {
		if c.name != name {
			continue
		}
		files, st, _, err := build(c)
		require.NoError(t, err)
		dir := writeProgram(t, files)
		bin := filepath.Join(dir, "bin", st.Prog.Name)
		goTool(t, dir, "build", "-o", bin, "./cmd/"+st.Prog.Name)
		return program{dir: dir, bin: bin, result: strings.Contains(string(files["params.go"]), "Result:")}
	}
	t.Fatalf("no testdata case %s", name)
	return program{}
}

// result is what one run of a program did.
type result struct {
	code           int
	stdout, stderr string
}

// exec runs the program in its folder.
func (p program) exec(t *testing.T, args ...string) result {
	t.Helper()
	var stdout, stderr bytes.Buffer
	cmd := exec.Command(p.bin, args...)
	cmd.Dir, cmd.Stdout, cmd.Stderr = p.dir, &stdout, &stderr
	err := cmd.Run()
	var exit *exec.ExitError
	if err != nil && !errors.As(err, &exit) {
		t.Fatalf("%s %v: %v", filepath.Base(p.bin), args, err)
	}
	return result{code: cmd.ProcessState.ExitCode(), stdout: stdout.String(), stderr: stderr.String()}
}

// Hostile and broken files through the emitted command line: each run
// exits non-zero with a one-line error that names the file and says what is
// wrong, prints no stack trace and leaves no output file, whole or partial.
func TestHostileFiles(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs two emitted programs; skipped with -short")
	}
	gb := buildProgram(t, "demo/gearbox")
	sg := buildProgram(t, "models/sigmoid_small")
	row := "-0.2053,0.4075,0.5727,0.9662,-0.9306,-0.1153,-0.2106,-0.1652,-1.5576,-1.6813\n"
	require.NoError(t, os.WriteFile(filepath.Join(gb.dir, "in.csv"), []byte(row), 0o644))
	require.NoError(t, os.WriteFile(filepath.Join(sg.dir, "in.csv"), []byte("0.5,-0.5,0.25\n"), 0o644))
	for _, p := range []program{gb, sg} {
		for _, args := range [][]string{
			{"keygen", "-dir", "keys"},
			{"encrypt", "-keys", "keys", "-in", "in.csv", "-out", "x.ct"},
			{"eval", "-keys", "keys/eval", "-in", "x.ct", "-out", "y.ct"},
		} {
			r := p.exec(t, args...)
			require.Zero(t, r.code, "%v:\n%s", args, r.stderr)
		}
	}
	read := func(name string) []byte {
		b, err := os.ReadFile(filepath.Join(gb.dir, name))
		require.NoError(t, err)
		return b
	}
	x, y, sk := read("x.ct"), read("y.ct"), read("keys/secret.key")
	evPath := filepath.Join(gb.dir, "keys", "eval", "eval.keys")
	ev, err := os.Stat(evPath)
	require.NoError(t, err)

	// Hostile files live in gb.dir/h; a hostile key folder is gb.dir/h/NAME
	// holding the one file the command reads from it.
	hostile := filepath.Join(gb.dir, "h")
	require.NoError(t, os.MkdirAll(hostile, 0o755))
	file := func(name string, b []byte) string {
		require.NoError(t, os.WriteFile(filepath.Join(hostile, name), b, 0o644))
		return "h/" + name
	}
	folder := func(name, inside string, b []byte) string {
		require.NoError(t, os.MkdirAll(filepath.Join(hostile, name), 0o755))
		require.NoError(t, os.WriteFile(filepath.Join(hostile, name, inside), b, 0o644))
		return "h/" + name
	}
	// link makes a key folder whose file is another file, without copying it.
	link := func(name, inside, target string) string {
		require.NoError(t, os.MkdirAll(filepath.Join(hostile, name), 0o755))
		require.NoError(t, os.Symlink(target, filepath.Join(hostile, name, inside)))
		return "h/" + name
	}
	flip := func(b []byte, i int) []byte {
		out := bytes.Clone(b)
		out[i] ^= 0x01
		return out
	}
	withLength := func(b []byte, n uint64) []byte {
		out := bytes.Clone(b)
		binary.LittleEndian.PutUint64(out[hdrLength:], n)
		return out
	}

	type hostileCase struct {
		name string
		args []string // the command; -out out/NAME.ct is added to encrypt and eval
		file string   // the file the error must name
		want string   // what it must say is wrong
	}
	var tcs []hostileCase
	evalIn := func(name, path, want string) {
		tcs = append(tcs, hostileCase{"eval " + name, []string{"eval", "-keys", "keys/eval", "-in", path}, path, want})
	}
	decryptIn := func(name, path, want string) {
		tcs = append(tcs, hostileCase{"decrypt " + name, []string{"decrypt", "-keys", "keys", "-in", path}, path, want})
	}

	// Truncations: inside the header, at the start of the payload, in the
	// middle and at the last byte, of the input (eval) and the result
	// (decrypt).
	for _, f := range []struct {
		kind string
		b    []byte
		use  func(name, path, want string)
	}{{"x", x, evalIn}, {"y", y, decryptIn}} {
		n := len(f.b)
		for _, cut := range []int{1, 8, 12, 43, 52, hdrSize - 1} {
			f.use(fmt.Sprintf("%s cut at %d", f.kind, cut), file(fmt.Sprintf("%s_cut%d.ct", f.kind, cut), f.b[:cut]), "truncated: header")
		}
		for _, cut := range []int{hdrSize, hdrSize + 1, hdrSize + 200, n / 2, n - 8, n - 1} {
			f.use(fmt.Sprintf("%s cut at %d", f.kind, cut), file(fmt.Sprintf("%s_cut%d.ct", f.kind, cut), f.b[:cut]), "truncated: payload")
		}
		// Single-byte flips: magic, version, kind, fingerprint, length,
		// checksum, payload start, middle, last byte.
		for _, fl := range []struct {
			off  int
			want string
		}{
			{0, "bad magic"}, {8, "file format version 3"}, {hdrKind, "this is evaluation keys, not a ciphertext"},
			{hdrFPrint + 5, "ciphertext for another model"}, {hdrLength + 1, "header declares a payload of"},
			{hdrChecksum, "checksum mismatch"}, {hdrCount, "file holds 0 ciphertexts, this program takes 1"}, {hdrSize, "checksum mismatch"},
			{hdrSize + 40, "checksum mismatch"}, {n / 2, "checksum mismatch"}, {n - 1, "checksum mismatch"},
		} {
			f.use(fmt.Sprintf("%s flip at %d", f.kind, fl.off), file(fmt.Sprintf("%s_flip%d.ct", f.kind, fl.off), flip(f.b, fl.off)), fl.want)
		}
		f.use(f.kind+" huge length", file(f.kind+"_huge.ct", withLength(f.b, 1<<60)), "header declares a payload of 1152921504606846976 bytes, more than the")
		f.use(f.kind+" length of all memory", file(f.kind+"_max.ct", withLength(f.b[:hdrSize], ^uint64(0))), "more than the")
		f.use(f.kind+" trailing data", file(f.kind+"_long.ct", append(bytes.Clone(f.b), 0)), "unexpected data after the end")
	}
	evalIn("empty", file("empty.ct", nil), "empty file")
	decryptIn("empty", file("empty.ct", nil), "empty file")
	evalIn("directory", "h", "not a regular file")
	decryptIn("directory", "h", "not a regular file")
	evalIn("missing", "h/none.ct", "no such file")
	evalIn("garbage", file("garbage.ct", bytes.Repeat([]byte("lanthorn"), 1000)), "bad magic")

	// Swapped kinds and roles.
	evalIn("secret key as input", "keys/secret.key", "this is a secret key, not a ciphertext: a secret key must stay with the client")
	evalIn("eval keys as input", "keys/eval/eval.keys", "this is evaluation keys, not a ciphertext")
	evalIn("a result as input", "y.ct", "eval takes a ciphertext made by encrypt")
	decryptIn("secret key as result", "keys/secret.key", "this is a secret key, not a ciphertext")
	decryptIn("eval keys as result", "keys/eval/eval.keys", "this is evaluation keys, not a ciphertext")
	tcs = append(tcs,
		hostileCase{"eval keys are a secret key", []string{"eval", "-keys", link("sk_as_evk", "eval.keys", filepath.Join(gb.dir, "keys", "secret.key")), "-in", "x.ct"},
			"h/sk_as_evk/eval.keys", "this is a secret key, not evaluation keys: a secret key must stay with the client"},
		hostileCase{"eval keys are a ciphertext", []string{"eval", "-keys", link("ct_as_evk", "eval.keys", filepath.Join(gb.dir, "x.ct")), "-in", "x.ct"},
			"h/ct_as_evk/eval.keys", "this is a ciphertext, not evaluation keys"},
		hostileCase{"eval with the client's folder", []string{"eval", "-keys", "keys", "-in", "x.ct"},
			"keys", "holds a secret key"},
		hostileCase{"eval keys folder is a file", []string{"eval", "-keys", "keys/eval/eval.keys", "-in", "x.ct"},
			"keys/eval/eval.keys", "not a folder"},
		hostileCase{"secret key is a ciphertext", []string{"decrypt", "-keys", link("ct_as_sk", "secret.key", filepath.Join(gb.dir, "y.ct")), "-in", "y.ct"},
			"h/ct_as_sk/secret.key", "this is a ciphertext, not a secret key"},
		hostileCase{"secret key is eval keys", []string{"encrypt", "-keys", link("evk_as_sk", "secret.key", evPath), "-in", "in.csv"},
			"h/evk_as_sk/secret.key", "this is evaluation keys, not a secret key"},
	)

	// Another model's files (sigmoid_small: another ring, chain and
	// fingerprint).
	sgFile := func(name string) string { return filepath.Join(sg.dir, name) }
	evalIn("another model's input", sgFile("x.ct"), "ciphertext for another model (fingerprint ")
	decryptIn("another model's result", sgFile("y.ct"), "ciphertext for another model (fingerprint ")
	tcs = append(tcs,
		hostileCase{"another model's eval keys", []string{"eval", "-keys", sgFile("keys/eval"), "-in", "x.ct"},
			sgFile("keys/eval/eval.keys"), "evaluation keys for another model (fingerprint "},
		hostileCase{"another model's secret key (decrypt)", []string{"decrypt", "-keys", sgFile("keys"), "-in", "y.ct"},
			sgFile("keys/secret.key"), "secret key for another model (fingerprint "},
		hostileCase{"another model's secret key (encrypt)", []string{"encrypt", "-keys", sgFile("keys"), "-in", "in.csv"},
			sgFile("keys/secret.key"), "secret key for another model (fingerprint "},
	)
	// Another model's payload under this model's header, resealed: the
	// fingerprint matches, the shape does not.
	// Both rings have degree 2^14 and the other model's fresh input has the
	// size of a level-5 input here; its primes are smaller than ours, so it
	// even passes as one, until eval checks its level.
	sgx, err := os.ReadFile(sgFile("x.ct"))
	require.NoError(t, err)
	forged := append(bytes.Clone(x[:hdrSize]), sgx[hdrSize:]...)
	evalIn("another model's payload, resealed", file("forged.ct", reseal(forged)), "ciphertext at level 5")
	if gb.result {
		decryptIn("an input as result", "x.ct", "decrypt takes a result of eval")
	} else {
		t.Log("the emitted program does not state its result's level and scale: decrypt cannot refuse an encrypted input")
	}

	// Broken key files.
	keyCase := func(name string, args func(dir string) []string, inside string, b []byte, want string) {
		dir := folder(name, inside, b)
		tcs = append(tcs, hostileCase{name, args(dir), dir + "/" + inside, want})
	}
	evalKeys := func(dir string) []string { return []string{"eval", "-keys", dir, "-in", "x.ct"} }
	decryptKeys := func(dir string) []string { return []string{"decrypt", "-keys", dir, "-in", "y.ct"} }
	head, err := readPrefix(evPath, hdrSize+4096)
	require.NoError(t, err)
	keyCase("eval keys empty", evalKeys, "eval.keys", nil, "empty file")
	keyCase("eval keys cut in header", evalKeys, "eval.keys", head[:30], "truncated: header")
	keyCase("eval keys cut after header", evalKeys, "eval.keys", head[:hdrSize+4096], "truncated: payload")
	keyCase("eval keys huge length", evalKeys, "eval.keys", withLength(head[:hdrSize], 1<<50), "more than the")
	keyCase("eval keys for every rotation", evalKeys, "eval.keys", withLength(head[:hdrSize], 1<<37), "more than the")
	keyCase("eval keys flipped kind", evalKeys, "eval.keys", flip(head[:hdrSize], hdrKind), "this is a ciphertext, not evaluation keys")
	// The truncation in the middle and the flipped byte at the end are
	// written in full: 190 MB each, read to the end before the checksum.
	mid, err := readPrefix(evPath, int(ev.Size()/2))
	require.NoError(t, err)
	keyCase("eval keys cut in the middle", evalKeys, "eval.keys", mid, "truncated: payload")
	mid = nil
	full, err := os.ReadFile(evPath)
	require.NoError(t, err)
	keyCase("eval keys flipped last byte", evalKeys, "eval.keys", flip(full, len(full)-1), "checksum mismatch")
	full = nil
	keyCase("secret key empty", decryptKeys, "secret.key", nil, "empty file")
	keyCase("secret key cut", decryptKeys, "secret.key", sk[:len(sk)-1], "truncated: payload")
	keyCase("secret key flipped", decryptKeys, "secret.key", flip(sk, len(sk)/2), "checksum mismatch")
	keyCase("secret key huge length", decryptKeys, "secret.key", withLength(sk, 1<<40), "more than the")
	require.NoError(t, os.MkdirAll(filepath.Join(hostile, "evk_dir", "eval.keys"), 0o755))
	tcs = append(tcs, hostileCase{"eval keys are a folder", evalKeys("h/evk_dir"), "h/evk_dir/eval.keys", "not a regular file"})

	// Broken input vectors.
	encryptIn := func(name, content, want string) {
		path := file(name, []byte(content))
		tcs = append(tcs, hostileCase{"encrypt " + name, []string{"encrypt", "-keys", "keys", "-in", path}, path, want})
	}
	encryptIn("nan.csv", strings.Replace(row, "0.4075", "NaN", 1), `column 2: "NaN" is not a finite number`)
	encryptIn("inf.csv", strings.Replace(row, "0.4075", "-Inf", 1), `column 2: "-Inf" is not a finite number`)
	encryptIn("word.csv", strings.Replace(row, "0.4075", "pump", 1), `column 2: "pump" is not a finite number`)
	encryptIn("few.csv", "0.5,0.25\n", "h/few.csv:1: 2 values, want 10")
	encryptIn("many.csv", strings.TrimSpace(row)+",1\n", "h/many.csv:1: 11 values, want 10")
	encryptIn("range.csv", strings.Replace(row, "0.4075", "40.75", 1), "value 40.75 in column 2 is outside the model's input range [-4, 4]")
	encryptIn("empty.csv", "", "no input vectors")
	encryptIn("comments.csv", "# features\n\n", "no input vectors")
	encryptIn("rows.csv", row+row, "has 2 vectors; choose one with -row")
	encryptIn("binary.csv", strings.Replace(row, "0.4075", "\x00\x01", 1), `column 2: "\x00\x01" is not a finite number`)
	tcs = append(tcs, hostileCase{"encrypt a folder", []string{"encrypt", "-keys", "keys", "-in", "h"}, "h", "not a regular file"})
	tcs = append(tcs, hostileCase{"encrypt row out of range", []string{"encrypt", "-keys", "keys", "-in", "in.csv", "-row", "2"},
		"in.csv", "has 1 vector; -row 2 is out of range"})

	out := filepath.Join(gb.dir, "out")
	require.NoError(t, os.MkdirAll(out, 0o755))
	for i, tc := range tcs {
		t.Run(tc.name, func(t *testing.T) {
			args := tc.args
			outName := fmt.Sprintf("out/%d.ct", i)
			if args[0] == "encrypt" || args[0] == "eval" {
				args = append(args, "-out", outName)
			}
			r := gb.exec(t, args...)
			require.NotZero(t, r.code, "%v succeeded", args)
			require.Empty(t, r.stdout, "%v printed results", args)
			line := strings.TrimSuffix(r.stderr, "\n")
			require.NotContains(t, line, "\n", "%v: more than one line on stderr", args)
			require.NotContains(t, line, "panic")
			require.NotContains(t, line, "goroutine")
			require.NotContains(t, line, "internal error")
			require.True(t, strings.HasPrefix(line, "gearbox "+args[0]+": "), line)
			require.Contains(t, line, tc.file, "the error names the file")
			require.Contains(t, line, tc.want)
			entries, err := os.ReadDir(out)
			require.NoError(t, err)
			require.Empty(t, entries, "output left behind")
		})
	}
	// Nothing of the above changed the real files.
	for name, b := range map[string][]byte{"x.ct": x, "y.ct": y, "keys/secret.key": sk} {
		require.Equal(t, b, read(name), name)
	}
	r := gb.exec(t, "decrypt", "-keys", "keys", "-in", "y.ct")
	require.Zero(t, r.code, r.stderr)
}

// readPrefix reads the first n bytes of a file.
func readPrefix(path string, n int) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	b := make([]byte, n)
	_, err = f.ReadAt(b, 0)
	return b, err
}

// reseal sets a file's payload length and checksum to match its payload,
// as a forger would.
func reseal(b []byte) []byte {
	out := bytes.Clone(b)
	binary.LittleEndian.PutUint64(out[hdrLength:], uint64(len(out)-hdrSize))
	sum := sha256.Sum256(out[hdrSize:])
	copy(out[hdrChecksum:], sum[:])
	return out
}
