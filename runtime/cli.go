package runtime

import (
	"bufio"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"
)

// ModelInfo describes a generated program to the command line.
type ModelInfo struct {
	Name       string
	InputName  string
	InputSize  int
	InputMin   float64
	InputMax   float64
	OutputName string
	OutputSize int
	// Input and Output say where the input's and the output's elements sit
	// in their ciphertexts (see Layout); the output is read from the first
	// copy of each chunk.
	Input     Layout
	Output    Layout
	Params    ParamSpec
	Keys      KeyRequest
	Insecure  bool
	Precision int // bits of absolute precision the planner sized the parameters for
	// Result is the level and exact scale of Evaluate's result. When set,
	// eval checks its result against it and decrypt refuses a ciphertext
	// anywhere else (an encrypted input passed by mistake, or the result of
	// another plan); nil skips both checks.
	Result *LevelScale
}

// LevelScale is where a ciphertext sits in the modulus chain: its level and
// exact scale.
type LevelScale struct {
	Level int
	Scale Scale
}

// Model is a generated model with its weights encoded.
type Model interface {
	// Evaluate runs the model on an encrypted input, the ciphertexts of its
	// chunks in order, and returns those of the output.
	Evaluate(ev *Evaluator, x []*Ciphertext) ([]*Ciphertext, error)
	// Reference runs the same model in float64, activations as evaluated.
	Reference(x []float64) ([]float64, error)
	// ReferenceExact runs it with the exact activation functions.
	ReferenceExact(x []float64) ([]float64, error)
}

// Key file names inside a key folder made by keygen.
const (
	SecretKeyFile = "secret.key"
	EvalKeysDir   = "eval"
	EvalKeysFile  = "eval.keys"
)

// caution is printed by decrypt: a CKKS decryption carries the noise of
// the ciphertext in its low digits, from which the evaluating party can
// recover the secret key (Li and Micciancio, "On the Security of
// Homomorphic Encryption on Approximate Numbers", EUROCRYPT 2021).
// Rounding away the digits below the program's precision removes most of
// that noise; it is the mitigation this program offers, not a proof.
func (c *cli) caution() string {
	return fmt.Sprintf("caution: do not return decrypted values to the party that evaluated: the low digits of CKKS decryptions leak information about the secret key (Li and Micciancio, 2021). "+
		"Share only rounded values: decrypt -round %d keeps the %d bits of precision the program was sized for.", precisionDigits(c.info.Precision), c.info.Precision)
}

// precisionDigits is the number of decimal digits after the point that
// bits bits of absolute precision (an error below 2^-bits) hold.
func precisionDigits(bits int) int {
	return max(0, int(math.Floor(float64(bits)*math.Log10(2))))
}

// maxRoundDigits bounds decrypt -round: float64 holds about 15 decimal digits.
const maxRoundDigits = 15

// insecureNote is printed with every output of a program whose parameters
// exceed the 128-bit bound.
const insecureNote = "INSECURE: this program's parameters exceed the 128-bit security bound; do not protect real data with them."

// RunCLI is the command line of a generated program: keygen, encrypt, eval,
// decrypt, selftest and bench. It returns the process exit code.
func RunCLI(info ModelInfo, load func(*Params) (Model, error), args []string, stdout, stderr io.Writer) int {
	c := &cli{info: info, load: load, stdout: stdout, stderr: stderr}
	cmds := []struct {
		name, help string
		run        func([]string) error
	}{
		{"keygen", "client: make a secret key and the evaluation keys", c.keygen},
		{"encrypt", "client: encrypt one input vector from a CSV file", c.encrypt},
		{"eval", "server: evaluate the model on a ciphertext, with evaluation keys only", c.eval},
		{"decrypt", "client: decrypt a result and print the outputs", c.decrypt},
		{"selftest", "run keygen, encrypt, eval and decrypt in memory and compare with float64", c.selftest},
		{"bench", "measure the latency of one encrypted evaluation, the key size and peak memory", c.bench},
	}
	usage := func(w io.Writer) {
		fmt.Fprintf(w, "%s evaluates the %s model on CKKS-encrypted inputs.\n\nUsage: %s COMMAND [flags]\n\nCommands:\n", info.Name, info.Name, info.Name)
		for _, cmd := range cmds {
			fmt.Fprintf(w, "  %-9s %s\n", cmd.name, cmd.help)
		}
		fmt.Fprintf(w, "\nRun %s COMMAND -h for a command's flags.\n", info.Name)
		if info.Insecure {
			fmt.Fprintf(w, "\n%s\n", insecureNote)
		}
	}
	if len(args) == 0 {
		usage(stderr)
		return 2
	}
	if args[0] == "-h" || args[0] == "-help" || args[0] == "--help" || args[0] == "help" {
		usage(stdout)
		return 0
	}
	for _, cmd := range cmds {
		if cmd.name != args[0] {
			continue
		}
		if info.Insecure {
			fmt.Fprintf(stderr, "%s: %s\n", info.Name, insecureNote)
		}
		err := cmd.run(args[1:])
		switch {
		case err == nil:
			return 0
		case errors.Is(err, flag.ErrHelp):
			return 0
		case errors.Is(err, errCLIUsage):
			return 2
		default:
			fmt.Fprintf(stderr, "%s %s: %v\n", info.Name, cmd.name, err)
			return 1
		}
	}
	fmt.Fprintf(stderr, "%s: unknown command %q\n\n", info.Name, args[0])
	usage(stderr)
	return 2
}

