package emit

import (
	"fmt"
	"strconv"
	"strings"

	"github.com/dave/jennifer/jen"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/passes"
)

func (e *emitter) file() *jen.File {
	f := jen.NewFilePathName(e.opts.Module, e.pkg)
	f.ImportName(e.rt, "runtime")
	fileComment(f.HeaderComment, e.header())
	return f
}

func (e *emitter) rtQual(name string) *jen.Statement { return jen.Qual(e.rt, name) }

// scaleLit writes an exact scale on one line: runtime.Scale{Pow2: 35, Num: []int{7}}.
func scaleLit(e *emitter, s ir.Scale) *jen.Statement {
	f := []field{{"Pow2", jen.Lit(s.Pow2)}}
	if num := s.Num(); len(num) > 0 {
		f = append(f, field{"Num", intList(num)})
	}
	if den := s.Den(); len(den) > 0 {
		f = append(f, field{"Den", intList(den)})
	}
	return e.rtQual("Scale").Add(inline(f))
}

// field is one key of a composite literal; fields keep the order given,
// where jen.Dict would sort them.
type field struct {
	key string
	val jen.Code
}

// inline writes {K: v, …} on one line.
func inline(fs []field) *jen.Statement {
	return jen.ValuesFunc(func(g *jen.Group) {
		for _, f := range fs {
			g.Id(f.key).Op(":").Add(f.val)
		}
	})
}

// multiline writes {\n K: v,\n …} with one field a line.
func multiline(fs []field) *jen.Statement {
	return jen.CustomFunc(jen.Options{Open: "{", Close: "}", Separator: ",", Multi: true}, func(g *jen.Group) {
		for _, f := range fs {
			g.Id(f.key).Op(":").Add(f.val)
		}
	})
}

// comment adds a comment of one or more lines in // form (jennifer writes
// a multi-line comment as /* */).
func comment[R any](add func(string) R, text string) {
	for _, line := range strings.Split(text, "\n") {
		add(line)
	}
}

// fileComment is comment for jennifer's file-level comment methods.
func fileComment(add func(string), text string) {
	for _, line := range strings.Split(text, "\n") {
		add(line)
	}
}

