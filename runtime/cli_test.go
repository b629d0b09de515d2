package runtime

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"

	"github.com/stretchr/testify/require"
)

// toyModel multiplies its input slot-wise by a weight vector and rescales:
// one level, result at the default scale. Its two values sit in two
// ciphertexts (chunks of one value), so the command line handles files of
// several ciphertexts. Small parameters (ring degree 2^10, two levels) keep
// the command-line tests fast.
type toyModel struct {
	p *Params
	w []float64
	x []*Plaintext // one per chunk
}

// toyWeights are the model's weights, one per slot of a period of 2.
var toyWeights = []float64{0.5, -2}

var toyParams struct {
	once sync.Once
	spec ParamSpec
	err  error
}

func toySpec(t *testing.T, model string) ParamSpec {
	t.Helper()
	toyParams.once.Do(func() {
		q, p, err := GeneratePrimes(10, []int{40, 30}, []int{45})
		toyParams.spec, toyParams.err = ParamSpec{LogN: 10, Q: q, P: p, LogScale: 30}, err
	})
	require.NoError(t, toyParams.err)
	s := toyParams.spec
	s.ModelID = model
	return s
}

func loadToy(p *Params) (Model, error) {
	blob, err := BuildWeights([]string{"w0", "w1"}, [][]float64{{toyWeights[0], 0}, {toyWeights[1], 0}})
	if err != nil {
		return nil, err
	}
	w, err := decodeWeights(blob)
	if err != nil {
		return nil, err
	}
	enc := NewEncoder(p, w)
	pts := []*Plaintext{enc.Plaintext("w0", 1, Scale{Num: []int{1}}, 2), enc.Plaintext("w1", 1, Scale{Num: []int{1}}, 2)}
	return &toyModel{p: p, w: toyWeights, x: pts}, enc.Err()
}

// Evaluate multiplies each chunk by its weights and rescales.
func (m *toyModel) Evaluate(ev *Evaluator, x []*Ciphertext) ([]*Ciphertext, error) {
	if len(x) != len(m.x) {
		return nil, fmt.Errorf("%d ciphertexts, want %d", len(x), len(m.x))
	}
	y := make([]*Ciphertext, len(x))
	for j := range x {
		ev.Expect(x[j], 1, Scale{Pow2: 30})
		y[j] = ev.Rescale(ev.MulPlain(x[j], m.x[j]))
	}
	return y, ev.Err()
}

// Reference is the same product in float64.
func (m *toyModel) Reference(x []float64) ([]float64, error) {
	return []float64{x[0] * m.w[0], x[1] * m.w[1]}, nil
}

// ReferenceExact is Reference: the model has no activation.
func (m *toyModel) ReferenceExact(x []float64) ([]float64, error) { return m.Reference(x) }

func toyInfo(t *testing.T, model string) ModelInfo {
	return ModelInfo{
		Name: "toy", InputName: "x", InputSize: 2, InputMin: -1, InputMax: 1,
		OutputName: "y", OutputSize: 2,
		Input:  Layout{Size: 2, Chunk: 1, Copies: 1, Period: 2},
		Output: Layout{Size: 2, Chunk: 1, Copies: 1, Period: 2},
		Params: toySpec(t, model), Precision: 12,
		Result: &LevelScale{Level: 0, Scale: Scale{Pow2: 30}},
	}
}

// cliRun runs the toy program's command line in dir.
type cliRun struct {
	code           int
	stdout, stderr string
}

func runToy(t *testing.T, info ModelInfo, dir string, args ...string) cliRun {
	t.Helper()
	wd, err := os.Getwd()
	require.NoError(t, err)
	require.NoError(t, os.Chdir(dir))
	defer func() { require.NoError(t, os.Chdir(wd)) }()
	var out, errOut bytes.Buffer
	code := RunCLI(info, loadToy, args, &out, &errOut)
	return cliRun{code, out.String(), errOut.String()}
}

// toyFiles makes keys, an input file, x.ct and y.ct in a fresh folder.
func toyFiles(t *testing.T, info ModelInfo) string {
	t.Helper()
	dir := t.TempDir()
	require.NoError(t, os.WriteFile(filepath.Join(dir, "in.csv"), []byte("0.25,-0.5\n"), 0o644))
	for _, args := range [][]string{
		{"keygen", "-dir", "keys"},
		{"encrypt", "-keys", "keys", "-in", "in.csv", "-out", "x.ct"},
		{"eval", "-keys", "keys/eval", "-in", "x.ct", "-out", "y.ct"},
	} {
		r := runToy(t, info, dir, args...)
		require.Zero(t, r.code, "%v: %s", args, r.stderr)
	}
	return dir
}

