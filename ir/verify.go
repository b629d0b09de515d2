package ir

import (
	"errors"
	"fmt"
	"slices"
)

// Stage says how far a program has been compiled, and so which rules the
// verifier can check.
type Stage int

const (
	// Lowered programs have ops and values; levels and scales are unset.
	Lowered Stage = iota
	// Relinearized programs have every ciphertext product back at degree 1
	// before it is rotated, multiplied or returned.
	Relinearized
	// Placed programs have every rescale and relinearization in place and a
	// parameter set, so their depth is final.
	Placed
	// Leveled programs carry a level and exact scale on every value.
	Leveled
	// Keyed programs also list their exact rotation key set.
	Keyed
)

// VerifyGraph checks a graph's shapes and weights: each layer reads the
// shape the layer before it makes, and its parameters fit its shapes.
func VerifyGraph(g *Graph) error {
	var errs []error
	if len(g.Layers) == 0 {
		errs = append(errs, errors.New("graph has no layers"))
	}
	size, shape := g.Input.Size, g.Input.Dims()
	if size <= 0 || Elems(shape) != size {
		errs = append(errs, fmt.Errorf("input size %d, shape %v", size, shape))
	}
	for _, l := range g.Layers {
		if l.In != size {
			errs = append(errs, fmt.Errorf("%s: input length %d, previous layer gives %d", l.Name, l.In, size))
		} else if len(l.InShape) > 0 && !slices.Equal(l.InShape, shape) {
			errs = append(errs, fmt.Errorf("%s: input shape %v, previous layer gives %v", l.Name, l.InShape, shape))
		}
		if Elems(l.Ins()) != l.In || Elems(l.Outs()) != l.Out {
			errs = append(errs, fmt.Errorf("%s: shapes %v→%v for lengths %d→%d", l.Name, l.Ins(), l.Outs(), l.In, l.Out))
		}
		if err := verifyLayer(l); err != nil {
			errs = append(errs, fmt.Errorf("%s: %w", l.Name, err))
		}
		size, shape = l.Out, l.Outs()
	}
	return errors.Join(errs...)
}

