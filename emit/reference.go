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
		if l.Kind != ir.Dense {
			continue
		}
		flat := make([]float64, 0, l.In*l.Out)
		for _, row := range l.Weights {
			flat = append(flat, row...)
		}
		names = append(names, "ref."+l.Name+".weights", "ref."+l.Name+".bias")
		vecs = append(vecs, flat, l.Bias)
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
