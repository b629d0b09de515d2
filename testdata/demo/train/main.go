// Command train builds the model of lanthorn's demo scenario: gearbox failure
// risk scored on encrypted vibration features.
//
// A wind-turbine maker (the vendor) owns a small neural network that scores
// gearbox vibration features for failure risk. A wind-farm operator does not
// want to reveal its fleet's sensor data: it standardises and encrypts each
// turbine's feature vector, the vendor evaluates the network on the
// ciphertext, and the operator decrypts the risk score (a logit; above 0
// means "schedule an inspection").
//
// Everything here is invented. The trainer draws synthetic turbines from a
// hidden ground-truth rule with noise, standardises the ten features with
// means and standard deviations rounded to four significant digits (printed,
// and copied into ../README.md and ../gearbox.yaml), clips them to [-4, 4],
// and trains the network
//
//	10 → dense 16 → tanh → dense 8 → square → dense 1 (logit "risk")
//
// with mini-batch AdamW, using the exact tanh and x² while training. After
// every step the first layer is projected so that no input in the clipped
// box [-4, 4]^10 can drive a tanh input outside the interval [-4, 4] that
// gearbox.yaml declares for its polynomial approximation (a guarantee, not
// only a property of the training set); a penalty keeps the square's inputs
// within a few units. It then writes, under the directory given by -o:
//
//	weights/dense{1,2,3}_{w,b}.npy  float64, weights [out, in], bias [out]
//	input.csv                       four standardised feature vectors
//	expected.csv                    the float64 network's logits for them
//
// and prints accuracies, activation ranges and, for odd Chebyshev degrees,
// the approximation error of tanh on the declared interval together with its
// effect on the logits. Regenerate with, from the repository root:
//
//	go run ./testdata/demo/train -o testdata/demo
//
// The output is byte-for-byte reproducible, also across architectures and
// GOAMD64 levels: the only random source is a seeded PCG, normals are drawn
// without library transcendentals, exp and tanh are computed here in plain
// arithmetic rather than by math.Exp (which on amd64 takes a different path
// when the CPU has FMA), and every product that feeds a sum is wrapped in an
// explicit float64 conversion, which the Go spec defines as a rounding that
// forbids fusing it into a multiply-add.
package main

import (
	"bytes"
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

	"github.com/lanthorn/lanthorn/spec"
)

// Sizes of the synthetic data set and of the network.
const (
	numTrain = 4000
	numTest  = 2000
	numIn    = 10
	numH1    = 16
	numH2    = 8
	numOut   = 1
	numRows  = 4 // feature vectors written to input.csv
)

// Bounds that gearbox.yaml relies on. tanhBound must equal the half-width of
// act1's interval; inputClip the half-width of input.range.
const (
	inputClip    = 4.0
	tanhBound    = 4.0
	tanhDegree   = 15  // act1's degree; the report marks it
	squareMargin = 3.0 // the square-input penalty starts here
)

// Training hyper-parameters.
const (
	epochs      = 200
	batchSize   = 250
	learnRate   = 0.01 // decays linearly to learnRate*finalLRFrac
	finalLRFrac = 0.05
	weightDecay = 1e-3 // decoupled (AdamW), weights only
	beta1       = 0.9
	beta2       = 0.999
	adamEps     = 1e-8
	penalty     = 1.0 // weight of the squared hinge on the square's inputs
)

// The seed of the one random source (PCG).
const seedHi, seedLo = 0x6765617262, 0x6f78

// feature describes one input of the model.
type feature struct {
	name, unit, what string
}

// features lists the model inputs in order.
var features = [numIn]feature{
	{"gmf_rms", "mm/s", "RMS vibration velocity in the gear-mesh frequency band"},
	{"kurtosis", "-", "kurtosis of the high-speed-shaft acceleration signal"},
	{"crest_factor", "-", "peak over RMS of the acceleration signal"},
	{"sideband_energy", "dB", "energy in the gear-mesh sidebands relative to the mesh tone"},
	{"oil_temp_delta", "K", "gearbox oil temperature above nacelle ambient"},
	{"bearing_envelope", "g²", "envelope-spectrum energy in the bearing defect band"},
	{"shaft_1x", "mm/s", "amplitude at shaft order 1 (imbalance)"},
	{"shaft_2x", "mm/s", "amplitude at shaft order 2 (misalignment)"},
	{"load", "% rated", "drive-train torque as a share of rated torque"},
	{"rotor_speed", "rpm", "rotor speed"},
}

