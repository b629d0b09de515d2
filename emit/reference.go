package emit

import (
	"fmt"

	"github.com/dave/jennifer/jen"

	"github.com/lanthorn/lanthorn/ir"
	lrt "github.com/lanthorn/lanthorn/runtime"
)

// weightsBlob packs the plaintext constants and the reference model's
// matrices into the runtime's weight format.
func (e *emitter) weightsBlob() ([]byte, error) {
	var names []string
	var vecs [][]float64
	for _, c := range e.p.Consts {
		names = append(names, c.Name)
		vecs = append(vecs, c.Data)
	}
	for _, l := range e.in.Model.Layers {
		switch l.Kind {
		case ir.Dense:
			flat := make([]float64, 0, l.In*l.Out)
			for _, row := range l.Weights {
				flat = append(flat, row...)
			}
			names = append(names, "ref."+l.Name+".weights", "ref."+l.Name+".bias")
			vecs = append(vecs, flat, l.Bias)
		case ir.Conv2D:
			names = append(names, "ref."+l.Name+".kernel", "ref."+l.Name+".bias")
			vecs = append(vecs, l.Kernel, l.Bias)
		case ir.BatchNorm:
			n := l.Norm
			names = append(names, "ref."+l.Name+".gamma", "ref."+l.Name+".beta", "ref."+l.Name+".mean", "ref."+l.Name+".variance")
			vecs = append(vecs, n.Gamma, n.Beta, n.Mean, n.Var)
		}
	}
	for _, l := range e.in.Model.Layers {
		if l.Kind == ir.Activation && l.Act.Func != ir.Square {
			names = append(names, "ref."+l.Name+".poly")
			vecs = append(vecs, l.Act.Coeffs)
		}
	}
	return lrt.BuildWeights(names, vecs)
}

// reference writes the float64 reference of the model: the same layers with
// direct loops, the activations as the program computes them (interpolants)
// in Reference and as the exact functions in ReferenceExact.
func (e *emitter) reference() ([]byte, error) {
	f := e.file()
	g := e.in.Model
	for _, exact := range []bool{false, true} {
		name, doc := "Reference", "Reference evaluates the model in float64 as the encrypted program computes it,\nwith each approximated activation replaced by its interpolant. The self-test\ncompares decrypted outputs with it."
		if exact {
			name, doc = "ReferenceExact", "ReferenceExact evaluates the model in float64 with the exact activation\nfunctions, so the self-test can report what the approximations cost."
		}
		comment(f.Comment, doc)
		f.Func().Params(jen.Id("m").Op("*").Id("Model")).Id(name).Params(jen.Id("x").Index().Float64()).Params(jen.Index().Float64(), jen.Error()).BlockFunc(func(b *jen.Group) {
			b.Id("r").Op(":=").Add(e.rtQual("NewReference")).Call(jen.Id("m").Dot("weights"))
			b.Id("r").Dot("Input").Call(jen.Id("x"), jen.Lit(g.Input.Size))
			for _, l := range g.Layers {
				b.Comment(fmt.Sprintf("%s %s", l.Pos, l.Name))
				switch {
				case l.Kind == ir.Dense:
					b.Id("x").Op("=").Id("r").Dot("Dense").Call(jen.Id("x"), jen.Lit("ref."+l.Name+".weights"), jen.Lit("ref."+l.Name+".bias"), jen.Lit(l.Out), jen.Lit(l.In))
				case l.Kind != ir.Activation:
					e.tensorRef(b, l)
				case l.Act.Func == ir.Square:
					b.Id("x").Op("=").Id("r").Dot("Square").Call(jen.Id("x"))
				case exact && l.Act.Func != ir.Poly:
					fn := map[ir.ActFunc]string{ir.ReLU: "ReLU", ir.Sigmoid: "Sigmoid", ir.Tanh: "Tanh"}[l.Act.Func]
					b.Id("x").Op("=").Id("r").Dot("Apply").Call(jen.Id("x"), e.rtQual(fn))
				case l.Act.Basis == ir.Chebyshev:
					b.Id("x").Op("=").Id("r").Dot("Chebyshev").Call(jen.Id("x"), jen.Lit("ref."+l.Name+".poly"), jen.Lit(l.Act.Interval[0]), jen.Lit(l.Act.Interval[1]))
				default:
					b.Id("x").Op("=").Id("r").Dot("Monomial").Call(jen.Id("x"), jen.Lit("ref."+l.Name+".poly"))
				}
			}
			b.Return(jen.Id("x"), jen.Id("r").Dot("Err").Call())
		})
		f.Line()
	}
	return render(f)
}

// tensorRef writes the reference call of a convolution, pool, flatten,
// batch norm or scale layer.
func (e *emitter) tensorRef(b *jen.Group, l *ir.Layer) {
	ref := "ref." + l.Name
	in := l.Ins()
	ints := func(v ...int) *jen.Statement {
		return jen.Index(jen.Lit(len(v))).Int().ValuesFunc(func(g *jen.Group) {
			for _, x := range v {
				g.Lit(x)
			}
		})
	}
	switch l.Kind {
	case ir.Conv2D:
		w := l.Window
		shape := e.rtQual("Conv2DShape").Add(inline([]field{
			{"In", ints(in...)}, {"Out", jen.Lit(l.Outs()[0])}, {"Kernel", ints(w.KH, w.KW)},
			{"Stride", ints(w.SH, w.SW)}, {"Pad", ints(w.Pad[:]...)},
		}))
		b.Id("x").Op("=").Id("r").Dot("Conv2D").Call(jen.Id("x"), shape, jen.Lit(ref+".kernel"), jen.Lit(ref+".bias"))
	case ir.AvgPool, ir.SumPool:
		w := l.Window
		shape := e.rtQual("PoolShape").Add(inline([]field{
			{"In", ints(in...)}, {"Kernel", ints(w.KH, w.KW)}, {"Stride", ints(w.SH, w.SW)},
		}))
		method := map[ir.LayerKind]string{ir.AvgPool: "AvgPool", ir.SumPool: "SumPool"}[l.Kind]
		b.Id("x").Op("=").Id("r").Dot(method).Call(jen.Id("x"), shape)
	case ir.Flatten:
		b.Comment(fmt.Sprintf("flatten %v → [%d]: the tensor is already packed channel-major; nothing moves", in, l.Out))
	case ir.BatchNorm:
		b.Id("x").Op("=").Id("r").Dot("BatchNorm").Call(jen.Id("x"), jen.Lit(len(l.Norm.Gamma)),
			jen.Lit(ref+".gamma"), jen.Lit(ref+".beta"), jen.Lit(ref+".mean"), jen.Lit(ref+".variance"), jen.Lit(l.Norm.Eps))
	case ir.ScaleBy:
		b.Id("x").Op("=").Id("r").Dot("Scale").Call(jen.Id("x"), jen.Lit(l.Factor))
	}
}
