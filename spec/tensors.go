package spec

import (
	"strings"

	"gopkg.in/yaml.v3"
)

// tensor reads an array of any rank, a .npy path or nested inline lists,
// and checks it against want, whose entries may be unknownSize; names
// describes the axes in messages. The result is row-major.
func (p *parser) tensor(n *yaml.Node, what string, want []int, names string) []float64 {
	wantWord := func() string {
		parts := make([]string, len(want))
		for i, d := range want {
			parts[i] = sizeWord(d)
		}
		return "[" + strings.Join(parts, " ") + "]"
	}
	switch {
	case n.Kind == yaml.ScalarNode && n.ShortTag() == "!!str":
		data, shape, ok := p.npy(n, what)
		if !ok {
			return nil
		}
		match := len(shape) == len(want)
		for i := 0; match && i < len(want); i++ {
			match = want[i] == unknownSize || shape[i] == want[i]
		}
		if !match {
			p.errorf(n, "%s shape %v, want %s (%s)", what, shape, wantWord(), names)
			return nil
		}
		if !p.finite(n, what, data, shape) {
			return nil
		}
		return data
	case n.Kind == yaml.SequenceNode && len(n.Content) > 0:
		shape := make([]int, 0, len(want))
		for c := n; len(shape) < len(want); {
			if c.Kind != yaml.SequenceNode || len(c.Content) == 0 {
				p.errorf(c, "%s: found %s at depth %d, expected nested lists of shape %s (%s)", what, describe(c), len(shape), wantWord(), names)
				return nil
			}
			shape = append(shape, len(c.Content))
			if len(shape) < len(want) {
				c = resolve(c.Content[0])
			}
		}
		total := 1
		for i, d := range shape {
			if want[i] != unknownSize && d != want[i] {
				p.errorf(n, "%s shape %v, want %s (%s)", what, shape, wantWord(), names)
				return nil
			}
			total *= d
			if total > MaxElements {
				p.errorf(n, "%s: more than %d elements", what, MaxElements)
				return nil
			}
		}
		out := make([]float64, 0, total)
		if !p.nested(n, what, shape, nil, &out) {
			return nil
		}
		return out
	default:
		p.errorf(n, "%s: found %s, expected a path to a .npy file or nested lists of shape %s (%s)", what, describe(n), wantWord(), names)
		return nil
	}
}

// nested appends the numbers of nested list n, whose shape must be shape,
// to out; idx is n's index path, for messages.
func (p *parser) nested(n *yaml.Node, what string, shape, idx []int, out *[]float64) bool {
	if n.Kind != yaml.SequenceNode || len(n.Content) != shape[0] {
		p.errorf(n, "%s%s: found %s, expected a list of %d", what, index(idx), describe(n), shape[0])
		return false
	}
	if len(shape) == 1 {
		v, ok := p.inlineNumbers(n.Content, n, what, idx)
		*out = append(*out, v...)
		return ok
	}
	if !p.charge(len(n.Content), n) {
		return false
	}
	ok := true
	for i, c := range n.Content {
		ok = p.nested(resolve(c), what, shape[1:], append(append([]int(nil), idx...), i), out) && ok
		if p.exhausted {
			return false
		}
	}
	return ok
}