func main() {
	out := flag.String("o", "testdata/demo", "demo directory to write weights/, input.csv and expected.csv into")
	flag.Parse()
	if flag.NArg() != 0 {
		fmt.Fprintf(os.Stderr, "train: unexpected arguments %q; usage: train [-o DIR]\n", flag.Args())
		os.Exit(2)
	}
	if err := run(*out, os.Stdout); err != nil {
		fmt.Fprintf(os.Stderr, "train: %v\n", err)
		os.Exit(1)
	}
}

// run trains the model, writes its files under dir and reports to log.
func run(dir string, log io.Writer) error {
	r := newRNG()
	trainRaw, trainY := synth(r, numTrain)
	testRaw, testY := synth(r, numTest)
	mean, std := standardiser(trainRaw)
	trainX := standardise(trainRaw, mean, std)
	testX := standardise(testRaw, mean, std)

	fmt.Fprintf(log, "synthetic turbines: %d train (%.1f%% at risk), %d test (%.1f%% at risk)\n",
		numTrain, 100*share(trainY), numTest, 100*share(testY))
	fmt.Fprintln(log, "standardisation (z = (x - mean) / std, then clip to [-4, 4]):")
	for i, f := range features {
		fmt.Fprintf(log, "  %2d %-17s mean %-8s std %-8s %-8s %s\n", i, f.name, fmtG(mean[i]), fmtG(std[i]), f.unit, f.what)
	}

	net := newNet(r)
	train(net, r, trainX, trainY)

	trainAcc, trainStats := evaluate(net, trainX, trainY)
	testAcc, testStats := evaluate(net, testX, testY)
	fmt.Fprintf(log, "accuracy (logit > 0): train %.2f%%, test %.2f%%\n", 100*trainAcc, 100*testAcc)
	fmt.Fprintf(log, "max |tanh input|:     train %.3f, test %.3f (declared interval [-%g, %g]; worst case over the input box %.2f)\n",
		trainStats.maxPre1, testStats.maxPre1, tanhBound, tanhBound, net.boxBound())
	fmt.Fprintf(log, "max |square input|:   train %.3f, test %.3f\n", trainStats.maxPre2, testStats.maxPre2)
	fmt.Fprintf(log, "logit range:          train [%.2f, %.2f], test [%.2f, %.2f]\n",
		trainStats.minLogit, trainStats.maxLogit, testStats.minLogit, testStats.maxLogit)
	if m := math.Max(trainStats.maxPre1, testStats.maxPre1); m > tanhBound {
		return fmt.Errorf("tanh pre-activations reach %.3f, outside the declared interval [-%g, %g]", m, tanhBound, tanhBound)
	}
	chebReport(log, net, testX, testY)

	rows, rowsY := pickRows(net, testX, testY)
	if len(rows) < numRows {
		return fmt.Errorf("sample input: only %d of %d test turbines are classified with a margin", len(rows), numRows)
	}
	files := map[string][]byte{}
	if err := net.encode(files); err != nil {
		return err
	}
	files["input.csv"] = csv(rows)
	expected := make([][]float64, len(rows))
	for i, x := range rows {
		expected[i] = []float64{net.forward(x, tanh).logit}
	}
	files["expected.csv"] = csv(expected)
	c := chebFit(math.Tanh, tanhDegree, tanhBound)
	poly := func(x float64) float64 { return chebEval(c, x/tanhBound) }
	fmt.Fprintf(log, "input.csv rows: label, logit (exact tanh), logit (degree-%d interpolant):\n", tanhDegree)
	for i, x := range rows {
		fmt.Fprintf(log, "  row %d: %d  %8.4f  %8.4f\n", i+1, int(rowsY[i]), expected[i][0], net.forward(x, poly).logit)
	}
	return writeFiles(dir, files)
}