// params writes the CKKS parameters with their security note.
func (e *emitter) params() ([]byte, error) {
	p := e.p
	pr := p.Params
	f := e.file()
	fileComment(f.PackageComment, fmt.Sprintf("Package %s evaluates the %s model on CKKS-encrypted inputs.", e.pkg, p.Name))
	comment(f.Comment, fmt.Sprintf("The generated code needs the runtime API it was generated against. If this\n"+
		"line fails to compile, internal/runtime is from another lanthorn version:\n"+
		"regenerate the program with lanthorn %s rather than editing either side.", e.opts.Version))
	f.Var().Id("_").Op("=").Add(e.rtQual("APIVersion1"))
	f.Line()
	var note []string
	note = append(note,
		"ParamSpec holds the CKKS parameters: ring degree 2^LogN, the ciphertext",
		"primes Q (q0 first; one level per prime after q0), the key-switching primes",
		"P and the default scale 2^LogScale.",
		"",
		fmt.Sprintf("Security: log2(QP) = %d. The largest log2(QP) for 128-bit classical security", pr.LogQP))
	if bound, ok := passes.MaxLogQP128[pr.LogN]; ok {
		note = append(note, fmt.Sprintf("at ring degree 2^%d is %d, according to the %s.", pr.LogN, bound, passes.SecuritySource))
	} else {
		note = append(note, fmt.Sprintf("ring degree 2^%d is not in the %s.", pr.LogN, passes.SecuritySource))
	}
	if pr.Insecure {
		note = append(note, "", "INSECURE: these parameters exceed that bound; the spec asked for them with", "insecure: true. Do not use them to protect real data.")
	}
	note = append(note, "This estimate follows the standard's table only; it is not an audit.",
		"Have a qualified cryptographer review any deployment.", "",
		"How the planner chose them:")
	for _, w := range pr.Why {
		note = append(note, "  - "+w)
	}
	comment(f.Comment, strings.Join(note, "\n"))
	f.Var().Id("ParamSpec").Op("=").Add(e.rtQual("ParamSpec")).Add(multiline([]field{
		{"LogN", jen.Lit(pr.LogN)},
		{"Q", uintList(pr.Q)},
		{"P", uintList(pr.P)},
		{"LogScale", jen.Lit(pr.LogScale)},
		{"ModelID", jen.Lit(e.modelID)},
	}))
	f.Line()
	comment(f.Comment, "Keys lists the evaluation keys the server needs: a Galois key for each rotation\nstep the program uses, made for the highest level it rotates at (Levels, in the\nsame order), and the relinearization key if it multiplies ciphertexts.")
	f.Var().Id("Keys").Op("=").Add(e.rtQual("KeyRequest")).Add(multiline([]field{
		{"Rotations", intList(p.Rotations)},
		{"Levels", intList(p.RotationLevels)},
		{"Relinearize", jen.Lit(p.Relinearize)},
	}))
	f.Line()
	comment(f.Comment, fmt.Sprintf("Info describes the program to the command line: its input %s (%d values in\n[%g, %g], %s), its output %s\n(%d values, %s) and its parameters.",
		p.InputName, p.InputSize, e.in.Model.Input.Min, e.in.Model.Input.Max, layoutText(p.Input), p.OutputName, p.OutputSize, layoutText(p.Output)))
	outV := p.Values[p.Outputs()[0]]
	f.Func().Id("Info").Params().Add(e.rtQual("ModelInfo")).Block(
		jen.Return(e.rtQual("ModelInfo").Add(multiline([]field{
			{"Name", jen.Lit(p.Name)},
			{"InputName", jen.Lit(p.InputName)},
			{"InputSize", jen.Lit(p.InputSize)},
			{"InputMin", jen.Lit(e.in.Model.Input.Min)},
			{"InputMax", jen.Lit(e.in.Model.Input.Max)},
			{"OutputName", jen.Lit(p.OutputName)},
			{"OutputSize", jen.Lit(p.OutputSize)},
			{"Input", e.layoutLit(p.Input)},
			{"Output", e.layoutLit(p.Output)},
			{"Params", jen.Id("ParamSpec")},
			{"Keys", jen.Id("Keys")},
			{"Insecure", jen.Lit(pr.Insecure)},
			{"Precision", jen.Lit(e.in.Model.Precision)},
			{"Result", jen.Op("&").Add(e.rtQual("LevelScale")).Add(inline([]field{
				{"Level", jen.Lit(outV.Level)},
				{"Scale", scaleLit(e, outV.Scale)},
			}))},
		}))),
	)
	return render(f)
}

// layoutLit writes a layout on one line: runtime.Layout{Size: 10, Chunk: 10, Copies: 1, Period: 16}.
func (e *emitter) layoutLit(l ir.Layout) *jen.Statement {
	f := []field{{"Size", jen.Lit(l.Size)}, {"Chunk", jen.Lit(l.Chunk)}, {"Copies", jen.Lit(l.Copies)}}
	if l.Copies > 1 {
		f = append(f, field{"Pitch", jen.Lit(l.Pitch)})
	}
	f = append(f, field{"Period", jen.Lit(l.Period)})
	return e.rtQual("Layout").Add(inline(f))
}

// layoutText says in words where a vector sits in its ciphertexts.
func layoutText(l ir.Layout) string {
	if l.Count() == 1 {
		return fmt.Sprintf("laid out in slots [0, %d) of a period of %d slots", l.Size, l.Period)
	}
	last := l.Size - (l.Count()-1)*l.Chunk
	return fmt.Sprintf("split over %d ciphertexts of %d values, the last of %d, each in slots\n[0, %d) of a period of %d slots", l.Count(), l.Chunk, last, l.Chunk, l.Period)
}

// uintList writes primes in decimal, as a reader checks them against tables.
func uintList(v []uint64) *jen.Statement {
	return jen.Index().Uint64().ValuesFunc(func(g *jen.Group) {
		for _, x := range v {
			g.Id(strconv.FormatUint(x, 10))
		}
	})
}

func intList(v []int) *jen.Statement {
	return jen.Index().Int().ValuesFunc(func(g *jen.Group) {
		for _, x := range v {
			g.Lit(x)
		}
	})
}