// verifyLayer checks one layer's parameters against its shapes.
func verifyLayer(l *Layer) error {
	in, out := l.Ins(), l.Outs()
	same := func() error {
		if !slices.Equal(in, out) {
			return fmt.Errorf("%s changes shape %v→%v", l.Kind, in, out)
		}
		return nil
	}
	switch l.Kind {
	case Dense:
		if len(l.Weights) != l.Out || len(l.Bias) != l.Out {
			return fmt.Errorf("%d weight rows and %d biases for %d outputs", len(l.Weights), len(l.Bias), l.Out)
		}
		for _, row := range l.Weights {
			if len(row) != l.In {
				return fmt.Errorf("weight row of %d, want %d", len(row), l.In)
			}
		}
	case Activation:
		if l.Act == nil {
			return errors.New("activation without a function")
		}
		if l.In != l.Out {
			return fmt.Errorf("activation changes length %d→%d", l.In, l.Out)
		}
		return same()
	case Conv2D, AvgPool, SumPool:
		if len(in) != 3 || len(out) != 3 || l.Window == nil {
			return fmt.Errorf("%s needs [C, H, W] shapes and a window, has %v→%v", l.Kind, in, out)
		}
		w := l.Window
		oh, ow := w.OutHW(in[1], in[2])
		if oh < 1 || ow < 1 || out[1] != oh || out[2] != ow {
			return fmt.Errorf("window %d×%d stride %d×%d padding %v over %v gives %d×%d, shape says %v", w.KH, w.KW, w.SH, w.SW, w.Pad, in, oh, ow, out)
		}
		if l.Kind == Conv2D {
			if n := out[0] * in[0] * w.KH * w.KW; len(l.Kernel) != n || len(l.Bias) != out[0] {
				return fmt.Errorf("kernel of %d and %d biases, want %d and %d", len(l.Kernel), len(l.Bias), n, out[0])
			}
		} else if out[0] != in[0] || w.Pad != [4]int{} {
			return fmt.Errorf("pool changes channels %d→%d or pads %v", in[0], out[0], w.Pad)
		}
	case Flatten:
		if len(out) != 1 {
			return fmt.Errorf("flatten gives shape %v, want a vector", out)
		}
	case BatchNorm:
		n := l.Norm
		if n == nil {
			return errors.New("batch norm without parameters")
		}
		c := in[0]
		for _, v := range [][]float64{n.Gamma, n.Beta, n.Mean, n.Var} {
			if len(v) != c {
				return fmt.Errorf("%d parameters for %d channels", len(v), c)
			}
		}
		for _, v := range n.Var {
			if !(v+n.Eps > 0) {
				return fmt.Errorf("variance %g + epsilon %g is not positive", v, n.Eps)
			}
		}
		return same()
	case ScaleBy:
		return same()
	case Linear:
		m := l.Map
		if m == nil || m.Rows != l.Out || m.Cols != l.In || len(m.Row) != l.Out {
			return fmt.Errorf("sparse map does not match %d→%d", l.In, l.Out)
		}
		if l.Bias != nil && len(l.Bias) != l.Out {
			return fmt.Errorf("%d biases for %d outputs", len(l.Bias), l.Out)
		}
		for _, row := range m.Row {
			for k, e := range row {
				if e.Col < 0 || e.Col >= l.In || k > 0 && row[k-1].Col >= e.Col {
					return fmt.Errorf("sparse row with column %d out of order or range", e.Col)
				}
			}
		}
	default:
		return fmt.Errorf("unknown layer kind %q", l.Kind)
	}
	return nil
}