var errCLIUsage = errors.New("usage")

type cli struct {
	info   ModelInfo
	load   func(*Params) (Model, error)
	stdout io.Writer
	stderr io.Writer
}

func (c *cli) flags(name, synopsis, doc string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(c.stderr)
	fs.Usage = func() {
		fmt.Fprintf(c.stderr, "Usage: %s %s %s\n\n%s\n", c.info.Name, name, synopsis, doc)
		if hasFlags(fs) {
			fmt.Fprintf(c.stderr, "\nFlags:\n")
			fs.PrintDefaults()
		}
	}
	return fs
}

func hasFlags(fs *flag.FlagSet) bool {
	n := 0
	fs.VisitAll(func(*flag.Flag) { n++ })
	return n > 0
}

func parse(fs *flag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return errCLIUsage
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(fs.Output(), "unexpected argument %q\n", fs.Arg(0))
		fs.Usage()
		return errCLIUsage
	}
	return nil
}

func required(fs *flag.FlagSet, names ...string) error {
	for _, n := range names {
		if fs.Lookup(n).Value.String() == "" {
			fmt.Fprintf(fs.Output(), "flag -%s is required\n", n)
			fs.Usage()
			return errCLIUsage
		}
	}
	return nil
}

func (c *cli) params() (*Params, error) {
	p, err := NewParams(c.info.Params)
	if err != nil {
		return nil, fmt.Errorf("parameters: %w", err)
	}
	if err := c.info.Input.Validate(p.Slots()); err != nil {
		return nil, fmt.Errorf("input %w", err)
	}
	if err := c.info.Output.Validate(p.Slots()); err != nil {
		return nil, fmt.Errorf("output %w", err)
	}
	return p, nil
}

func (c *cli) keygen(args []string) error {
	fs := c.flags("keygen", "-dir DIR", "Makes DIR/"+SecretKeyFile+" (the secret key, mode 0600: keep it on the client) and\nDIR/"+EvalKeysDir+"/"+EvalKeysFile+" (the evaluation keys: send the "+EvalKeysDir+" folder to the server).")
	dir := fs.String("dir", "", "key `folder` to create")
	force := fs.Bool("force", false, "overwrite an existing secret key")
	if err := parse(fs, args); err != nil {
		return err
	}
	if err := required(fs, "dir"); err != nil {
		return err
	}
	skPath := filepath.Join(*dir, SecretKeyFile)
	if _, err := os.Stat(skPath); err == nil && !*force {
		return fmt.Errorf("%s exists; keys encrypted under it would become unreadable if it were replaced (use -force to overwrite)", skPath)
	}
	p, err := c.params()
	if err != nil {
		return err
	}
	start := time.Now()
	sk, evk, err := GenerateKeys(p, c.info.Keys)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(filepath.Join(*dir, EvalKeysDir), 0o700); err != nil {
		return err
	}
	// Both files are written in full before either replaces anything, so a
	// failure leaves no half-made key folder.
	skFile, err := stageFile(skPath, 0o600, func(w io.Writer) error { return MarshalSecretKey(w, p, sk) })
	if err != nil {
		return err
	}
	evPath := filepath.Join(*dir, EvalKeysDir, EvalKeysFile)
	evFile, err := stageFile(evPath, 0o644, func(w io.Writer) error { return MarshalEvaluationKeys(w, p, evk) })
	if err != nil {
		skFile.abort()
		return err
	}
	if err := evFile.commit(); err != nil {
		skFile.abort()
		return err
	}
	if err := skFile.commit(); err != nil {
		return err
	}
	fmt.Fprintf(c.stdout, "wrote %s (secret, keep on the client) and %s (%.1f MB, %d rotation keys) in %s%s\n",
		skPath, evPath, float64(evk.Size())/1e6, len(c.info.Keys.Rotations), time.Since(start).Round(time.Millisecond), c.insecureSuffix())
	return nil
}