// weights writes the embedded blob and its hash check.
func (e *emitter) weights() ([]byte, error) {
	f := e.file()
	f.Anon("embed")
	comment(f.Comment, "weightsBlob holds every weight the program uses: the diagonals of each dense\nlayer as encoded for the slot layout, the bias vectors, the activation\npolynomials, and the original matrices for the float64 reference.")
	f.Comment("")
	comment(f.Comment, "//go:embed weights.bin")
	f.Var().Id("weightsBlob").Index().Byte()
	f.Line()
	comment(f.Comment, "WeightsSHA256 is the SHA-256 of weights.bin, checked before any weight is read.\nA change of weights shows in review as a change of this line.")
	f.Const().Id("WeightsSHA256").Op("=").Lit(e.blobSHA)
	f.Line()
	comment(f.Comment, "LoadWeights checks the embedded blob against WeightsSHA256 and parses it.")
	f.Func().Id("LoadWeights").Params().Params(jen.Op("*").Add(e.rtQual("Weights")), jen.Error()).Block(
		jen.Return(e.rtQual("ParseWeights").Call(jen.Id("weightsBlob"), jen.Id("WeightsSHA256"))),
	)
	return render(f)
}

// model writes the plaintext preparation and the straight-line Evaluate.
func (e *emitter) model() ([]byte, error) {
	p := e.p
	f := e.file()
	comment(f.Comment, "Plaintexts are the model's weights encoded for the slot layout, each at the\nlevel and exact scale where it meets its ciphertext. They are encoded once per\nprocess by Load and reused by every evaluation.")
	f.Type().Id("Plaintexts").StructFunc(func(g *jen.Group) {
		layer := ""
		for _, c := range p.Consts {
			l := strings.SplitN(c.Name, ".", 2)[0]
			if l != layer {
				layer = l
			}
			if c.Kind == ir.Polynomial {
				g.Id(c.Ident).Op("*").Add(e.rtQual("Polynomial")).Comment(fmt.Sprintf("%s basis, degree %d", c.Basis, len(c.Data)-1))
			} else {
				g.Id(c.Ident).Op("*").Add(e.rtQual("Plaintext")).Comment(fmt.Sprintf("level %d, scale %s", c.Level, c.Scale))
			}
		}
	})
	f.Line()
	comment(f.Comment, "Model is the compiled model, ready to evaluate.")
	f.Type().Id("Model").Struct(
		jen.Id("params").Op("*").Add(e.rtQual("Params")),
		jen.Id("weights").Op("*").Add(e.rtQual("Weights")),
		jen.Id("pt").Op("*").Id("Plaintexts"),
	)
	f.Line()
	comment(f.Comment, "Load checks and parses the embedded weights and encodes them as plaintexts.")
	f.Func().Id("Load").Params(jen.Id("params").Op("*").Add(e.rtQual("Params"))).Params(jen.Op("*").Id("Model"), jen.Error()).BlockFunc(func(g *jen.Group) {
		g.List(jen.Id("w"), jen.Err()).Op(":=").Id("LoadWeights").Call()
		g.If(jen.Err().Op("!=").Nil()).Block(jen.Return(jen.Nil(), jen.Err()))
		g.Id("enc").Op(":=").Add(e.rtQual("NewEncoder")).Call(jen.Id("params"), jen.Id("w"))
		g.Id("pt").Op(":=").Op("&").Id("Plaintexts").Values()
		factors := factorConsts(p)
		for i, c := range p.Consts {
			if c.Kind == ir.Polynomial {
				basis := "Monomial"
				if c.Basis == ir.Chebyshev {
					basis = "Chebyshev"
				}
				g.Id("pt").Dot(c.Ident).Op("=").Id("enc").Dot("Polynomial").Call(jen.Lit(c.Name), e.rtQual(basis))
			} else {
				// A factor of products only is kept ready for them.
				method := "Plaintext"
				if factors[i] {
					method = "Multiplier"
				}
				g.Id("pt").Dot(c.Ident).Op("=").Id("enc").Dot(method).Call(jen.Lit(c.Name), jen.Lit(c.Level), scaleLit(e, c.Scale), jen.Lit(p.Period))
			}
		}
		g.If(jen.Err().Op(":=").Id("enc").Dot("Err").Call(), jen.Err().Op("!=").Nil()).Block(
			jen.Return(jen.Nil(), jen.Qual("fmt", "Errorf").Call(jen.Lit("encode weights: %w"), jen.Err())))
		g.Return(jen.Op("&").Id("Model").Add(inline([]field{{"params", jen.Id("params")}, {"weights", jen.Id("w")}, {"pt", jen.Id("pt")}})), jen.Nil())
	})
	f.Line()

	ins, outs := p.Inputs(), p.Outputs()
	inV := p.Values[ins[0]]
	chunks := func(n, chunk int) string {
		if n == 1 {
			return "one ciphertext"
		}
		return fmt.Sprintf("%d ciphertexts, one per chunk of %d values", n, chunk)
	}
	comment(f.Comment, fmt.Sprintf("Evaluate runs the model on an encrypted %s vector (%s, as Encrypt\nmakes them from Info().Input) and returns the encrypted %s (%s).\nIt needs only the evaluation keys in ev, never the secret key. The code is\nstraight-line, one statement per ciphertext operation; ev keeps the first\nerror and every later operation does nothing, so it is checked once.\n\nThe input must be at level %d and scale %s, as Encrypt makes it.",
		p.InputName, chunks(len(ins), p.Input.Chunk), p.OutputName, chunks(len(outs), p.Output.Chunk), inV.Level, inV.Scale))
	f.Func().Params(jen.Id("m").Op("*").Id("Model")).Id("Evaluate").Params(
		jen.Id("ev").Op("*").Add(e.rtQual("Evaluator")),
		jen.Id("x").Index().Op("*").Add(e.rtQual("Ciphertext")),
	).Params(jen.Index().Op("*").Add(e.rtQual("Ciphertext")), jen.Error()).BlockFunc(func(g *jen.Group) {
		g.If(jen.Len(jen.Id("x")).Op("!=").Lit(len(ins))).Block(
			jen.Return(jen.Nil(), jen.Qual("fmt", "Errorf").Call(jen.Lit(fmt.Sprintf("%%d input ciphertexts, the model takes %d", len(ins))), jen.Len(jen.Id("x")))))
		lhs, rhs := make([]jen.Code, len(ins)), make([]jen.Code, len(ins))
		for j, v := range ins {
			lhs[j], rhs[j] = jen.Id(p.Values[v].Name), jen.Id("x").Index(jen.Lit(j))
		}
		g.List(lhs...).Op(":=").List(rhs...)
		g.Id("pt").Op(":=").Id("m").Dot("pt")
		for _, v := range ins {
			g.Id("ev").Dot("Expect").Call(jen.Id(p.Values[v].Name), jen.Lit(inV.Level), scaleLit(e, inV.Scale))
		}
		layer := -1
		for _, op := range p.Ops {
			if op.Kind == ir.OpInput || op.Kind == ir.OpOutput {
				continue
			}
			if op.Layer != layer {
				layer = op.Layer
				g.Line()
				comment(g.Comment, layerComment(p, p.Layers[layer]))
			}
			e.stmt(g, op)
		}
		g.Line()
		g.Return(jen.Index().Op("*").Add(e.rtQual("Ciphertext")).ValuesFunc(func(g *jen.Group) {
			for _, v := range outs {
				g.Id(p.Values[v].Name)
			}
		}), jen.Id("ev").Dot("Err").Call())
	})
	return render(f)
}