// ---- synthetic data -------------------------------------------------------

// rng draws from a seeded PCG using only operations whose results are fixed
// by the algorithm: no library transcendentals.
type rng struct{ src *rand.PCG }

func newRNG() *rng { return &rng{rand.NewPCG(seedHi, seedLo)} }

// uniform returns a float64 in [0, 1) from the top 53 bits of the source.
func (r *rng) uniform() float64 { return float64(r.src.Uint64()>>11) * 0x1p-53 }

// normal returns an approximately standard normal value: the Irwin–Hall sum
// of twelve uniforms minus six (mean 0, variance 1, support [-6, 6]).
func (r *rng) normal() float64 {
	s := 0.0
	for range 12 {
		s += r.uniform()
	}
	return s - 6
}

// intn returns an integer in [0, n) (with a negligible modulo bias).
func (r *rng) intn(n int) int { return int(r.src.Uint64() % uint64(n)) }

// synth draws n turbines: raw feature vectors and labels (1 = at risk).
//
// Three hidden wear states drive the features: gear-tooth wear g, a bearing
// defect b and shaft misalignment m, all log-normal and mostly small. The
// hidden rule scores them, weighted up under high load, adds noise and
// thresholds; the features only see the wear states through noise.
func synth(r *rng, n int) ([][]float64, []float64) {
	xs := make([][]float64, n)
	ys := make([]float64, n)
	for i := range n {
		g := exp(float64(0.9*r.normal()) - 1.2)
		b := exp(float64(1.0*r.normal()) - 1.6)
		m := exp(float64(0.8*r.normal()) - 1.4)
		load := float64(0.8*r.uniform()) + 0.2
		speed := float64(6*load) + float64(0.6*r.normal()) + 9

		mesh := float64(0.8*load) + 0.6
		x := make([]float64, numIn)
		x[0] = (float64(2.5*g) + 1.0) * mesh * exp(float64(0.1*r.normal()))
		x[1] = float64(4*b) + float64(0.8*g) + float64(0.3*math.Abs(r.normal())) + 3
		x[2] = float64(0.9*b) + float64(0.4*g) + float64(0.2*r.normal()) + 2.8
		x[3] = float64(14*(g/(g+0.4))) + float64(1.5*r.normal()) - 32
		x[4] = float64(9*load) + float64(3*g) + float64(2*b) + float64(1.5*r.normal()) + 6
		x[5] = float64(float64(0.5*b*(speed/12))*exp(float64(0.15*r.normal()))) + 0.04
		x[6] = float64(1.4*m) + float64(0.15*r.normal()) + 0.7
		x[7] = float64(1.1*m) + float64(0.25*g) + float64(0.12*r.normal()) + 0.35
		x[8] = 100 * load
		x[9] = speed
		xs[i] = x

		risk := float64(1.8*g*mesh) + float64(2.2*b) + float64(0.9*m*m) + float64(0.6*g*b) + float64(0.35*r.normal()) - 1.6
		if risk > 0 {
			ys[i] = 1
		}
	}
	return xs, ys
}

// standardiser returns the training set's per-feature mean and standard
// deviation, each rounded to four significant digits so that the values the
// client is told to use are exactly the ones the model was trained with.
func standardiser(xs [][]float64) (mean, std []float64) {
	mean = make([]float64, numIn)
	std = make([]float64, numIn)
	n := float64(len(xs))
	for i := range numIn {
		s := 0.0
		for _, x := range xs {
			s += x[i]
		}
		mu := s / n
		v := 0.0
		for _, x := range xs {
			d := x[i] - mu
			v += float64(d * d)
		}
		mean[i] = round4(mu)
		std[i] = round4(math.Sqrt(v / n))
	}
	return mean, std
}

// round4 rounds x to four significant digits (decimal, exactly as printed).
func round4(x float64) float64 {
	v, _ := strconv.ParseFloat(strconv.FormatFloat(x, 'g', 4, 64), 64) // cannot fail: our own output
	return v
}

