package spec

import (
	"slices"
	"strings"
	"testing"
	"testing/fstest"

	"github.com/lanthorn/lanthorn/ir"
)

// convSpec has every tensor layer; its layer list starts on line 7.
const convSpec = `lanthorn: 1
model: digits
input:
  shape: [1, 4, 4]
  range: [0, 1]
layers:
  - kind: conv2d
    in: 1
    out: 2
    kernel: [2, 3]
    stride: 2
    padding: {top: 1, right: 1}
    weights: k.npy
    bias: [0.5, -0.5]
  - kind: batchnorm
    mean: [0.1, 0.2]
    variance: [1, 4]
    gamma: [2, 3]
    epsilon: 0.001
  - kind: activation
    function: square
  - kind: avgpool
    kernel: 2
  - kind: sumpool
    name: total
    kernel: [1, 1]
    stride: [1, 1]
  - kind: flatten
  - kind: scale
    factor: 0.5
  - kind: dense
    out: 1
    weights: [[1, -1]]
`

func TestParseTensorLayers(t *testing.T) {
	kernel := make([]float64, 2*1*2*3)
	for i := range kernel {
		kernel[i] = float64(i) / 10
	}
	g, files, err := parseSafely(t, "digits.yaml", convSpec, fstest.MapFS{"k.npy": npyBytes(t, kernel, 2, 1, 2, 3)})
	if err != nil {
		t.Fatal(err)
	}
	if err := ir.VerifyGraph(g); err != nil {
		t.Fatal(err)
	}
	if g.Input.Size != 16 || len(g.Input.Shape) != 3 {
		t.Errorf("input %+v", g.Input)
	}
	// Padded to 5×5, kernel 2×3, stride 2: (5-2)/2+1 = 2 rows, (5-3)/2+1 = 2 columns.
	want := []struct {
		name  string
		kind  ir.LayerKind
		shape []int
	}{
		{"conv1", ir.Conv2D, []int{2, 2, 2}}, {"norm1", ir.BatchNorm, []int{2, 2, 2}}, {"act1", ir.Activation, []int{2, 2, 2}},
		{"pool1", ir.AvgPool, []int{2, 1, 1}}, {"total", ir.SumPool, []int{2, 1, 1}}, {"flatten1", ir.Flatten, []int{2}},
		{"scale1", ir.ScaleBy, []int{2}}, {"dense1", ir.Dense, []int{1}},
	}
	if len(g.Layers) != len(want) {
		t.Fatalf("%d layers, want %d", len(g.Layers), len(want))
	}
	for i, w := range want {
		l := g.Layers[i]
		if l.Name != w.name || l.Kind != w.kind || !slices.Equal(l.Outs(), w.shape) {
			t.Errorf("layer %d: %s %s %v, want %s %s %v", i, l.Name, l.Kind, l.Outs(), w.name, w.kind, w.shape)
		}
	}
	c := g.Layers[0]
	if *c.Window != (ir.Window{KH: 2, KW: 3, SH: 2, SW: 2, Pad: [4]int{1, 0, 0, 1}}) || c.Kernel[5] != 0.5 || c.Bias[1] != -0.5 {
		t.Errorf("conv %+v kernel %v bias %v", *c.Window, c.Kernel, c.Bias)
	}
	n := g.Layers[1].Norm
	if n.Eps != 0.001 || n.Beta[1] != 0 || n.Gamma[1] != 3 || n.Var[1] != 4 {
		t.Errorf("norm %+v", n)
	}
	if p := g.Layers[3].Window; p.SH != 2 || p.SW != 2 {
		t.Errorf("pool stride defaults to the kernel: %+v", p)
	}
	if g.Layers[6].Factor != 0.5 {
		t.Errorf("factor %g", g.Layers[6].Factor)
	}
	if strings.Join(files, ",") != "digits.yaml,k.npy" {
		t.Errorf("files %v", files)
	}
}

// Inline kernels are nested lists of shape [out, in, kh, kw].
func TestParseInlineKernel(t *testing.T) {
	src := "lanthorn: 1\nmodel: m\ninput: {shape: [2, 2, 2], range: [0, 1]}\nlayers:\n" +
		"  - kind: conv2d\n    out: 1\n    kernel: 1\n    weights: [[[[1]], [[2]]]]\n"
	g, _, err := parseSafely(t, "m.yaml", src, nil)
	if err != nil {
		t.Fatal(err)
	}
	if l := g.Layers[0]; !slices.Equal(l.Kernel, []float64{1, 2}) || !slices.Equal(l.Outs(), []int{1, 2, 2}) {
		t.Errorf("kernel %v shape %v", l.Kernel, l.Outs())
	}
}

