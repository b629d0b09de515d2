package spec

import (
	"fmt"

	"gopkg.in/yaml.v3"

	"github.com/lanthorn/lanthorn/ir"
)

// topKeys are the top-level keys of schema v1.
var topKeys = []string{"lanthorn", "model", "description", "input", "output", "precision", "tolerance", "insecure", "params", "layers"}

// spec checks the schema version and decodes the spec.
func (p *parser) spec(root *yaml.Node) *ir.Graph {
	root = resolve(root)
	if root.Kind != yaml.MappingNode {
		p.errorf(root, "found %s, expected a mapping of spec keys starting with \"lanthorn: 1\"", describe(root))
		return nil
	}
	f := p.mapping(root, "at top level")
	v, ok := f.get("lanthorn")
	if !ok {
		p.errorf(root, "missing required key \"lanthorn\": a spec starts with \"lanthorn: 1\", the schema version")
	} else {
		if f.list[0].key != v.key {
			p.errorf(v.key, "\"lanthorn\" must be the first key of the spec")
		}
		if v.val.Kind == yaml.ScalarNode && v.val.ShortTag() == "!!int" {
			var ver int64
			if err := v.val.Decode(&ver); err != nil || ver != 1 {
				// Another version has another decoder: reading it as v1
				// would only produce noise.
				p.errorf(v.val, "unsupported schema version %s; this lanthorn reads schema version 1", v.val.Value)
				return nil
			}
		} else {
			p.errorf(v.val, "lanthorn: found %s, expected the schema version, 1", describe(v.val))
		}
	}
	return p.v1(root, f)
}

// v1 decodes a spec of schema version 1.
func (p *parser) v1(root *yaml.Node, f *fields) *ir.Graph {
	p.unknown(f, "at top level", topKeys, topKeys)
	g := &ir.Graph{SpecFile: p.file, OutputName: "output", Precision: 20}

	if fl, ok := f.get("model"); ok {
		if s, ok := p.ident(fl.val, "model", modelName, modelExpect); ok {
			if goKeywords[s] {
				p.errorf(fl.val, "model: %q is a Go keyword; choose another name", s)
			}
			g.Name = s
		}
	} else {
		p.errorf(root, "missing required key \"model\" (the model's name, e.g. model: gearbox)")
	}

	if fl, ok := f.get("description"); ok && fl.val.Kind != yaml.ScalarNode {
		p.errorf(fl.val, "description: found %s, expected text", describe(fl.val))
	}

	var shape []int // nil: unknown after an error
	if fl, ok := f.get("input"); ok {
		shape = p.input(fl, g)
	} else {
		p.errorf(root, "missing required key \"input\" (input: {size: N, range: [min, max]} or {shape: [C, H, W], range: [min, max]})")
	}

	if fl, ok := f.get("output"); ok && p.wantMapping(fl.val, "output") {
		of := p.mapping(fl.val, "in output")
		p.unknown(of, "in output", []string{"name", "mask"}, []string{"name", "mask"})
		if n, ok := of.get("name"); ok {
			if s, ok := p.ident(n.val, "output.name", identName, identExpect); ok {
				g.OutputName = s
			}
		}
		if n, ok := of.get("mask"); ok {
			if mask, ok := p.boolean(n.val, "output.mask"); ok {
				g.NoOutputMask = !mask
			}
		}
	}

	if fl, ok := f.get("precision"); ok {
		if v, ok := p.integer(fl.val, "precision", 4, 50, "an integer from 4 to 50 (bits)"); ok {
			g.Precision = v
		}
	}
	if fl, ok := f.get("tolerance"); ok {
		p.tolerance, _ = p.tolerance1(fl.val, "tolerance")
	}
	if fl, ok := f.get("insecure"); ok {
		g.Insecure, _ = p.boolean(fl.val, "insecure")
	}
	if fl, ok := f.get("params"); ok {
		g.Pin = p.params(fl)
	}
	if fl, ok := f.get("layers"); ok {
		g.Layers = p.layers(fl.val, shape)
	} else {
		p.errorf(root, "missing required key \"layers\" (the model's layers, in evaluation order)")
	}
	if len(p.errs) > 0 {
		return nil
	}
	return g
}

