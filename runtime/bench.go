package runtime

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	goruntime "runtime"
	"runtime/debug"
	"slices"
	"strconv"
	"time"
)

// BenchResult is what `bench -json` prints: one JSON object, read by
// benchmark harnesses. Times are in milliseconds, sizes in MB (10^6 bytes).
type BenchResult struct {
	Model    string  `json:"model"`
	Threads  int     `json:"threads"`
	Runs     int     `json:"runs"`      // timed evaluations, after one warm-up
	MedianMS float64 `json:"median_ms"` // latency of one evaluation
	MinMS    float64 `json:"min_ms"`
	MaxMS    float64 `json:"max_ms"`
	KeysMB   float64 `json:"keys_mb"`   // evaluation keys, as serialised
	PeakMB   float64 `json:"peak_mb"`   // peak resident memory (see peakMemory)
	LoadMS   float64 `json:"load_ms"`   // weight encoding (the program's Load)
	KeygenMS float64 `json:"keygen_ms"` // making the keys, or reading them with -keys
}

// maxBenchRuns bounds bench -n.
const maxBenchRuns = 100000

func (c *cli) bench(args []string) error {
	fs := c.flags("bench", "[-n N] [-threads T] [-keys DIR] [-json]",
		"Measures the latency of one encrypted evaluation: makes keys in memory (or reads\n"+
			"them with -keys), encrypts a sample input drawn from the declared range,\n"+
			"evaluates once to warm up, checks that result against the float64 model,\n"+
			"then times N evaluations. Prints the median, min and max, the evaluation-key\n"+
			"size, the peak memory, the threads and the time to encode the weights.")
	n := fs.Int("n", 10, "timed `runs` after the warm-up")
	threads := threadsFlag(fs)
	keys := fs.String("keys", "", "key `folder` made by keygen (reads its "+SecretKeyFile+" and "+EvalKeysDir+"/"+EvalKeysFile+"); default: fresh keys in memory")
	seed := fs.Uint64("seed", 1, "seed of the sample input")
	asJSON := fs.Bool("json", false, "print one JSON object instead of text: model, threads, runs, median_ms, min_ms, max_ms, keys_mb, peak_mb, load_ms, keygen_ms")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *n < 1 || *n > maxBenchRuns {
		fmt.Fprintf(fs.Output(), "-n %d: want 1..%d runs\n", *n, maxBenchRuns)
		fs.Usage()
		return errCLIUsage
	}
	if err := checkThreads(fs, *threads); err != nil {
		return err
	}
	p, err := c.params()
	if err != nil {
		return err
	}
	start := time.Now()
	sk, evk, err := c.benchKeys(p, *keys)
	if err != nil {
		return err
	}
	keygen := time.Since(start)
	start = time.Now()
	m, err := c.load(p)
	if err != nil {
		return err
	}
	load := time.Since(start)

	r := rand.New(rand.NewPCG(*seed, 0x62656e6368))
	x := make([]float64, c.info.InputSize)
	for j := range x {
		x[j] = c.info.InputMin + r.Float64()*(c.info.InputMax-c.info.InputMin)
	}
	in, err := Encrypt(p, sk, x, c.info.Input)
	if err != nil {
		return err
	}
	ev := NewParallelEvaluator(p, evk, *threads)

	// The peak is measured over the evaluations only: key generation's
	// garbage is returned to the system first and the high-water mark
	// reset where the system allows it.
	debug.FreeOSMemory()
	resetPeak := resetPeakMemory()

	res, _, err := c.benchEvaluate(p, m, ev, in)
	if err != nil {
		return fmt.Errorf("warm-up: %w", err)
	}
	prec, err := c.benchCheck(p, sk, m, x, res)
	if err != nil {
		return err
	}
	times := make([]time.Duration, *n)
	for i := range times {
		if _, times[i], err = c.benchEvaluate(p, m, ev, in); err != nil {
			return fmt.Errorf("run %d: %w", i+1, err)
		}
	}
	peak, how := peakMemory()
	if resetPeak {
		how += ", over the evaluations"
	} else {
		how += ", since the process started (key generation included)"
	}
	slices.Sort(times)
	out := BenchResult{
		Model:    c.info.Name,
		Threads:  ev.Threads(),
		Runs:     len(times),
		MedianMS: ms(medianDuration(times)),
		MinMS:    ms(times[0]),
		MaxMS:    ms(times[len(times)-1]),
		KeysMB:   round3(float64(evk.Size()) / 1e6),
		PeakMB:   round3(float64(peak) / 1e6),
		LoadMS:   ms(load),
		KeygenMS: ms(keygen),
	}
	if *asJSON {
		b, err := json.Marshal(out)
		if err != nil {
			return err
		}
		_, err = fmt.Fprintf(c.stdout, "%s\n", b)
		return err
	}
	keysHow := "generated in memory"
	if *keys != "" {
		keysHow = "read from " + *keys
	}
	w := bufio.NewWriter(c.stdout)
	fmt.Fprintf(w, "%s bench: %d runs after 1 warm-up, %s (GOMAXPROCS %d)%s\n", c.info.Name, out.Runs, threadsText(out.Threads), goruntime.GOMAXPROCS(0), c.insecureSuffix())
	fmt.Fprintf(w, "  latency of one encrypted evaluation: %s ms median, %s min, %s max\n", fmtMS(out.MedianMS), fmtMS(out.MinMS), fmtMS(out.MaxMS))
	fmt.Fprintf(w, "  evaluation keys:                     %.1f MB (%d rotation keys), %s in %s ms\n", out.KeysMB, len(c.info.Keys.Rotations), keysHow, fmtMS(out.KeygenMS))
	fmt.Fprintf(w, "  weight encoding (Load):              %s ms, once per process\n", fmtMS(out.LoadMS))
	fmt.Fprintf(w, "  peak memory:                         %.1f MB (%s)\n", out.PeakMB, how)
	fmt.Fprintf(w, "  warm-up result vs float64 model:     max abs error %.3g (%.1f bits; target %d)\n", prec.MaxAbsErr, prec.Bits, c.info.Precision)
	return w.Flush()
}