// Shape errors name the layer and point at its line.
func TestTensorLayerErrors(t *testing.T) {
	img := "lanthorn: 1\nmodel: m\ninput:\n  shape: [1, 4, 4]\n  range: [0, 1]\nlayers:\n"
	vec := "lanthorn: 1\nmodel: m\ninput:\n  size: 16\n  range: [0, 1]\nlayers:\n"
	for _, tc := range []struct {
		name, src string
		want      []string
	}{
		{"kernel too big", img + "  - kind: conv2d\n    out: 1\n    kernel: 5\n    weights: [[[[1]]]]\n", []string{
			`m.yaml:9:13: conv1: kernel 5×5 does not fit the 4×4 input (the layer before gives 1×4×4)`}},
		{"kernel too big padded", img + "  - kind: avgpool\n    kernel: 2\n  - kind: conv2d\n    out: 1\n    kernel: 5\n    padding: 1\n    weights: [[[[1]]]]\n", []string{
			`m.yaml:11:13: conv1: kernel 5×5 does not fit the 2×2 input padded to 4×4 (the layer before gives 1×2×2)`}},
		{"conv on a vector", vec + "  - kind: conv2d\n    out: 1\n    kernel: 1\n    weights: [[[[1]]]]\n", []string{
			`m.yaml:7:5: conv1: conv2d needs an image, a [C, H, W] tensor; its input is a vector of 16`}},
		{"pool after flatten", img + "  - kind: flatten\n  - kind: sumpool\n    kernel: 2\n", []string{
			`m.yaml:8:5: pool1: sumpool needs an image, a [C, H, W] tensor; its input is a vector of 16`}},
		{"in channels", img + "  - kind: conv2d\n    in: 3\n    out: 1\n    kernel: 1\n    weights: [[[[1]]]]\n", []string{
			`m.yaml:8:9: conv1: in: 3 input channels, but the layer before gives 1 (a 1×4×4 tensor)`}},
		{"kernel weights shape", img + "  - kind: conv2d\n    out: 2\n    kernel: 1\n    weights: [[[[1]]]]\n", []string{
			`m.yaml:10:14: conv1: weights shape [1 1 1 1], want [2 1 1 1] (out × in × kernel height × kernel width)`}},
		{"dense on an image", img + "  - kind: dense\n    out: 1\n    weights: [[1]]\n", []string{
			`m.yaml:7:5: dense1: dense layer on a 1×4×4 tensor; add a flatten layer before it`}},
		{"batchnorm channels", img + "  - kind: batchnorm\n    mean: [0, 0]\n    variance: [1]\n", []string{
			`m.yaml:8:11: norm1: mean has 2 numbers, want 1 (channels)`}},
		{"batchnorm variance", img + "  - kind: batchnorm\n    mean: [0]\n    variance: [-1]\n", []string{
			`m.yaml:9:15: norm1: variance[0] is -1; variances must be >= 0 and variance + epsilon > 0`}},
		{"batchnorm missing", img + "  - kind: batchnorm\n", []string{
			`m.yaml:7:5: norm1: missing required key "mean"`, `m.yaml:7:5: norm1: missing required key "variance"`}},
		{"scale zero", img + "  - kind: scale\n    factor: 0\n", []string{
			`m.yaml:8:13: scale1: factor: found 0, expected a nonzero number`}},
		{"pool padding", img + "  - kind: avgpool\n    kernel: 2\n    padding: 1\n", []string{
			`m.yaml:9:5: pool1: pools take no padding`}},
		{"bad stride", img + "  - kind: avgpool\n    kernel: 2\n    stride: [0, 1]\n", []string{
			`m.yaml:9:14: pool1: stride[0]: found integer 0, expected an integer >= 1`}},
		{"padding key", img + "  - kind: conv2d\n    out: 1\n    kernel: 1\n    padding: {up: 1}\n    weights: [[[[1]]]]\n", []string{
			`m.yaml:10:15: unknown key "up" in conv1: padding; expected one of: top, bottom, left, right`}},
		{"inline kernel ragged", img + "  - kind: conv2d\n    out: 1\n    kernel: [1, 2]\n    weights: [[[[1, 2, 3]]]]\n", []string{
			`m.yaml:10:14: conv1: weights shape [1 1 1 3], want [1 1 1 2]`}},
		{"shape and size", "lanthorn: 1\nmodel: m\ninput:\n  size: 3\n  shape: [1, 1, 3]\n  range: [0, 1]\nlayers:\n  - kind: flatten\n", []string{
			`m.yaml:5:3: input: both size and shape given`}},
		{"shape rank", "lanthorn: 1\nmodel: m\ninput:\n  shape: [2, 3]\n  range: [0, 1]\nlayers:\n  - kind: flatten\n", []string{
			`m.yaml:4:10: input.shape: found a list of 2 items, expected a list [C, H, W]`}},
		{"unknown conv key", img + "  - kind: conv2d\n    out: 1\n    kernel: 1\n    dilation: 2\n    weights: [[[[1]]]]\n", []string{
			`m.yaml:10:5: unknown key "dilation" in conv2d layer; expected one of: name, in, out, kernel, stride, padding, weights, bias`}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, _, err := parseSafely(t, "m.yaml", tc.src, nil)
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error text\n%s\ndoes not contain\n%s", err, w)
				}
			}
		})
	}
}