// stmt writes the statement of one op.
func (e *emitter) stmt(g *jen.Group, op *ir.Op) {
	p := e.p
	arg := func(i int) jen.Code { return jen.Id(p.Values[op.Args[i]].Name) }
	res := func(i int) *jen.Statement { return jen.Id(p.Values[op.Results[i]].Name) }
	cst := func() jen.Code { return jen.Id("pt").Dot(p.Consts[op.Const].Ident) }
	call := func(method string, args ...jen.Code) {
		g.Add(res(0)).Op(":=").Id("ev").Dot(method).Call(args...)
	}
	switch op.Kind {
	case ir.OpRotate:
		call("Rotate", arg(0), jen.Lit(op.Steps[0]))
	case ir.OpRotHoisted:
		args := []jen.Code{arg(0)}
		for _, s := range op.Steps {
			args = append(args, jen.Lit(s))
		}
		lhs := make([]jen.Code, len(op.Results))
		for i := range op.Results {
			lhs[i] = res(i)
		}
		tmp := p.Values[op.Args[0]].Name + "Hoisted"
		g.Id(tmp).Op(":=").Id("ev").Dot("RotateHoisted").Call(args...)
		rhs := make([]jen.Code, len(op.Results))
		for i := range op.Results {
			rhs[i] = jen.Id(tmp).Index(jen.Lit(i))
		}
		g.List(lhs...).Op(":=").List(rhs...)
	case ir.OpRotSum:
		// Σ rot_{steps[i]}(terms[i]), one basis change for all.
		terms := make([]jen.Code, len(op.Args))
		steps := make([]jen.Code, len(op.Steps))
		for i := range op.Args {
			terms[i], steps[i] = arg(i), jen.Lit(op.Steps[i])
		}
		call("RotateSum",
			jen.Line().Index().Op("*").Add(e.rtQual("Ciphertext")).Values(terms...),
			jen.Line().Index().Int().Values(steps...).Op(",").Line())
	case ir.OpDot:
		// Σ terms[i] ⊙ factors[i], accumulated in one ciphertext.
		terms := make([]jen.Code, len(op.Args))
		factors := make([]jen.Code, len(op.Consts))
		for i := range op.Args {
			terms[i], factors[i] = arg(i), jen.Id("pt").Dot(p.Consts[op.Consts[i]].Ident)
		}
		call("DotPlain",
			jen.Line().Index().Op("*").Add(e.rtQual("Ciphertext")).Values(terms...),
			jen.Line().Index().Op("*").Add(e.rtQual("Plaintext")).Values(factors...).Op(",").Line())
	case ir.OpMulPlain:
		call("MulPlain", arg(0), cst())
	case ir.OpAddPlain:
		call("AddPlain", arg(0), cst())
	case ir.OpAdd:
		call("Add", arg(0), arg(1))
	case ir.OpMul:
		call("Mul", arg(0), arg(1))
	case ir.OpRelinearize:
		call("Relinearize", arg(0))
	case ir.OpRescale:
		call("Rescale", arg(0))
	case ir.OpDropLevel:
		call("DropLevel", arg(0), jen.Lit(op.Drop))
	case ir.OpPoly:
		call("Poly", arg(0), cst(), scaleLit(e, p.Values[op.Results[0]].Scale))
	}
}