// benchKeys makes keys in memory, or reads them from the folder dir made by
// keygen.
func (c *cli) benchKeys(p *Params, dir string) (*SecretKey, *EvaluationKeys, error) {
	if dir == "" {
		return GenerateKeys(p, c.info.Keys)
	}
	if err := keyFolder(dir); err != nil {
		return nil, nil, err
	}
	sk, err := ReadSecretKey(filepath.Join(dir, SecretKeyFile), p)
	if err != nil {
		return nil, nil, err
	}
	evk, err := ReadEvaluationKeys(filepath.Join(dir, EvalKeysDir, EvalKeysFile), p, c.info.Keys)
	if err != nil {
		return nil, nil, err
	}
	return sk, evk, nil
}

// benchEvaluate is bench's one call of the model: it times Evaluate (which
// returns once every op is done) and checks the result's shape.
func (c *cli) benchEvaluate(p *Params, m Model, ev *Evaluator, in []*Ciphertext) ([]*Ciphertext, time.Duration, error) {
	start := time.Now()
	res, err := m.Evaluate(ev, in)
	took := time.Since(start)
	if err != nil {
		return nil, 0, err
	}
	if err := c.checkResult(p, res); err != nil {
		return nil, 0, fmt.Errorf("the model's result: %w (the program does not match its own plan)", err)
	}
	return res, took, nil
}

// benchCheck decrypts the warm-up result and compares it with the float64
// model: a benchmark of a wrong computation would mean nothing.
func (c *cli) benchCheck(p *Params, sk *SecretKey, m Model, x []float64, res []*Ciphertext) (Precision, error) {
	y, err := Decrypt(p, sk, res, c.info.Output)
	if err != nil {
		return Precision{}, err
	}
	want, err := m.Reference(x)
	if err != nil {
		return Precision{}, err
	}
	prec := Compare(want, y)
	if math.IsNaN(prec.MaxAbsErr) || prec.Bits < float64(c.info.Precision) {
		return prec, fmt.Errorf("warm-up result differs from the float64 reference by %.3g (%.1f bits); the parameters were sized for %d bits",
			prec.MaxAbsErr, prec.Bits, c.info.Precision)
	}
	return prec, nil
}

func medianDuration(d []time.Duration) time.Duration {
	n := len(d)
	if n%2 == 1 {
		return d[n/2]
	}
	return (d[n/2-1] + d[n/2]) / 2
}

func ms(d time.Duration) float64 { return round3(float64(d) / 1e6) }

func round3(x float64) float64 { return math.Round(x*1000) / 1000 }

func fmtMS(x float64) string { return strconv.FormatFloat(x, 'f', 1, 64) }

// peakMemory returns the process's peak memory in bytes and how it was
// measured: the resident high-water mark VmHWM from /proc/self/status
// where there is one (Linux), else the bytes the Go runtime obtained from
// the system (runtime.MemStats.Sys), which bounds the Go heap's peak from
// above and never decreases.
func peakMemory() (uint64, string) {
	if kb, err := procStatusKB("VmHWM"); err == nil {
		return kb * 1024, "VmHWM from /proc/self/status"
	}
	var st goruntime.MemStats
	goruntime.ReadMemStats(&st)
	return st.Sys, "Go runtime MemStats.Sys, no /proc/self/status"
}

// resetPeakMemory resets the resident high-water mark (Linux 4.0 and
// later: writing 5 to /proc/self/clear_refs) and reports whether it could.
func resetPeakMemory() bool {
	if err := os.WriteFile("/proc/self/clear_refs", []byte("5"), 0); err != nil {
		return false
	}
	_, err := procStatusKB("VmHWM")
	return err == nil
}

// procStatusKB reads a "Name:   N kB" line of /proc/self/status.
func procStatusKB(name string) (uint64, error) {
	b, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return 0, err
	}
	for line := range bytes.Lines(b) {
		rest, ok := bytes.CutPrefix(line, []byte(name+":"))
		if !ok {
			continue
		}
		f := bytes.Fields(rest)
		if len(f) != 2 || string(f[1]) != "kB" {
			return 0, fmt.Errorf("/proc/self/status: %s: %q", name, bytes.TrimSpace(rest))
		}
		return strconv.ParseUint(string(f[0]), 10, 64)
	}
	return 0, errors.New("/proc/self/status: no " + name)
}