// VerifyProgram checks the CKKS rules that hold at the given stage: SSA form,
// operand kinds and degrees always; levels and exact scales once assigned
// (operands of an addition share level and scale, a rescale needs a level
// above 0, a plaintext meets its ciphertext at its level); and the key set
// once collected. The first few violations are reported, each with its op.
func VerifyProgram(p *Program, stage Stage) error {
	var errs []error
	fail := func(op *Op, format string, args ...any) {
		if len(errs) < 10 {
			errs = append(errs, fmt.Errorf("%s: %s", p.FormatOp(op), fmt.Sprintf(format, args...)))
		}
	}
	defined := make([]bool, len(p.Values))
	degree := make([]int, len(p.Values))
	used := map[int]bool{}
	inputs, outputs := 0, 0
	for _, op := range p.Ops {
		for _, a := range op.Args {
			if int(a) < 0 || int(a) >= len(p.Values) || !defined[a] {
				fail(op, "operand %d used before it is defined", a)
				return errors.Join(errs...)
			}
		}
		for _, r := range op.Results {
			if int(r) < 0 || int(r) >= len(p.Values) {
				fail(op, "result %d out of range", r)
				return errors.Join(errs...)
			}
			if defined[r] {
				fail(op, "value %%%s defined twice", p.Values[r].Name)
			}
			defined[r] = true
		}
		wantArgs, wantResults := arity(p, op)
		if len(op.Args) != wantArgs || (wantResults >= 0 && len(op.Results) != wantResults) || (wantResults < 0 && len(op.Results) == 0) {
			fail(op, "has %d operands and %d results, want %d and %d", len(op.Args), len(op.Results), wantArgs, wantResults)
			continue
		}
		needConst := op.Kind == OpMulPlain || op.Kind == OpAddPlain || op.Kind == OpPoly
		if needConst {
			if op.Const < 0 || op.Const >= len(p.Consts) {
				fail(op, "no constant")
				continue
			}
			c := p.Consts[op.Const]
			if (op.Kind == OpPoly) != (c.Kind == Polynomial) {
				fail(op, "constant %s has the wrong kind", c.Name)
			}
			if c.Kind == Vector && len(c.Data) != p.Period {
				fail(op, "constant %s has %d slots, want the period %d", c.Name, len(c.Data), p.Period)
			}
		}
		if op.Kind == OpDot {
			if len(op.Consts) != len(op.Args) {
				fail(op, "%d constants for %d operands", len(op.Consts), len(op.Args))
				continue
			}
			bad := false
			for _, ci := range op.Consts {
				if ci < 0 || ci >= len(p.Consts) {
					fail(op, "constant %d out of range", ci)
					bad = true
				} else if c := p.Consts[ci]; c.Kind != Vector || len(c.Data) != p.Period {
					fail(op, "constant %s is not a vector of the period %d", c.Name, p.Period)
				}
			}
			if bad {
				continue
			}
		}
		// Degrees.
		d := 1
		needDegree1 := stage >= Relinearized
		switch op.Kind {
		case OpRotate, OpRotHoisted, OpPoly, OpRescale:
			if needDegree1 && degree[op.Args[0]] != 1 {
				fail(op, "needs a degree-1 ciphertext, has degree %d", degree[op.Args[0]])
			}
		case OpRotSum, OpDot:
			for _, a := range op.Args {
				if needDegree1 && degree[a] != 1 {
					fail(op, "needs degree-1 ciphertexts, one has degree %d", degree[a])
				}
			}
		case OpMul:
			if needDegree1 && (degree[op.Args[0]] != 1 || degree[op.Args[1]] != 1) {
				fail(op, "multiplies a ciphertext of degree above 1")
			}
			d = 2
		case OpAdd:
			d = max(degree[op.Args[0]], degree[op.Args[1]])
		case OpMulPlain, OpAddPlain, OpDropLevel:
			d = degree[op.Args[0]]
		case OpOutput:
			for _, a := range op.Args {
				if needDegree1 && degree[a] != 1 {
					fail(op, "output must have degree 1")
				}
			}
		}
		if op.Kind == OpRotate || op.Kind == OpRotHoisted {
			for _, s := range op.Steps {
				if s <= 0 || s >= p.Period {
					fail(op, "rotation %d outside (0, period %d)", s, p.Period)
				}
				used[s] = true
			}
			if op.Kind == OpRotate && len(op.Steps) != 1 {
				fail(op, "rotate takes one step")
			}
			if op.Kind == OpRotHoisted && len(op.Steps) != len(op.Results) {
				fail(op, "%d steps for %d results", len(op.Steps), len(op.Results))
			}
		}
		if op.Kind == OpRotSum {
			if len(op.Steps) != len(op.Args) {
				fail(op, "%d steps for %d terms", len(op.Steps), len(op.Args))
			}
			rotated := 0
			for _, s := range op.Steps {
				if s < 0 || s >= p.Period {
					fail(op, "rotation %d outside [0, period %d)", s, p.Period)
				}
				if s != 0 {
					used[s] = true
					rotated++
				}
			}
			if rotated == 0 {
				fail(op, "no term is rotated")
			}
		}
		for _, r := range op.Results {
			degree[r] = d
			if needDegree1 && p.Values[r].Degree != d {
				fail(op, "result %%%s records degree %d, is %d", p.Values[r].Name, p.Values[r].Degree, d)
			}
		}
		switch op.Kind {
		case OpInput:
			inputs++
		case OpOutput:
			outputs++
		}
		if stage >= Leveled {
			verifyLevels(p, op, fail)
		}
	}
	if inputs != 1 || outputs != 1 {
		errs = append(errs, fmt.Errorf("program has %d inputs and %d outputs, want one of each", inputs, outputs))
	}
	errs = append(errs, verifyLayouts(p)...)
	if stage >= Placed && p.Params.LogN == 0 {
		errs = append(errs, errors.New("no parameters chosen"))
	}
	if stage >= Keyed {
		var want []int
		for s := range used {
			want = append(want, s)
		}
		slices.Sort(want)
		if !slices.Equal(want, p.Rotations) {
			errs = append(errs, fmt.Errorf("rotation keys %v, program uses %v", p.Rotations, want))
		} else if len(p.RotationLevels) != len(p.Rotations) {
			errs = append(errs, fmt.Errorf("%d rotation key levels for %d keys", len(p.RotationLevels), len(p.Rotations)))
		} else {
			for _, op := range p.Ops {
				if op.Kind != OpRotate && op.Kind != OpRotHoisted && op.Kind != OpRotSum {
					continue
				}
				for _, s := range op.Steps {
					if s == 0 {
						continue // an unrotated term of a rotsum
					}
					i, _ := slices.BinarySearch(p.Rotations, s)
					if at := p.Values[op.Args[0]].Level; at > p.RotationLevels[i] {
						errs = append(errs, fmt.Errorf("%s: rotates at level %d, its key is made for level %d", p.FormatOp(op), at, p.RotationLevels[i]))
					}
				}
			}
		}
	}
	return errors.Join(errs...)
}