// standardise maps raw vectors to (x - mean) / std clipped to ±inputClip.
func standardise(xs [][]float64, mean, std []float64) [][]float64 {
	out := make([][]float64, len(xs))
	for k, x := range xs {
		z := make([]float64, numIn)
		for i := range numIn {
			z[i] = max(-inputClip, min(inputClip, (x[i]-mean[i])/std[i]))
		}
		out[k] = z
	}
	return out
}

// share returns the fraction of ones in ys.
func share(ys []float64) float64 {
	s := 0.0
	for _, y := range ys {
		s += y
	}
	return s / float64(len(ys))
}

// pickRows returns numRows test vectors, rounded to four decimals as a
// client would send them: alternately an at-risk and a healthy turbine that
// the model classifies correctly with a margin (|logit| ≥ 1), so that the
// demo's decisions do not hinge on the approximation of tanh.
func pickRows(n *net, xs [][]float64, ys []float64) ([][]float64, []float64) {
	var rows [][]float64
	var labels []float64
	want := 1.0
	for k, x := range xs {
		if len(rows) == numRows {
			break
		}
		if ys[k] != want {
			continue
		}
		row := make([]float64, numIn)
		for i, v := range x {
			row[i], _ = strconv.ParseFloat(strconv.FormatFloat(v, 'f', 4, 64), 64) // cannot fail: our own output
		}
		margin := n.forward(row, tanh).logit
		if want == 0 {
			margin = -margin
		}
		if margin < 1 {
			continue
		}
		rows = append(rows, row)
		labels = append(labels, want)
		want = 1 - want
	}
	return rows, labels
}

// ---- portable elementary functions ---------------------------------------

// exp returns e^x to within a couple of ulps using only +, -, *, / and
// exact scaling, so its result is the same on every platform: x = k·ln2 + r
// with |r| ≤ ln2/2, e^r by its Taylor series to degree 13 (the remainder is
// below 2e-16 relative), times 2^k.
func exp(x float64) float64 {
	const (
		ln2Hi = 6.93147180369123816490e-01 // ln 2 split so that k*ln2Hi is exact (common practice)
		ln2Lo = 1.90821492927058770002e-10
	)
	switch {
	case x != x:
		return x
	case x > 700:
		return math.Inf(1)
	case x < -700:
		return 0
	}
	k := math.Round(x / math.Ln2)
	r := x - float64(k*ln2Hi) - float64(k*ln2Lo)
	p := 1.0
	for n := 13; n >= 1; n-- {
		p = float64(p*r)/float64(n) + 1
	}
	return p * math.Float64frombits(uint64(int64(k)+1023)<<52)
}

// tanh returns the hyperbolic tangent through exp; its absolute error is
// within a few times 1e-16.
func tanh(x float64) float64 {
	a := math.Abs(x)
	if a > 20 {
		return math.Copysign(1, x)
	}
	t := 1 - 2/(exp(2*a)+1)
	return math.Copysign(t, x)
}

// sigmoid returns 1 / (1 + e^-x).
func sigmoid(x float64) float64 { return 1 / (1 + exp(-x)) }

// ---- network --------------------------------------------------------------

// layer is a dense layer: out = w·in + b, w stored row-major [out][in].
type layer struct {
	in, out int
	w, b    []float64
}

// net is the demo network.
type net struct{ l1, l2, l3 *layer }

// newNet initialises the network with scaled normal weights and zero biases.
// The second layer starts small so that the squares start near zero.
func newNet(r *rng) *net {
	mk := func(in, out int, scale float64) *layer {
		l := &layer{in: in, out: out, w: make([]float64, in*out), b: make([]float64, out)}
		s := scale / math.Sqrt(float64(in))
		for i := range l.w {
			l.w[i] = s * r.normal()
		}
		return l
	}
	return &net{l1: mk(numIn, numH1, 1.0), l2: mk(numH1, numH2, 0.5), l3: mk(numH2, numOut, 0.5)}
}

// apply computes dst = l.w·x + l.b.
func (l *layer) apply(dst, x []float64) {
	for o := range l.out {
		s := l.b[o]
		row := l.w[o*l.in : (o+1)*l.in]
		for i, w := range row {
			s += float64(w * x[i])
		}
		dst[o] = s
	}
}