// insecureSuffix marks a line of output of an insecure program.
func (c *cli) insecureSuffix() string {
	if c.info.Insecure {
		return " (INSECURE parameters)"
	}
	return ""
}

func (c *cli) encrypt(args []string) error {
	fs := c.flags("encrypt", "-keys DIR -in FILE.csv -out FILE.ct",
		fmt.Sprintf("Encrypts one %s vector: %d comma-separated numbers in [%g, %g] on a line.", c.info.InputName, c.info.InputSize, c.info.InputMin, c.info.InputMax))
	keys := fs.String("keys", "", "key `folder` made by keygen (reads its "+SecretKeyFile+")")
	in := fs.String("in", "", "input `CSV` file; one vector per line")
	out := fs.String("out", "", "ciphertext `file` to write")
	row := fs.Int("row", 0, "which line of the CSV to encrypt, from 1 (needed when it has several)")
	if err := parse(fs, args); err != nil {
		return err
	}
	if err := required(fs, "keys", "in", "out"); err != nil {
		return err
	}
	x, _, err := ReadCSVRow(*in, c.info.InputSize, *row)
	if err != nil {
		return err
	}
	if err := c.checkRange(x); err != nil {
		return fmt.Errorf("%s: vector %d: %w", *in, max(*row, 1), err)
	}
	if err := keyFolder(*keys); err != nil {
		return err
	}
	p, err := c.params()
	if err != nil {
		return err
	}
	sk, err := ReadSecretKey(filepath.Join(*keys, SecretKeyFile), p)
	if err != nil {
		return err
	}
	cts, err := Encrypt(p, sk, x, c.info.Input)
	if err != nil {
		return err
	}
	return WriteCiphertexts(*out, p, cts)
}

// checkRange refuses inputs outside the declared range: the model's
// polynomial approximations hold only there.
func (c *cli) checkRange(x []float64) error {
	for i, v := range x {
		if v < c.info.InputMin || v > c.info.InputMax {
			return fmt.Errorf("value %g in column %d is outside the model's input range [%g, %g]", v, i+1, c.info.InputMin, c.info.InputMax)
		}
	}
	return nil
}

// keyFolder checks that path is a folder, as -keys wants.
func keyFolder(path string) error {
	st, err := os.Stat(path)
	if err != nil {
		return err // *PathError already names the folder
	}
	if !st.IsDir() {
		return fmt.Errorf("-keys %s: not a folder; pass the folder made by keygen", path)
	}
	return nil
}

func (c *cli) eval(args []string) error {
	fs := c.flags("eval", "-keys DIR -in FILE.ct -out FILE.ct [-threads T]",
		"Evaluates the model on an encrypted input with the evaluation keys only.\nRefuses a key folder that holds a secret key: the server must never have it.")
	keys := fs.String("keys", "", "`folder` holding "+EvalKeysFile+" (the "+EvalKeysDir+" folder made by keygen)")
	in := fs.String("in", "", "input ciphertext `file`")
	out := fs.String("out", "", "result ciphertext `file` to write")
	threads := threadsFlag(fs)
	if err := parse(fs, args); err != nil {
		return err
	}
	if err := required(fs, "keys", "in", "out"); err != nil {
		return err
	}
	if err := checkThreads(fs, *threads); err != nil {
		return err
	}
	if err := keyFolder(*keys); err != nil {
		return err
	}
	if _, err := os.Stat(filepath.Join(*keys, SecretKeyFile)); err == nil {
		return fmt.Errorf("%s holds a secret key (%s): the evaluating party must not have it; pass the %s folder only", *keys, SecretKeyFile, EvalKeysDir)
	}
	p, err := c.params()
	if err != nil {
		return err
	}
	// The input is small and the keys are large: check the input first.
	cts, err := ReadCiphertexts(*in, p, c.info.Input.Count())
	if err != nil {
		return serverSide(err)
	}
	fresh := LevelScale{Level: p.MaxLevel(), Scale: p.DefaultScale()}
	for _, ct := range cts {
		if err := p.checkAt(ct, fresh, 1); err != nil {
			return fmt.Errorf("%s: %w; eval takes a ciphertext made by encrypt (is this a result?)", *in, err)
		}
	}
	evk, err := ReadEvaluationKeys(filepath.Join(*keys, EvalKeysFile), p, c.info.Keys)
	if err != nil {
		return serverSide(err)
	}
	start := time.Now()
	m, err := c.load(p)
	if err != nil {
		return err
	}
	prep := time.Since(start)
	start = time.Now()
	ev := NewParallelEvaluator(p, evk, *threads)
	res, err := m.Evaluate(ev, cts)
	if err != nil {
		return fmt.Errorf("%s: %w", *in, err)
	}
	if err := c.checkResult(p, res); err != nil {
		return fmt.Errorf("%s: the model's result: %w (the program does not match its own plan)", *in, err)
	}
	took := time.Since(start)
	if err := WriteCiphertexts(*out, p, res); err != nil {
		return err
	}
	fmt.Fprintf(c.stderr, "evaluated in %s on %s (weights encoded in %s); wrote %s%s\n", took.Round(time.Millisecond), threadsText(ev.Threads()), prep.Round(time.Millisecond), *out, c.insecureSuffix())
	return nil
}

