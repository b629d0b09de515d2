package spec

import (
	"fmt"
	"strconv"

	"gopkg.in/yaml.v3"

	"github.com/lanthorn/lanthorn/ir"
)

var (
	denseKeys  = []string{"name", "out", "weights", "bias"}
	actKeys    = []string{"name", "function", "interval", "degree", "tolerance", "coefficients"}
	actFuncs   = []ir.ActFunc{ir.Square, ir.Poly, ir.ReLU, ir.Sigmoid, ir.Tanh}
	actNames   = "square, poly, relu, sigmoid or tanh"
	defaultDeg = map[ir.ActFunc]int{ir.ReLU: 15, ir.Sigmoid: 7, ir.Tanh: 7}
)

// kindWords are the layer kinds and the words their default names start
// with; avgpool and sumpool share one count.
var kindWords = []struct {
	kind ir.LayerKind
	word string
}{
	{ir.Dense, "dense"}, {ir.Activation, "act"}, {ir.Conv2D, "conv"}, {ir.AvgPool, "pool"},
	{ir.SumPool, "pool"}, {ir.Flatten, "flatten"}, {ir.BatchNorm, "norm"}, {ir.ScaleBy, "scale"},
}

const kindNames = "dense, activation, conv2d, avgpool, sumpool, flatten, batchnorm or scale"

// layers decodes the layer list; shape is the input shape, nil when
// unknown because of an earlier error.
func (p *parser) layers(n *yaml.Node, shape []int) []*ir.Layer {
	if n.Kind != yaml.SequenceNode {
		p.errorf(n, "layers: found %s, expected a list of layers", describe(n))
		return nil
	}
	if len(n.Content) == 0 {
		p.errorf(n, "layers: the list is empty; a model needs at least one layer")
		return nil
	}
	if !p.charge(len(n.Content), n) {
		return nil
	}
	var out []*ir.Layer
	names := map[string]ir.Pos{}
	count := map[string]int{}
	for i, c := range n.Content {
		if p.exhausted {
			return nil
		}
		item := resolve(c)
		where := fmt.Sprintf("layers[%d]", i)
		if item.Kind != yaml.MappingNode {
			p.errorf(item, "%s: found %s, expected a layer (a mapping with a kind)", where, describe(item))
			shape = nil
			continue
		}
		f := p.mapping(item, "in "+where)

		var kind ir.LayerKind
		word := ""
		if k, ok := f.get("kind"); !ok {
			p.errorf(item, "%s: missing required key \"kind\" (%s)", where, kindNames)
		} else if s, ok := p.str(k.val, where+".kind", kindNames); ok {
			for _, kw := range kindWords {
				if ir.LayerKind(s) == kw.kind {
					kind, word = kw.kind, kw.word
				}
			}
			if kind == "" {
				p.errorf(k.val, "%s.kind: found string %q, expected %s", where, s, kindNames)
			}
		}

		// The default name counts the layers of its kind-word so far, named
		// or not: the second dense layer is dense2 whatever the first is
		// called.
		name := where
		if kind != "" {
			count[word]++
			name = word + strconv.Itoa(count[word])
		}
		namePos := p.pos(item)
		if nm, ok := f.get("name"); ok {
			namePos = p.pos(nm.val)
			if s, ok := p.ident(nm.val, where+".name", identName, identExpect); ok {
				name = s
			}
		}
		if kind != "" {
			if first, dup := names[name]; dup {
				p.errs = append(p.errs, &Error{Pos: namePos, Msg: fmt.Sprintf("duplicate layer name %q (first used at %s)", name, first)})
			} else {
				names[name] = namePos
			}
		}

		l := &ir.Layer{Name: name, Kind: kind, Pos: p.pos(item), In: unknownSize}
		if shape != nil {
			l.In = ir.Elems(shape)
			if len(shape) == 3 {
				l.InShape = shape
			}
		}
		keys := func(k []string) { p.unknown(f, fmt.Sprintf("in %s layer", kind), append([]string{"kind"}, k...), k) }
		switch kind {
		case ir.Dense:
			keys(denseKeys)
			if len(shape) == 3 {
				p.errorf(item, "%s: dense layer on a %s tensor; add a flatten layer before it", l.Name, shapeWord(shape))
				l.In = unknownSize
			}
			size := p.dense(item, f, l)
			shape = nil
			if size != unknownSize {
				shape = []int{size}
			}
		case ir.Activation:
			keys(actKeys)
			p.activation(item, f, l)
		case ir.Conv2D:
			keys(convKeys)
			shape = p.conv(item, f, l, shape)
		case ir.AvgPool, ir.SumPool:
			keys(poolKeys)
			shape = p.pool(item, f, l, shape)
		case ir.Flatten:
			keys([]string{"name"})
			if shape != nil {
				l.Out = l.In
				shape = []int{l.In}
			}
		case ir.BatchNorm:
			keys(normKeys)
			p.batchNorm(item, f, l, shape)
		case ir.ScaleBy:
			keys(scaleKeys)
			p.scale(item, f, l)
		default:
			shape = nil
		}
		if shape == nil {
			l.Out = unknownSize
		} else {
			l.Out = ir.Elems(shape)
			if len(shape) == 3 {
				l.OutShape = shape
			}
		}
		out = append(out, l)
	}
	return out
}