// trace holds one forward pass.
type trace struct {
	pre1, h1, pre2, h2 []float64
	logit              float64
}

// forward evaluates the network on x with the given tanh (exact, or a
// polynomial approximation for the sensitivity report).
func (n *net) forward(x []float64, act func(float64) float64) trace {
	t := trace{pre1: make([]float64, numH1), h1: make([]float64, numH1), pre2: make([]float64, numH2), h2: make([]float64, numH2)}
	n.l1.apply(t.pre1, x)
	for j, z := range t.pre1 {
		t.h1[j] = act(z)
	}
	n.l2.apply(t.pre2, t.h1)
	for k, u := range t.pre2 {
		t.h2[k] = u * u
	}
	var out [1]float64
	n.l3.apply(out[:], t.h2)
	t.logit = out[0]
	return t
}

// boxBound returns the largest |tanh input| the first layer can produce for
// any input in the clipped box [-inputClip, inputClip]^numIn.
func (n *net) boxBound() float64 {
	m := 0.0
	for o := range n.l1.out {
		s := math.Abs(n.l1.b[o])
		for _, w := range n.l1.w[o*numIn : (o+1)*numIn] {
			s += float64(inputClip * math.Abs(w))
		}
		m = max(m, s)
	}
	return m
}

// projectBox scales down every first-layer row (weights and bias) whose
// worst case over the input box exceeds tanhBound, so that no clipped input
// can drive a tanh input outside the declared interval.
func (n *net) projectBox() {
	for o := range n.l1.out {
		row := n.l1.w[o*numIn : (o+1)*numIn]
		s := math.Abs(n.l1.b[o])
		for _, w := range row {
			s += float64(inputClip * math.Abs(w))
		}
		if s <= tanhBound {
			continue
		}
		f := tanhBound / s
		for i := range row {
			row[i] *= f
		}
		n.l1.b[o] *= f
	}
}

// grads holds gradients shaped like a net.
type grads struct{ l1, l2, l3 *layer }

func newGrads() *grads {
	mk := func(in, out int) *layer {
		return &layer{in: in, out: out, w: make([]float64, in*out), b: make([]float64, out)}
	}
	return &grads{mk(numIn, numH1), mk(numH1, numH2), mk(numH2, numOut)}
}

// hinge returns the derivative of (|z| - c)_+², the penalty on a value that
// leaves [-c, c].
func hinge(z, c float64) float64 {
	a := math.Abs(z) - c
	if a <= 0 {
		return 0
	}
	return math.Copysign(2*a, z)
}

// backward adds to g the gradient, scaled by 1/batch, of the logistic loss
// plus the range penalties at sample x with label y.
func (n *net) backward(g *grads, x []float64, y, inv float64) {
	t := n.forward(x, tanh)
	gy := float64((sigmoid(t.logit) - y) * inv)
	g.l3.b[0] += gy
	gu := make([]float64, numH2)
	for k := range numH2 {
		g.l3.w[k] += float64(gy * t.h2[k])
		gu[k] = float64(float64(gy*n.l3.w[k])*(2*t.pre2[k])) + float64(penalty*inv*hinge(t.pre2[k], squareMargin))
	}
	gh := make([]float64, numH1)
	for k := range numH2 {
		g.l2.b[k] += gu[k]
		for j := range numH1 {
			g.l2.w[k*numH1+j] += float64(gu[k] * t.h1[j])
			gh[j] += float64(gu[k] * n.l2.w[k*numH1+j])
		}
	}
	for j := range numH1 {
		h := t.h1[j]
		gz := float64(gh[j] * (1 - float64(h*h)))
		g.l1.b[j] += gz
		for i := range numIn {
			g.l1.w[j*numIn+i] += float64(gz * x[i])
		}
	}
}

// adam is the optimiser state of one parameter slice.
type adam struct{ m, v []float64 }