func verifyLevels(p *Program, op *Op, fail func(*Op, string, ...any)) {
	arg := func(i int) *Value { return p.Values[op.Args[i]] }
	res := func(i int) *Value { return p.Values[op.Results[i]] }
	for _, r := range op.Results {
		v := p.Values[r]
		if v.Level < 0 || v.Level > p.Params.MaxLevel() {
			fail(op, "level %d outside [0, %d]", v.Level, p.Params.MaxLevel())
		}
		if v.Scale.IsZero() {
			fail(op, "no scale assigned")
		}
	}
	same := func(a, b *Value, what string) {
		if a.Level != b.Level {
			fail(op, "%s at level %d and %d", what, a.Level, b.Level)
		}
		if !a.Scale.Equal(b.Scale) {
			fail(op, "%s at scales %s and %s", what, a.Scale, b.Scale)
		}
	}
	switch op.Kind {
	case OpInput:
		for i := range op.Results {
			if res(i).Level != p.Params.MaxLevel() || !res(i).Scale.Equal(Pow2Scale(p.Params.LogScale)) {
				fail(op, "fresh ciphertext must be at the top level and the default scale")
			}
		}
	case OpRotate, OpRotHoisted, OpRelinearize:
		for i := range op.Results {
			same(arg(0), res(i), "operand and result")
		}
	case OpRotSum:
		for i := range op.Args {
			same(arg(i), res(0), "term and result")
		}
	case OpDot:
		for i, ci := range op.Consts {
			c := p.Consts[ci]
			if c.Level != arg(i).Level {
				fail(op, "plaintext %s at level %d meets a ciphertext at level %d", c.Name, c.Level, arg(i).Level)
			}
			if want := arg(i).Scale.Mul(c.Scale); res(0).Level != arg(i).Level || !res(0).Scale.Equal(want) {
				fail(op, "term %d: product at level %d scale %s, result at %d %s", i, arg(i).Level, want, res(0).Level, res(0).Scale)
			}
		}
	case OpAdd:
		same(arg(0), arg(1), "operands")
		same(arg(0), res(0), "operand and result")
	case OpMul:
		if arg(0).Level != arg(1).Level {
			fail(op, "operands at level %d and %d", arg(0).Level, arg(1).Level)
		}
		if res(0).Level != arg(0).Level || !res(0).Scale.Equal(arg(0).Scale.Mul(arg(1).Scale)) {
			fail(op, "result must keep the level and multiply the scales")
		}
	case OpMulPlain, OpAddPlain:
		c := p.Consts[op.Const]
		if c.Level != arg(0).Level {
			fail(op, "plaintext %s at level %d meets a ciphertext at level %d", c.Name, c.Level, arg(0).Level)
		}
		want := arg(0).Scale.Mul(c.Scale)
		if op.Kind == OpAddPlain {
			want = arg(0).Scale
			if !c.Scale.Equal(arg(0).Scale) {
				fail(op, "plaintext %s at scale %s added to a ciphertext at scale %s", c.Name, c.Scale, arg(0).Scale)
			}
		}
		if res(0).Level != arg(0).Level || !res(0).Scale.Equal(want) {
			fail(op, "result at level %d scale %s, want %d %s", res(0).Level, res(0).Scale, arg(0).Level, want)
		}
	case OpRescale:
		l := arg(0).Level
		if l == 0 {
			fail(op, "rescale at level 0")
			return
		}
		if res(0).Level != l-1 || !res(0).Scale.Equal(arg(0).Scale.Div(Prime(l))) {
			fail(op, "rescale must drop q%d from the scale and one level", l)
		}
	case OpDropLevel:
		if op.Drop <= 0 || res(0).Level != arg(0).Level-op.Drop || !res(0).Scale.Equal(arg(0).Scale) {
			fail(op, "drop must lower the level by %d and keep the scale", op.Drop)
		}
	case OpPoly:
		c := p.Consts[op.Const]
		depth := PolyDepth(len(c.Data) - 1)
		if res(0).Level != arg(0).Level-depth {
			fail(op, "polynomial of degree %d consumes %d levels: %d→%d", len(c.Data)-1, depth, arg(0).Level, res(0).Level)
		}
		if !res(0).Scale.Equal(Pow2Scale(p.Params.LogScale)) {
			fail(op, "polynomial result must be at the default scale")
		}
	}
}