func TestCLIWorkflow(t *testing.T) {
	info := toyInfo(t, "cli-toy")
	dir := toyFiles(t, info)
	r := runToy(t, info, dir, "decrypt", "-keys", "keys", "-in", "y.ct")
	require.Zero(t, r.code, r.stderr)
	got := strings.Split(strings.TrimSpace(r.stdout), ",")
	require.Len(t, got, 2)
	for i, want := range []float64{0.25 * 0.5, -0.5 * -2} {
		v, err := strconv.ParseFloat(got[i], 64)
		require.NoError(t, err)
		require.InDelta(t, want, v, 1e-3)
	}
	// The caution (Li and Micciancio 2021) comes with every decryption and
	// names the rounding that keeps the program's 12 bits: 3 digits.
	require.Contains(t, r.stderr, "Li and Micciancio, 2021")
	require.Contains(t, r.stderr, "decrypt -round 3 keeps the 12 bits")

	r = runToy(t, info, dir, "decrypt", "-keys", "keys", "-in", "y.ct", "-round", "3")
	require.Zero(t, r.code, r.stderr)
	require.Equal(t, "0.125,1.000\n", r.stdout)
	for _, bad := range []string{"-2", "16", "400"} {
		r = runToy(t, info, dir, "decrypt", "-keys", "keys", "-in", "y.ct", "-round", bad)
		require.Equal(t, 2, r.code, "-round %s", bad)
		require.Contains(t, r.stderr, "-round "+bad+": want 0..15 digits")
		require.Empty(t, r.stdout)
	}
}

// Values printed rounded: the sign of a value that rounds to zero is
// noise and is dropped; digits are capped at float64's 15.
func TestFormatValues(t *testing.T) {
	for _, tc := range []struct {
		y      []float64
		digits int
		want   string
	}{
		{[]float64{0.12345, -1.5}, 2, "0.12,-1.50"},
		{[]float64{-0.0004, math.Copysign(0, -1)}, 3, "0.000,0.000"},
		{[]float64{-0.0004}, -1, "-0.0004"},
		{[]float64{1e20}, 0, "100000000000000000000"},
		{[]float64{1.0 / 3}, 99, "0.333333333333333"},
		{[]float64{2.5, 3.5}, 0, "2,4"}, // halves to even, as strconv rounds
	} {
		require.Equal(t, tc.want, FormatValues(tc.y, tc.digits), "%v at %d digits", tc.y, tc.digits)
	}
}

// Every output of a program with insecure parameters says so.
func TestCLIInsecure(t *testing.T) {
	info := toyInfo(t, "cli-insecure")
	info.Insecure = true
	dir := toyFiles(t, info)
	for _, args := range [][]string{
		{"keygen", "-dir", "keys2"},
		{"encrypt", "-keys", "keys", "-in", "in.csv", "-out", "x2.ct"},
		{"eval", "-keys", "keys/eval", "-in", "x.ct", "-out", "y2.ct"},
		{"decrypt", "-keys", "keys", "-in", "y.ct"},
		{"selftest", "-n", "1"},
		{"eval", "-h"},
		{"eval"},
	} {
		r := runToy(t, info, dir, args...)
		require.Contains(t, r.stderr, "INSECURE", "%v", args)
		if args[0] == "keygen" || args[0] == "selftest" {
			require.Contains(t, r.stdout, "INSECURE", "%v", args)
		}
	}
	for _, args := range [][]string{{}, {"-h"}} {
		r := runToy(t, info, dir, args...)
		require.Contains(t, r.stdout+r.stderr, "INSECURE", "%v", args)
	}
}