// step applies one AdamW update to p with gradient g; c1 and c2 are the bias
// corrections 1-β1^t and 1-β2^t, decay the decoupled weight decay rate.
func (a *adam) step(p, g []float64, lr, c1, c2, decay float64) {
	if a.m == nil {
		a.m, a.v = make([]float64, len(p)), make([]float64, len(p))
	}
	for i := range p {
		a.m[i] = float64(beta1*a.m[i]) + float64((1-beta1)*g[i])
		a.v[i] = float64(beta2*a.v[i]) + float64(float64((1-beta2)*g[i])*g[i])
		upd := (a.m[i] / c1) / (math.Sqrt(a.v[i]/c2) + adamEps)
		p[i] = p[i] - float64(lr*upd) - float64(float64(lr*decay)*p[i])
	}
}

// train runs mini-batch AdamW over shuffled epochs with a linearly decaying
// learning rate.
func train(n *net, r *rng, xs [][]float64, ys []float64) {
	order := make([]int, len(xs))
	for i := range order {
		order[i] = i
	}
	params := []*layer{n.l1, n.l2, n.l3}
	opt := make([]struct{ w, b adam }, len(params))
	steps := epochs * (len(xs) / batchSize)
	p1, p2 := 1.0, 1.0
	t := 0
	for range epochs {
		for i := len(order) - 1; i > 0; i-- {
			j := r.intn(i + 1)
			order[i], order[j] = order[j], order[i]
		}
		for start := 0; start+batchSize <= len(order); start += batchSize {
			g := newGrads()
			inv := 1.0 / batchSize
			for _, k := range order[start : start+batchSize] {
				n.backward(g, xs[k], ys[k], inv)
			}
			p1, p2 = float64(p1*beta1), float64(p2*beta2)
			frac := float64(t) / float64(steps)
			lr := learnRate * (1 - float64((1-finalLRFrac)*frac))
			gl := []*layer{g.l1, g.l2, g.l3}
			for i, l := range params {
				opt[i].w.step(l.w, gl[i].w, lr, 1-p1, 1-p2, weightDecay)
				opt[i].b.step(l.b, gl[i].b, lr, 1-p1, 1-p2, 0)
			}
			n.projectBox()
			t++
		}
	}
}

// stats are the ranges seen over a data set.
type stats struct {
	maxPre1, maxPre2   float64
	minLogit, maxLogit float64
}

// evaluate returns the accuracy at threshold 0 and the activation ranges.
func evaluate(n *net, xs [][]float64, ys []float64) (float64, stats) {
	s := stats{minLogit: math.Inf(1), maxLogit: math.Inf(-1)}
	right := 0
	for k, x := range xs {
		t := n.forward(x, tanh)
		if (t.logit > 0) == (ys[k] == 1) {
			right++
		}
		for _, z := range t.pre1 {
			s.maxPre1 = max(s.maxPre1, math.Abs(z))
		}
		for _, u := range t.pre2 {
			s.maxPre2 = max(s.maxPre2, math.Abs(u))
		}
		s.minLogit, s.maxLogit = min(s.minLogit, t.logit), max(s.maxLogit, t.logit)
	}
	return float64(right) / float64(len(xs)), s
}

// ---- Chebyshev report -------------------------------------------------------

// chebReport prints, for odd degrees, the maximum error of the Chebyshev
// interpolant of tanh on [-tanhBound, tanhBound] (on a fine grid) and the
// largest change it causes in the test logits, the number of test decisions
// it flips and the test accuracy with it in place of tanh. The figures are for choosing act1's degree; nothing
// here reaches the written files.
func chebReport(log io.Writer, n *net, xs [][]float64, ys []float64) {
	exact := make([]float64, len(xs))
	for k, x := range xs {
		exact[k] = n.forward(x, tanh).logit
	}
	fmt.Fprintf(log, "Chebyshev interpolant of tanh on [-%g, %g] (test set):\n", tanhBound, tanhBound)
	fmt.Fprintln(log, "  degree  max|tanh-p|  max|Δlogit|  flips  accuracy")
	for d := 3; d <= 31; d += 2 {
		c := chebFit(math.Tanh, d, tanhBound)
		p := func(x float64) float64 { return chebEval(c, x/tanhBound) }
		errMax := 0.0
		const grid = 20000
		for i := 0; i <= grid; i++ {
			x := tanhBound * (2*float64(i)/grid - 1)
			errMax = max(errMax, math.Abs(math.Tanh(x)-p(x)))
		}
		dMax, flips, right := 0.0, 0, 0
		for k, x := range xs {
			l := n.forward(x, p).logit
			dMax = max(dMax, math.Abs(l-exact[k]))
			if (l > 0) != (exact[k] > 0) {
				flips++
			}
			if (l > 0) == (ys[k] == 1) {
				right++
			}
		}
		mark := ""
		if d == tanhDegree {
			mark = "  ← gearbox.yaml"
		}
		fmt.Fprintf(log, "  %6d  %11.3e  %11.3e  %5d  %7.2f%%%s\n", d, errMax, dMax, flips, 100*float64(right)/float64(len(xs)), mark)
	}
}