// InferDegrees sets every value's degree from the ops: 2 for a ciphertext
// product, 1 after relinearization, the larger operand's through additions.
func (p *Program) InferDegrees() {
	for _, op := range p.Ops {
		d := 1
		switch op.Kind {
		case OpMul:
			d = 2
		case OpAdd:
			d = max(p.Values[op.Args[0]].Degree, p.Values[op.Args[1]].Degree)
		case OpMulPlain, OpAddPlain, OpDropLevel, OpRescale, OpRotate, OpRotHoisted, OpRotSum, OpDot:
			d = p.Values[op.Args[0]].Degree
		}
		for _, r := range op.Results {
			p.Values[r].Degree = d
		}
	}
}

// PolyDepth is the number of levels a polynomial of degree d consumes with a
// baby-step giant-step (Paterson–Stockmeyer) evaluation: ceil(log2(d+1)).
func PolyDepth(d int) int {
	depth := 0
	for (1 << depth) < d+1 {
		depth++
	}
	return depth
}

// verifyLayouts checks the input and output layouts against the program:
// valid, of the program's period, sizes as recorded.
func verifyLayouts(p *Program) []error {
	var errs []error
	for _, c := range []struct {
		what string
		l    Layout
		size int
	}{{"input", p.Input, p.InputSize}, {"output", p.Output, p.OutputSize}} {
		if err := c.l.Validate(p.Params.Slots()); err != nil {
			errs = append(errs, fmt.Errorf("%s %w", c.what, err))
			continue
		}
		if c.l.Period != p.Period || c.l.Size != c.size {
			errs = append(errs, fmt.Errorf("%s layout %v, want %d elements in the period %d", c.what, c.l, c.size, p.Period))
		}
	}
	return errs
}

// arity is the number of operands and results an op takes; -1 results
// means one or more.
func arity(p *Program, op *Op) (args, results int) {
	switch op.Kind {
	case OpInput:
		return 0, p.Input.Count()
	case OpOutput:
		return p.Output.Count(), 0
	case OpRotHoisted:
		return 1, -1
	case OpRotSum, OpDot:
		return max(len(op.Args), 2), 1
	case OpAdd, OpMul:
		return 2, 1
	default:
		return 1, 1
	}
}