// checkResult checks that a result has the output layout's number of
// ciphertexts, each at the level and exact scale of Result when set.
func (c *cli) checkResult(p *Params, cts []*Ciphertext) error {
	if n := c.info.Output.Count(); len(cts) != n {
		return fmt.Errorf("%d ciphertexts, the output takes %d", len(cts), n)
	}
	if c.info.Result == nil {
		return nil
	}
	for i, ct := range cts {
		if err := p.checkCiphertext(ct); err != nil {
			return fmt.Errorf("ciphertext %d: %w", i, err)
		}
		if err := p.checkAt(ct, *c.info.Result, 1); err != nil {
			return err
		}
	}
	return nil
}

// serverSide adds, to an error about a file that turned out to be a secret
// key, that the evaluating party must not have it.
func serverSide(err error) error {
	var wk *wrongKindError
	if errors.As(err, &wk) && wk.got == kindSecretKey {
		return fmt.Errorf("%w: a secret key must stay with the client; delete this copy from the evaluating side", err)
	}
	return err
}

func (c *cli) decrypt(args []string) error {
	fs := c.flags("decrypt", "-keys DIR -in FILE.ct",
		fmt.Sprintf("Decrypts a result and prints the %d %s values, comma-separated.\nDo not return the values to the party that evaluated unless rounded (see -round).", c.info.OutputSize, c.info.OutputName))
	keys := fs.String("keys", "", "key `folder` made by keygen (reads its "+SecretKeyFile+")")
	in := fs.String("in", "", "result ciphertext `file`")
	round := fs.Int("round", -1, fmt.Sprintf("round to this many `digits` after the point, 0..%d, for results that will be shared (%d keeps the program's precision); -1 prints every digit", maxRoundDigits, precisionDigits(c.info.Precision)))
	if err := parse(fs, args); err != nil {
		return err
	}
	if err := required(fs, "keys", "in"); err != nil {
		return err
	}
	if *round < -1 || *round > maxRoundDigits {
		fmt.Fprintf(fs.Output(), "-round %d: want 0..%d digits, or -1 for all\n", *round, maxRoundDigits)
		fs.Usage()
		return errCLIUsage
	}
	if err := keyFolder(*keys); err != nil {
		return err
	}
	p, err := c.params()
	if err != nil {
		return err
	}
	cts, err := ReadCiphertexts(*in, p, c.info.Output.Count())
	if err != nil {
		return err
	}
	if err := c.checkResult(p, cts); err != nil {
		return fmt.Errorf("%s: %w; decrypt takes a result of eval (is this an encrypted input?)", *in, err)
	}
	sk, err := ReadSecretKey(filepath.Join(*keys, SecretKeyFile), p)
	if err != nil {
		return err
	}
	y, err := Decrypt(p, sk, cts, c.info.Output)
	if err != nil {
		return fmt.Errorf("%s: %w", *in, err)
	}
	fmt.Fprintln(c.stderr, c.caution())
	fmt.Fprintln(c.stdout, FormatValues(y, *round))
	return nil
}