// chebFit returns the Chebyshev coefficients c_0..c_d of the degree-d
// interpolant of f on [-a, a] at the d+1 Chebyshev points of the first kind
// (the discrete cosine formula, e.g. Numerical Recipes §5.8).
func chebFit(f func(float64) float64, d int, a float64) []float64 {
	n := d + 1
	fx := make([]float64, n)
	for k := range n {
		fx[k] = f(a * math.Cos(math.Pi*(float64(k)+0.5)/float64(n)))
	}
	c := make([]float64, n)
	for j := range n {
		s := 0.0
		for k := range n {
			s += float64(fx[k] * math.Cos(math.Pi*float64(j)*(float64(k)+0.5)/float64(n)))
		}
		c[j] = 2 * s / float64(n)
	}
	c[0] /= 2
	return c
}

// chebEval evaluates Σ c_j T_j(t) by Clenshaw's recurrence.
func chebEval(c []float64, t float64) float64 {
	var b1, b2 float64
	for j := len(c) - 1; j >= 1; j-- {
		b1, b2 = float64(2*t*b1)-b2+c[j], b1
	}
	return float64(t*b1) - b2 + c[0]
}

// ---- output ---------------------------------------------------------------

// encode adds the six .npy files of n to files.
func (n *net) encode(files map[string][]byte) error {
	for i, l := range []*layer{n.l1, n.l2, n.l3} {
		name := fmt.Sprintf("dense%d", i+1)
		for _, part := range []struct {
			suffix string
			data   []float64
			shape  []int
		}{
			{"w", l.w, []int{l.out, l.in}},
			{"b", l.b, []int{l.out}},
		} {
			var buf bytes.Buffer
			path := "weights/" + name + "_" + part.suffix + ".npy"
			if err := spec.WriteNPY(&buf, part.data, part.shape); err != nil {
				return fmt.Errorf("encode %s: %w", path, err)
			}
			files[path] = buf.Bytes()
		}
	}
	return nil
}

// csv formats rows as comma-separated shortest round-trip decimals.
func csv(rows [][]float64) []byte {
	var b strings.Builder
	for _, row := range rows {
		for i, v := range row {
			if i > 0 {
				b.WriteByte(',')
			}
			b.WriteString(strconv.FormatFloat(v, 'g', -1, 64))
		}
		b.WriteByte('\n')
	}
	return []byte(b.String())
}

// fmtG formats a standardisation constant as it is used (four digits).
func fmtG(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// writeFiles writes files under dir in sorted order, creating weights/.
func writeFiles(dir string, files map[string][]byte) error {
	if dir == "" {
		return errors.New("output directory: empty path")
	}
	if err := os.MkdirAll(filepath.Join(dir, "weights"), 0o755); err != nil {
		return fmt.Errorf("output directory: %w", err)
	}
	names := make([]string, 0, len(files))
	for name := range files {
		names = append(names, name)
	}
	slices.Sort(names)
	for _, name := range names {
		if err := os.WriteFile(filepath.Join(dir, filepath.FromSlash(name)), files[name], 0o644); err != nil {
			return fmt.Errorf("write %s: %w", name, err)
		}
	}
	return nil
}