// Bad inputs to each command: a one-line error naming the file and what is
// wrong, a non-zero exit, nothing on stdout and no output file.
func TestCLIRefusals(t *testing.T) {
	info := toyInfo(t, "cli-toy")
	dir := toyFiles(t, info)
	other := toyFiles(t, toyInfo(t, "cli-other"))
	write := func(name, content string) string {
		require.NoError(t, os.WriteFile(filepath.Join(dir, name), []byte(content), 0o644))
		return name
	}
	require.NoError(t, os.MkdirAll(filepath.Join(dir, "withsk"), 0o755))
	require.NoError(t, os.Symlink(filepath.Join(dir, "keys", SecretKeyFile), filepath.Join(dir, "withsk", EvalKeysFile)))
	require.NoError(t, os.MkdirAll(filepath.Join(dir, "ctkeys"), 0o755))
	require.NoError(t, os.Symlink(filepath.Join(dir, "x.ct"), filepath.Join(dir, "ctkeys", SecretKeyFile)))
	for _, tc := range []struct {
		name string
		args []string
		want []string // substrings of the one line on stderr
	}{
		{"eval a result", []string{"eval", "-keys", "keys/eval", "-in", "y.ct"},
			[]string{"y.ct: ciphertext at level 0", "eval takes a ciphertext made by encrypt"}},
		{"decrypt an input", []string{"decrypt", "-keys", "keys", "-in", "x.ct"},
			[]string{"x.ct: ciphertext at level 1", "decrypt takes a result of eval"}},
		{"eval a secret key", []string{"eval", "-keys", "keys/eval", "-in", "keys/secret.key"},
			[]string{"keys/secret.key: this is a secret key, not a ciphertext: a secret key must stay with the client"}},
		{"eval keys are a secret key", []string{"eval", "-keys", "withsk", "-in", "x.ct"},
			[]string{"withsk/eval.keys: this is a secret key, not evaluation keys: a secret key must stay with the client"}},
		{"eval the client folder", []string{"eval", "-keys", "keys", "-in", "x.ct"},
			[]string{"keys holds a secret key"}},
		{"eval keys file as folder", []string{"eval", "-keys", "keys/eval/eval.keys", "-in", "x.ct"},
			[]string{"-keys keys/eval/eval.keys: not a folder"}},
		{"decrypt keys as ciphertext", []string{"decrypt", "-keys", "keys", "-in", "keys/eval/eval.keys"},
			[]string{"keys/eval/eval.keys: this is evaluation keys, not a ciphertext"}},
		{"decrypt ciphertext as key", []string{"decrypt", "-keys", "ctkeys", "-in", "y.ct"},
			[]string{"ctkeys/secret.key: this is a ciphertext, not a secret key"}},
		{"eval other model", []string{"eval", "-keys", "keys/eval", "-in", filepath.Join(other, "x.ct")},
			[]string{"x.ct: ciphertext for another model (fingerprint "}},
		{"eval other keys", []string{"eval", "-keys", filepath.Join(other, "keys", "eval"), "-in", "x.ct"},
			[]string{"eval.keys: evaluation keys for another model"}},
		{"decrypt other key", []string{"decrypt", "-keys", filepath.Join(other, "keys"), "-in", "y.ct"},
			[]string{"secret.key: secret key for another model"}},
		{"empty", []string{"eval", "-keys", "keys/eval", "-in", write("empty.ct", "")},
			[]string{"empty.ct: empty file"}},
		{"folder", []string{"decrypt", "-keys", "keys", "-in", "keys"},
			[]string{"keys: not a regular file"}},
		{"missing", []string{"decrypt", "-keys", "keys", "-in", "nothing.ct"},
			[]string{"nothing.ct: no such file"}},
		{"csv nan", []string{"encrypt", "-keys", "keys", "-in", write("nan.csv", "NaN,0\n")},
			[]string{`nan.csv:1: column 1: "NaN" is not a finite number`}},
		{"csv columns", []string{"encrypt", "-keys", "keys", "-in", write("short.csv", "\n0.5\n")},
			[]string{"short.csv:2: 1 value, want 2"}},
		{"csv range", []string{"encrypt", "-keys", "keys", "-in", write("range.csv", "0.5,1.5\n")},
			[]string{"range.csv: vector 1: value 1.5 in column 2 is outside the model's input range [-1, 1]"}},
		{"csv rows", []string{"encrypt", "-keys", "keys", "-in", write("rows.csv", "0,0\n0,0\n")},
			[]string{"rows.csv has 2 vectors; choose one with -row"}},
		{"csv folder", []string{"encrypt", "-keys", "keys", "-in", "keys"},
			[]string{"keys: not a regular file"}},
		{"out is a folder", []string{"encrypt", "-keys", "keys", "-in", "in.csv", "-out", "keys"},
			[]string{"keys: exists and is not a regular file"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			args := tc.args
			if args[0] != "decrypt" && !contains(args, "-out") {
				args = append(args, "-out", "out.ct")
			}
			r := runToy(t, info, dir, args...)
			require.Equal(t, 1, r.code, r.stderr)
			require.Empty(t, r.stdout)
			line := strings.TrimSuffix(r.stderr, "\n")
			require.NotContains(t, line, "\n", "one line")
			require.True(t, strings.HasPrefix(line, "toy "+args[0]+": "), line)
			for _, w := range tc.want {
				require.Contains(t, line, w)
			}
			requireNoOutput(t, dir, "out.ct")
		})
	}
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}

// requireNoOutput checks that dir holds no file name and no temporary file.
func requireNoOutput(t *testing.T, dir, name string) {
	t.Helper()
	_, err := os.Stat(filepath.Join(dir, name))
	require.True(t, os.IsNotExist(err), "%s left behind", name)
	entries, err := os.ReadDir(dir)
	require.NoError(t, err)
	for _, e := range entries {
		require.NotContains(t, e.Name(), ".tmp", "temporary file left behind")
	}
}