// FormatValues prints values comma-separated, rounded to digits after the
// point when digits >= 0, else with 12 significant digits. Digits above 15
// are taken as 15, float64's decimal precision.
func FormatValues(y []float64, digits int) string {
	digits = min(digits, maxRoundDigits)
	parts := make([]string, len(y))
	for i, v := range y {
		if digits >= 0 {
			// 'f' rounds the decimal expansion itself, half to even, with
			// no overflow for large values or digit counts.
			s := strconv.FormatFloat(v, 'f', digits, 64)
			if strings.Trim(s, "-0.") == "" {
				s = strings.TrimPrefix(s, "-") // the sign of a rounded zero is noise
			}
			parts[i] = s
		} else {
			parts[i] = strconv.FormatFloat(v, 'g', 12, 64)
		}
	}
	return strings.Join(parts, ",")
}

func (c *cli) selftest(args []string) error {
	fs := c.flags("selftest", "[-n N] [-seed S] [-threads T]",
		"Makes keys in memory, encrypts random inputs from the declared range,\nevaluates, decrypts and compares with the float64 reference.")
	n := fs.Int("n", 3, "number of random inputs")
	seed := fs.Uint64("seed", 1, "seed of the random inputs")
	threads := threadsFlag(fs)
	if err := parse(fs, args); err != nil {
		return err
	}
	if *n < 1 {
		return fmt.Errorf("-n must be at least 1")
	}
	if err := checkThreads(fs, *threads); err != nil {
		return err
	}
	p, err := c.params()
	if err != nil {
		return err
	}
	start := time.Now()
	sk, evk, err := GenerateKeys(p, c.info.Keys)
	if err != nil {
		return err
	}
	keygen := time.Since(start)
	start = time.Now()
	m, err := c.load(p)
	if err != nil {
		return err
	}
	prep := time.Since(start)
	ev := NewParallelEvaluator(p, evk, *threads)
	r := rand.New(rand.NewPCG(*seed, 0x6c616e74686f726e))
	var worst, worstExact Precision
	var times []time.Duration
	for i := 0; i < *n; i++ {
		x := make([]float64, c.info.InputSize)
		for j := range x {
			x[j] = c.info.InputMin + r.Float64()*(c.info.InputMax-c.info.InputMin)
		}
		cts, err := Encrypt(p, sk, x, c.info.Input)
		if err != nil {
			return err
		}
		t0 := time.Now()
		res, err := m.Evaluate(ev, cts)
		if err != nil {
			return fmt.Errorf("input %d: %w", i+1, err)
		}
		times = append(times, time.Since(t0))
		if err := c.checkResult(p, res); err != nil {
			return fmt.Errorf("input %d: the model's result: %w", i+1, err)
		}
		y, err := Decrypt(p, sk, res, c.info.Output)
		if err != nil {
			return err
		}
		want, err := m.Reference(x)
		if err != nil {
			return err
		}
		exact, err := m.ReferenceExact(x)
		if err != nil {
			return err
		}
		worst = worse(worst, Compare(want, y))
		worstExact = worse(worstExact, Compare(exact, y))
	}
	slices.Sort(times)
	median := times[len(times)/2]
	w := bufio.NewWriter(c.stdout)
	fmt.Fprintf(w, "%s selftest: logN %d, %d levels, %d rotation keys, evaluation keys %.1f MB%s\n",
		c.info.Name, p.Spec().LogN, p.MaxLevel(), len(c.info.Keys.Rotations), float64(evk.Size())/1e6, c.insecureSuffix())
	fmt.Fprintf(w, "  precision vs float64 model (as encrypted):   max abs error %.3g (%.1f bits; target %d) over %d inputs\n", worst.MaxAbsErr, worst.Bits, c.info.Precision, *n)
	fmt.Fprintf(w, "  deviation from exact activations:            max abs error %.3g (%.1f bits)\n", worstExact.MaxAbsErr, worstExact.Bits)
	fmt.Fprintf(w, "  latency of one encrypted evaluation:         %s median of %d on %s (keygen %s, weight encoding %s)\n",
		median.Round(100*time.Microsecond), len(times), threadsText(ev.Threads()), keygen.Round(time.Millisecond), prep.Round(time.Millisecond))
	if err := w.Flush(); err != nil {
		return err
	}
	if math.IsNaN(worst.MaxAbsErr) || worst.Bits < float64(c.info.Precision) {
		return fmt.Errorf("encrypted results differ from the float64 reference by %.3g (%.1f bits); the parameters were sized for %d bits",
			worst.MaxAbsErr, worst.Bits, c.info.Precision)
	}
	return nil
}

func worse(a, b Precision) Precision {
	if b.MaxAbsErr > a.MaxAbsErr || math.IsNaN(b.MaxAbsErr) {
		return b
	}
	return a
}
