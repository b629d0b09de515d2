package spec

import (
	"fmt"
	"math"
	"strings"

	"gopkg.in/yaml.v3"

	"github.com/lanthorn/lanthorn/ir"
)

var (
	convKeys  = []string{"name", "in", "out", "kernel", "stride", "padding", "weights", "bias"}
	poolKeys  = []string{"name", "kernel", "stride"}
	normKeys  = []string{"name", "gamma", "beta", "mean", "variance", "epsilon"}
	scaleKeys = []string{"name", "factor"}
	padKeys   = []string{"top", "bottom", "left", "right"}
)

// shapeWord writes a shape for messages: "1×28×28".
func shapeWord(shape []int) string {
	parts := make([]string, len(shape))
	for i, d := range shape {
		parts[i] = fmt.Sprint(d)
	}
	return strings.Join(parts, "×")
}

// image checks that a layer reads a [C, H, W] tensor; shape is nil when
// unknown, and then nothing is reported.
func (p *parser) image(item *yaml.Node, l *ir.Layer, shape []int) bool {
	if shape == nil {
		return false
	}
	if len(shape) != 3 {
		p.errorf(item, "%s: %s needs an image, a [C, H, W] tensor; its input is a vector of %d (declare the model input with shape: [C, H, W])", l.Name, l.Kind, shape[0])
		return false
	}
	return true
}

// pair reads n or [a, b], each in [lo, MaxElements].
func (p *parser) pair(n *yaml.Node, what string, lo int64) ([2]int, bool) {
	expect := fmt.Sprintf("an integer >= %d or a list of two, [height, width]", lo)
	if n.Kind == yaml.SequenceNode {
		if len(n.Content) != 2 {
			p.errorf(n, "%s: found %s, expected %s", what, describe(n), expect)
			return [2]int{}, false
		}
		a, ok1 := p.integer(resolve(n.Content[0]), what+"[0]", lo, MaxElements, fmt.Sprintf("an integer >= %d", lo))
		b, ok2 := p.integer(resolve(n.Content[1]), what+"[1]", lo, MaxElements, fmt.Sprintf("an integer >= %d", lo))
		return [2]int{a, b}, ok1 && ok2
	}
	v, ok := p.integer(n, what, lo, MaxElements, expect)
	return [2]int{v, v}, ok
}

// padding reads n (every side) or {top, bottom, left, right} (absent sides 0).
func (p *parser) padding(n *yaml.Node, what string) ([4]int, bool) {
	var pad [4]int
	if n.Kind == yaml.MappingNode {
		f := p.mapping(n, "in "+what)
		p.unknown(f, "in "+what, padKeys, padKeys)
		ok := true
		for i, k := range padKeys {
			if fl, has := f.get(k); has {
				v, good := p.integer(fl.val, what+"."+k, 0, MaxElements, "an integer >= 0")
				pad[i], ok = v, ok && good
			}
		}
		return pad, ok
	}
	v, ok := p.integer(n, what, 0, MaxElements, "an integer >= 0 (every side) or a mapping {top, bottom, left, right}")
	return [4]int{v, v, v, v}, ok
}

// window reads kernel and stride (default: strideDefault, or the kernel
// when strideDefault is 0) and, for convolutions, padding; it checks the
// window fits the input image and returns the output height and width.
func (p *parser) window(item *yaml.Node, f *fields, l *ir.Layer, shape []int, strideDefault int, padded bool) (*ir.Window, int, int, bool) {
	w := &ir.Window{}
	ok := true
	kn, hasKernel := f.get("kernel")
	if hasKernel {
		k, good := p.pair(kn.val, l.Name+": kernel", 1)
		w.KH, w.KW, ok = k[0], k[1], good
	} else {
		p.errorf(item, "%s: missing required key \"kernel\" (the window size: kernel: 5 or kernel: [5, 5])", l.Name)
		ok = false
	}
	w.SH, w.SW = strideDefault, strideDefault
	if strideDefault == 0 {
		w.SH, w.SW = w.KH, w.KW
	}
	if fl, has := f.get("stride"); has {
		s, good := p.pair(fl.val, l.Name+": stride", 1)
		w.SH, w.SW, ok = s[0], s[1], ok && good
	}
	if fl, has := f.get("padding"); has && padded {
		pad, good := p.padding(fl.val, l.Name+": padding")
		w.Pad, ok = pad, ok && good
	}
	if !ok || !p.image(item, l, shape) {
		return w, 0, 0, false
	}
	oh, ow := w.OutHW(shape[1], shape[2])
	if oh < 1 || ow < 1 {
		what := "input"
		if w.Pad != [4]int{} {
			what = fmt.Sprintf("input padded to %d×%d", shape[1]+w.Pad[0]+w.Pad[1], shape[2]+w.Pad[2]+w.Pad[3])
		}
		p.errorf(kn.val, "%s: kernel %d×%d does not fit the %d×%d %s (the layer before gives %s)", l.Name, w.KH, w.KW, shape[1], shape[2], what, shapeWord(shape))
		return w, 0, 0, false
	}
	return w, oh, ow, true
}