// input decodes the input section and returns the input shape, [n] for a
// vector or [C, H, W] for an image, or nil when it is unknown.
func (p *parser) input(fl field, g *ir.Graph) []int {
	g.Input = ir.Input{Name: "input", Pos: p.pos(fl.key)}
	if !p.wantMapping(fl.val, "input") {
		return nil
	}
	keys := []string{"name", "size", "shape", "range"}
	f := p.mapping(fl.val, "in input")
	p.unknown(f, "in input", keys, keys)
	if n, ok := f.get("name"); ok {
		if s, ok := p.ident(n.val, "input.name", identName, identExpect); ok {
			g.Input.Name = s
		}
	}
	var shape []int
	sz, hasSize := f.get("size")
	sh, hasShape := f.get("shape")
	switch {
	case hasSize && hasShape:
		p.errorf(sh.key, "input: both size and shape given; use size: N for a vector or shape: [C, H, W] for an image")
	case hasSize:
		if v, ok := p.integer(sz.val, "input.size", 1, MaxElements, "an integer >= 1"); ok {
			shape = []int{v}
		}
	case hasShape:
		shape = p.shape(sh.val)
	default:
		p.errorf(fl.val, "input: missing required key \"size\" (the length of the input vector) or \"shape\" ([C, H, W] of an image)")
	}
	if shape != nil {
		g.Input.Size = ir.Elems(shape)
		if len(shape) == 3 {
			g.Input.Shape = shape
		}
	}
	if n, ok := f.get("range"); ok {
		if r, ok := p.interval(n.val, "input.range", "min, max"); ok {
			g.Input.Min, g.Input.Max = r[0], r[1]
		}
	} else {
		p.errorf(fl.val, "input: missing required key \"range\" ([min, max], the range every input value lies in)")
	}
	return shape
}

// shape reads an input shape: [n] or [C, H, W], each at least 1, at most
// MaxElements values in all.
func (p *parser) shape(n *yaml.Node) []int {
	const expect = "a list [C, H, W] (channels, height, width) or [n], each an integer >= 1"
	if n.Kind != yaml.SequenceNode || (len(n.Content) != 1 && len(n.Content) != 3) {
		p.errorf(n, "input.shape: found %s, expected %s", describe(n), expect)
		return nil
	}
	shape := make([]int, len(n.Content))
	total := 1
	for i, c := range n.Content {
		v, ok := p.integer(resolve(c), fmt.Sprintf("input.shape[%d]", i), 1, MaxElements, "an integer >= 1")
		if !ok {
			return nil
		}
		shape[i] = v
		total *= v
		if total > MaxElements {
			p.errorf(n, "input.shape %v has more than %d values (the size limit)", shape[:i+1], MaxElements)
			return nil
		}
	}
	return shape
}

// params decodes the pinned CKKS parameters.
func (p *parser) params(fl field) *ir.ParamPin {
	pin := &ir.ParamPin{Pos: p.pos(fl.key)}
	if !p.wantMapping(fl.val, "params") {
		return pin
	}
	keys := []string{"logN", "logQ", "logP", "logScale"}
	f := p.mapping(fl.val, "in params")
	p.unknown(f, "in params", keys, keys)
	if n, ok := f.get("logN"); ok {
		pin.LogN, _ = p.integer(n.val, "params.logN", 10, 17, "an integer from 10 to 17")
	}
	if n, ok := f.get("logQ"); ok {
		pin.LogQ = p.bitList(n.val, "params.logQ")
	}
	if n, ok := f.get("logP"); ok {
		pin.LogP = p.bitList(n.val, "params.logP")
	}
	if n, ok := f.get("logScale"); ok {
		pin.LogScale, _ = p.integer(n.val, "params.logScale", 16, 60, "an integer from 16 to 60")
	}
	return pin
}

// bitList reads a non-empty list of prime sizes, each 20..61 bits.
func (p *parser) bitList(n *yaml.Node, what string) []int {
	if n.Kind != yaml.SequenceNode || len(n.Content) == 0 {
		p.errorf(n, "%s: found %s, expected a non-empty list of prime sizes in bits, each from 20 to 61", what, describe(n))
		return nil
	}
	if !p.charge(len(n.Content), n) {
		return nil
	}
	out := make([]int, 0, len(n.Content))
	for i, c := range n.Content {
		v, _ := p.integer(resolve(c), fmt.Sprintf("%s[%d]", what, i), 20, 61, "an integer from 20 to 61")
		out = append(out, v)
	}
	return out
}