// keygen writes both key files or neither.
func TestKeygenAllOrNothing(t *testing.T) {
	info := toyInfo(t, "cli-toy")
	dir := t.TempDir()
	// The evaluation-keys path is taken by a folder: keygen fails after
	// writing the secret key's temporary file, and leaves nothing.
	require.NoError(t, os.MkdirAll(filepath.Join(dir, "keys", EvalKeysDir, EvalKeysFile), 0o755))
	r := runToy(t, info, dir, "keygen", "-dir", "keys")
	require.Equal(t, 1, r.code)
	require.Contains(t, r.stderr, "keys/eval/eval.keys: exists and is not a regular file")
	requireNoOutput(t, filepath.Join(dir, "keys"), SecretKeyFile)
	requireNoOutput(t, filepath.Join(dir, "keys", EvalKeysDir), "x")

	r = runToy(t, info, dir, "keygen", "-dir", "fresh")
	require.Zero(t, r.code, r.stderr)
	st, err := os.Stat(filepath.Join(dir, "fresh", SecretKeyFile))
	require.NoError(t, err)
	require.Equal(t, os.FileMode(0o600), st.Mode().Perm())
	r = runToy(t, info, dir, "keygen", "-dir", "fresh")
	require.Equal(t, 1, r.code)
	require.Contains(t, r.stderr, "fresh/secret.key exists")
}

func TestReadCSVRow(t *testing.T) {
	for _, tc := range []struct {
		name, data string
		n, row     int
		want       []float64
		count      int
		err        string
	}{
		{"one", "1,2\n", 2, 0, []float64{1, 2}, 1, ""},
		{"pick", "# x\n1,2\n\n 3 , 4 \r\n", 2, 2, []float64{3, 4}, 2, ""},
		{"no row", "1,2\n3,4", 2, 0, nil, 0, "in.csv has 2 vectors; choose one with -row"},
		{"row range", "1,2\n", 2, 2, nil, 0, "in.csv has 1 vector; -row 2 is out of range"},
		{"negative row", "1,2\n", 2, -1, nil, 0, "in.csv: vector -1 asked"},
		{"empty", "", 2, 0, nil, 0, "in.csv: no input vectors"},
		{"inf", "1,+Inf\n", 2, 0, nil, 0, `in.csv:1: column 2: "+Inf" is not a finite number`},
		{"overflow", "1,1e400\n", 2, 0, nil, 0, `in.csv:1: column 2: "1e400" is not a finite number`},
		{"later line bad", "1,2\n3,x\n", 2, 1, nil, 0, `in.csv:2: column 2: "x" is not a finite number`},
		{"many commas", strings.Repeat(",", 1<<20), 2, 0, nil, 0, "in.csv:1: 1048577 values, want 2"},
		{"long line", strings.Repeat("1", maxCSVLine+1), 1, 0, nil, 0, "in.csv:1: line longer than 16 MB"},
		{"n zero", "1\n", 0, 0, nil, 0, "in.csv: vectors of 0 values asked"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			x, count, err := readCSV(strings.NewReader(tc.data), "in.csv", tc.n, tc.row)
			if tc.err != "" {
				require.ErrorContains(t, err, tc.err)
				return
			}
			require.NoError(t, err)
			require.Equal(t, tc.want, x)
			require.Equal(t, tc.count, count)
		})
	}
	// Over the size cap: an error, not a silent truncation. (Long comment
	// lines keep the test fast.)
	big := "1,2\n" + strings.Repeat("#"+strings.Repeat(" ", 8<<20)+"\n", maxCSVSize/(8<<20))
	_, _, err := readCSV(strings.NewReader(big), "in.csv", 2, 1)
	require.ErrorContains(t, err, "in.csv: larger than 64 MB")
}

// checkAt names each of level, scale and degree that differs.
func TestCheckAt(t *testing.T) {
	e := ctParams.get(t)
	ct, err := encryptOne(e.p, e.sk, []float64{0.5}, 1)
	require.NoError(t, err)
	ev := NewEvaluator(e.p, nil)
	sq := ev.Mul(ct, ct)
	require.NoError(t, ev.Err())
	fresh := LevelScale{Level: 1, Scale: Scale{Pow2: 30}}
	require.NoError(t, e.p.checkAt(ct, fresh, 1))
	require.EqualError(t, e.p.checkAt(ct, LevelScale{Level: 0, Scale: Scale{Pow2: 30}}, 1), "ciphertext at level 1, want 0")
	require.EqualError(t, e.p.checkAt(sq, fresh, 1),
		"ciphertext at scale 2^60.000000000000, want 2^30.000000000000 (2^30), degree 2, want 1")
	require.ErrorContains(t, e.p.checkAt(ct, LevelScale{Scale: Scale{Num: []int{7}}}, 1), "no prime q7")
}