// conv decodes a conv2d layer and returns its output shape, or nil.
func (p *parser) conv(item *yaml.Node, f *fields, l *ir.Layer, shape []int) []int {
	outC := unknownSize
	if fl, ok := f.get("out"); ok {
		if v, ok := p.integer(fl.val, l.Name+": out", 1, MaxElements, "an integer >= 1 (output channels)"); ok {
			outC = v
		}
	} else {
		p.errorf(item, "%s: missing required key \"out\" (the number of output channels)", l.Name)
	}
	inC := unknownSize
	if len(shape) == 3 {
		inC = shape[0]
	}
	if fl, ok := f.get("in"); ok {
		if v, ok := p.integer(fl.val, l.Name+": in", 1, MaxElements, "an integer >= 1 (input channels)"); ok && inC != unknownSize && v != inC {
			p.errorf(fl.val, "%s: in: %d input channels, but the layer before gives %d (a %s tensor)", l.Name, v, inC, shapeWord(shape))
		}
	}
	w, oh, ow, fits := p.window(item, f, l, shape, 1, true)
	l.Window = w
	kh, kw := w.KH, w.KW
	if kh == 0 {
		kh, kw = unknownSize, unknownSize
	}
	if fl, ok := f.get("weights"); ok {
		l.Kernel = p.tensor(fl.val, l.Name+": weights", []int{outC, inC, kh, kw}, "out × in × kernel height × kernel width")
	} else {
		p.errorf(item, "%s: missing required key \"weights\" (a .npy file or nested lists of shape [out, in, kernel height, kernel width])", l.Name)
	}
	if fl, ok := f.get("bias"); ok {
		l.Bias = p.vectorOf(fl.val, l.Name+": bias", outC, "out")
	} else if outC > 0 {
		l.Bias = make([]float64, outC)
	}
	if !fits || outC == unknownSize {
		return nil
	}
	return []int{outC, oh, ow}
}

// pool decodes an avgpool or sumpool layer and returns its output shape.
func (p *parser) pool(item *yaml.Node, f *fields, l *ir.Layer, shape []int) []int {
	if fl, ok := f.get("padding"); ok {
		p.errorf(fl.key, "%s: pools take no padding", l.Name)
	}
	w, oh, ow, fits := p.window(item, f, l, shape, 0, false)
	l.Window = w
	if !fits {
		return nil
	}
	return []int{shape[0], oh, ow}
}

// batchNorm decodes a batch norm: one gamma, beta, mean and variance per
// channel (per element of a vector).
func (p *parser) batchNorm(item *yaml.Node, f *fields, l *ir.Layer, shape []int) {
	c := unknownSize
	if shape != nil {
		c = shape[0]
	}
	n := &ir.Norm{Eps: 1e-5}
	l.Norm = n
	read := func(key string, def float64, required bool) []float64 {
		if fl, ok := f.get(key); ok {
			return p.vectorOf(fl.val, l.Name+": "+key, c, "channels")
		}
		if required {
			p.errorf(item, "%s: missing required key %q (one value per channel)", l.Name, key)
			return nil
		}
		if c == unknownSize {
			return nil
		}
		v := make([]float64, c)
		for i := range v {
			v[i] = def
		}
		return v
	}
	n.Gamma = read("gamma", 1, false)
	n.Beta = read("beta", 0, false)
	n.Mean = read("mean", 0, true)
	n.Var = read("variance", 0, true)
	if fl, ok := f.get("epsilon"); ok {
		if x, problem := number(fl.val); problem != "" || x < 0 {
			if problem == "" {
				problem = fmt.Sprintf("found %s, expected a number >= 0", describe(fl.val))
			}
			p.errorf(fl.val, "%s: epsilon: %s", l.Name, problem)
		} else {
			n.Eps = x
		}
	}
	if fl, ok := f.get("variance"); ok {
		for i, v := range n.Var {
			if v < 0 || !(v+n.Eps > 0) {
				p.errorf(fl.val, "%s: variance[%d] is %s; variances must be >= 0 and variance + epsilon > 0", l.Name, i, fmtNum(v))
				break
			}
		}
	}
}

// scale decodes a scale layer: every value times a constant factor.
func (p *parser) scale(item *yaml.Node, f *fields, l *ir.Layer) {
	fl, ok := f.get("factor")
	if !ok {
		p.errorf(item, "%s: missing required key \"factor\" (the constant every value is multiplied by)", l.Name)
		return
	}
	x, problem := number(fl.val)
	switch {
	case problem != "":
		p.errorf(fl.val, "%s: factor: %s", l.Name, problem)
	case x == 0 || math.IsNaN(x):
		p.errorf(fl.val, "%s: factor: found 0, expected a nonzero number (a zero factor makes the output a constant)", l.Name)
	default:
		l.Factor = x
	}
}