// dense decodes a dense layer whose In is set (maybe unknownSize) and
// returns its output size, or unknownSize.
func (p *parser) dense(item *yaml.Node, f *fields, l *ir.Layer) int {
	out := unknownSize
	if fl, ok := f.get("out"); ok {
		if v, ok := p.integer(fl.val, l.Name+": out", 1, MaxElements, "an integer >= 1"); ok {
			out = v
		}
	} else {
		p.errorf(item, "%s: missing required key \"out\" (the layer's output size)", l.Name)
	}
	l.Out = out
	if fl, ok := f.get("weights"); ok {
		l.Weights = p.matrix(fl.val, l.Name, out, l.In)
	} else {
		p.errorf(item, "%s: missing required key \"weights\" (a .npy file or a list of %s)", l.Name, listOf(out, "rows"))
	}
	if fl, ok := f.get("bias"); ok {
		l.Bias = p.vector(fl.val, l.Name, out)
	} else if out > 0 {
		l.Bias = make([]float64, out)
	}
	return out
}

// listOf writes "16 rows", or just "rows" when the count is unknown.
func listOf(n int, things string) string {
	if n == unknownSize {
		return things
	}
	return strconv.Itoa(n) + " " + things
}

// sizeWord writes a size for messages, "?" when unknown.
func sizeWord(n int) string {
	if n == unknownSize {
		return "?"
	}
	return strconv.Itoa(n)
}

// activation decodes an activation layer.
func (p *parser) activation(item *yaml.Node, f *fields, l *ir.Layer) {
	act := &ir.Act{}
	l.Act = act
	valid := false
	if fl, ok := f.get("function"); ok {
		if s, ok := p.str(fl.val, l.Name+": function", actNames); ok {
			for _, fn := range actFuncs {
				if ir.ActFunc(s) == fn {
					act.Func, valid = fn, true
				}
			}
			if !valid {
				p.errorf(fl.val, "%s: function: found string %q, expected %s", l.Name, s, actNames)
			}
		}
	} else {
		p.errorf(item, "%s: missing required key \"function\" (%s)", l.Name, actNames)
	}
	approx := act.Func == ir.ReLU || act.Func == ir.Sigmoid || act.Func == ir.Tanh

	if fl, ok := f.get("interval"); ok {
		act.Interval, _ = p.interval(fl.val, l.Name+": interval", "a, b")
	} else if approx {
		p.errorf(item, "%s: missing required key \"interval\": %s is approximated by a polynomial on an interval [a, b] that holds all its inputs, e.g. interval: [-4, 4]", l.Name, act.Func)
	}

	tol, hasTol := f.get("tolerance")
	_, hasDeg := f.get("degree")
	if hasTol {
		switch {
		case act.Func == ir.Square || act.Func == ir.Poly:
			p.errorf(tol.key, "%s: tolerance is only for relu, sigmoid and tanh; %s is evaluated exactly", l.Name, act.Func)
		case hasDeg:
			p.errorf(tol.key, "%s: both degree and tolerance given; give degree to fix the interpolant, or tolerance to let the planner choose the degree", l.Name)
		default:
			act.Tolerance, _ = p.tolerance1(tol.val, l.Name+": tolerance")
		}
	}
	if fl, ok := f.get("degree"); ok {
		switch act.Func {
		case ir.Square:
			p.errorf(fl.key, "%s: degree is only for relu, sigmoid and tanh; square is exactly degree 2", l.Name)
		case ir.Poly:
			p.errorf(fl.key, "%s: degree is only for relu, sigmoid and tanh; poly's degree follows from its coefficients", l.Name)
		default:
			act.Degree, _ = p.integer(fl.val, l.Name+": degree", 1, 63, "an integer from 1 to 63")
		}
	} else if approx && !hasTol && p.tolerance > 0 {
		act.Tolerance = p.tolerance // the model's default; the planner chooses the degree
	} else if approx && !hasTol {
		act.Degree = defaultDeg[act.Func]
	}

	if fl, ok := f.get("coefficients"); ok {
		if valid && act.Func != ir.Poly {
			p.errorf(fl.key, "%s: coefficients are only for function: poly (%s has none to give)", l.Name, act.Func)
		} else if c := p.coefficients(fl.val, l.Name); c != nil {
			act.Basis, act.Coeffs = ir.Monomial, c
		}
	} else if act.Func == ir.Poly {
		p.errorf(item, "%s: missing required key \"coefficients\": poly needs [c0, c1, ...] for c0 + c1 x + c2 x^2 + ...", l.Name)
	}
}

// coefficients reads a poly's monomial coefficients.
func (p *parser) coefficients(n *yaml.Node, name string) []float64 {
	what := name + ": coefficients"
	if n.Kind != yaml.SequenceNode || len(n.Content) < 2 {
		p.errorf(n, "%s: found %s, expected a list of at least two numbers [c0, c1, ...]", what, describe(n))
		return nil
	}
	c, ok := p.inlineNumbers(n.Content, n, what, nil)
	if !ok {
		return nil
	}
	if c[len(c)-1] == 0 {
		p.errorf(resolve(n.Content[len(n.Content)-1]), "%s: the last coefficient is 0; it must be nonzero (it sets the degree), so drop trailing zeros", what)
		return nil
	}
	return c
}

// tolerance1 reads a tolerance: the largest absolute error allowed between
// an activation and its interpolant over the declared interval.
func (p *parser) tolerance1(n *yaml.Node, what string) (float64, bool) {
	x, problem := number(n)
	switch {
	case problem != "":
		p.errorf(n, "%s: %s (the largest absolute error allowed, e.g. 0.01)", what, problem)
	case x < 1e-12 || x > 1e3:
		p.errorf(n, "%s: found %g, expected a number from 1e-12 to 1000 (the largest absolute error allowed, e.g. 0.01)", what, x)
	default:
		return x, true
	}
	return 0, false
}