// main writes the command line, a thin wrapper over the runtime's.
func (e *emitter) main() ([]byte, error) {
	p := e.p
	f := jen.NewFilePathName(e.opts.Module+"/cmd/"+p.Name, "main")
	f.ImportName(e.rt, "runtime")
	f.ImportName(e.opts.Module, e.pkg)
	fileComment(f.HeaderComment, e.header())
	fileComment(f.PackageComment, fmt.Sprintf("Command %s evaluates the %s model on encrypted inputs.\n\n"+
		"The client runs keygen, encrypt and decrypt and keeps the secret key; the\n"+
		"server runs eval with the evaluation keys only. Run %s -h for the commands.", p.Name, p.Name, p.Name))
	f.Func().Id("main").Params().Block(
		jen.Id("load").Op(":=").Func().Params(jen.Id("p").Op("*").Add(e.rtQual("Params"))).Params(e.rtQual("Model"), jen.Error()).Block(
			jen.Return(jen.Qual(e.opts.Module, "Load").Call(jen.Id("p"))),
		),
		jen.Qual("os", "Exit").Call(e.rtQual("RunCLI").Call(
			jen.Qual(e.opts.Module, "Info").Call(), jen.Id("load"),
			jen.Qual("os", "Args").Index(jen.Lit(1), jen.Empty()), jen.Qual("os", "Stdout"), jen.Qual("os", "Stderr"))),
	)
	return render(f)
}

// factorConsts marks the vector constants that only multiply (in mulplain
// and dot ops): Load encodes them with Encoder.Multiplier.
func factorConsts(p *ir.Program) []bool {
	factor := make([]bool, len(p.Consts))
	other := make([]bool, len(p.Consts))
	for _, op := range p.Ops {
		switch op.Kind {
		case ir.OpMulPlain:
			factor[op.Const] = true
		case ir.OpDot:
			for _, c := range op.Consts {
				factor[c] = true
			}
		default:
			if op.Const >= 0 {
				other[op.Const] = true
			}
		}
	}
	for i := range factor {
		factor[i] = factor[i] && !other[i]
	}
	return factor
}
