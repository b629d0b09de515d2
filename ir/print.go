package ir

import (
	"fmt"
	"strconv"
	"strings"
)

// String prints the graph in lanthorn's text form: one layer a line, with
// its shape and source position. Weights are summarised, not listed.
func (g *Graph) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "graph %s from %s\n", g.Name, g.SpecFile)
	fmt.Fprintf(&b, "  input %s[%s] in [%s, %s]\n", g.Input.Name, dims(g.Input.Dims()), ffmt(g.Input.Min), ffmt(g.Input.Max))
	for _, l := range g.Layers {
		shapes := fmt.Sprintf("[%s]→[%s]", dims(l.Ins()), dims(l.Outs()))
		switch l.Kind {
		case Dense:
			fmt.Fprintf(&b, "  %s = dense %d→%d  ; %s\n", l.Name, l.In, l.Out, l.Pos)
		case Conv2D, AvgPool, SumPool:
			w := l.Window
			fmt.Fprintf(&b, "  %s = %s %s kernel %d×%d stride %d×%d", l.Name, l.Kind, shapes, w.KH, w.KW, w.SH, w.SW)
			if w.Pad != [4]int{} {
				fmt.Fprintf(&b, " pad %v", w.Pad)
			}
			fmt.Fprintf(&b, "  ; %s\n", l.Pos)
		case Flatten:
			fmt.Fprintf(&b, "  %s = flatten %s  ; %s\n", l.Name, shapes, l.Pos)
		case BatchNorm:
			fmt.Fprintf(&b, "  %s = batchnorm [%s] eps %s  ; %s\n", l.Name, dims(l.Ins()), ffmt(l.Norm.Eps), l.Pos)
		case ScaleBy:
			fmt.Fprintf(&b, "  %s = scale ×%s  ; %s\n", l.Name, ffmt(l.Factor), l.Pos)
		case Linear:
			fmt.Fprintf(&b, "  %s = linear %s, %d nonzeros  ; %s\n", l.Name, shapes, l.Map.NNZ(), l.Pos)
		case Activation:
			a := l.Act
			fmt.Fprintf(&b, "  %s = %s", l.Name, a.Func)
			if a.Basis != "" {
				fmt.Fprintf(&b, " %s[%s]", a.Basis, floats(a.Coeffs))
			}
			if a.Interval != [2]float64{} {
				fmt.Fprintf(&b, " on [%s, %s]", ffmt(a.Interval[0]), ffmt(a.Interval[1]))
			}
			fmt.Fprintf(&b, "  ; %s\n", l.Pos)
		}
	}
	fmt.Fprintf(&b, "  output %s[%d]\n", g.OutputName, g.OutSize())
	return b.String()
}

// String prints the program in lanthorn's text form, one op a line:
//
//	%dense1Rot1, %dense1Rot2 = rothoisted %features [1 2]   @7 2^35
//
// Each result is followed by its level (@) and exact scale once assigned.
func (p *Program) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "program %s period %d\n", p.Name, p.Period)
	fmt.Fprintf(&b, "  input %s, output %s\n", p.Input, p.Output)
	if p.Params.LogN != 0 {
		fmt.Fprintf(&b, "  params logN %d logQ %v logP %v logScale %d\n", p.Params.LogN, p.Params.LogQ, p.Params.LogP, p.Params.LogScale)
	}
	if len(p.Rotations) > 0 || p.Relinearize {
		fmt.Fprintf(&b, "  keys rotations %v relinearize %v\n", p.Rotations, p.Relinearize)
	}
	for i, c := range p.Consts {
		kind := "vector"
		if c.Kind == Polynomial {
			kind = "poly " + string(c.Basis)
		}
		fmt.Fprintf(&b, "  const #%d %s %s len %d", i, c.Name, kind, len(c.Data))
		if c.Kind == Vector && !c.Scale.IsZero() {
			fmt.Fprintf(&b, " @%d %s", c.Level, c.Scale)
		}
		b.WriteByte('\n')
	}
	layer := -2
	for _, op := range p.Ops {
		if op.Layer != layer && op.Layer >= 0 && op.Layer < len(p.Layers) {
			l := p.Layers[op.Layer]
			fmt.Fprintf(&b, "  ; %s %s  %s\n", l.Name, l.Kind, l.Pos)
		}
		layer = op.Layer
		b.WriteString("  ")
		b.WriteString(p.FormatOp(op))
		b.WriteByte('\n')
	}
	return b.String()
}

// FormatOp prints one op in the program's text form.
func (p *Program) FormatOp(op *Op) string {
	var b strings.Builder
	for i, r := range op.Results {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString("%" + p.Values[r].Name)
	}
	if len(op.Results) > 0 {
		b.WriteString(" = ")
	}
	b.WriteString(string(op.Kind))
	for _, a := range op.Args {
		b.WriteString(" %" + p.Values[a].Name)
	}
	if op.Const >= 0 && op.Const < len(p.Consts) {
		b.WriteString(" #" + p.Consts[op.Const].Name)
	}
	for _, ci := range op.Consts {
		if ci >= 0 && ci < len(p.Consts) {
			b.WriteString(" #" + p.Consts[ci].Name)
		}
	}
	if len(op.Steps) > 0 {
		fmt.Fprintf(&b, " %v", op.Steps)
	}
	if op.Kind == OpDropLevel {
		fmt.Fprintf(&b, " %d", op.Drop)
	}
	if len(op.Results) > 0 {
		v := p.Values[op.Results[0]]
		if !v.Scale.IsZero() {
			fmt.Fprintf(&b, "   @%d %s", v.Level, v.Scale)
			if v.Degree != 1 {
				fmt.Fprintf(&b, " deg%d", v.Degree)
			}
		}
	}
	return b.String()
}

// dims prints a shape as "1 28 28".
func dims(shape []int) string { return strings.Trim(fmt.Sprint(shape), "[]") }

func ffmt(f float64) string { return strconv.FormatFloat(f, 'g', -1, 64) }

func floats(fs []float64) string {
	parts := make([]string, len(fs))
	for i, f := range fs {
		parts[i] = strconv.FormatFloat(f, 'g', 6, 64)
	}
	return strings.Join(parts, " ")
}
