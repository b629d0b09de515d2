package spec

import (
	"errors"
	"fmt"
	"io/fs"
	"math"
	"path"
	"strings"

	"gopkg.in/yaml.v3"
)

// matrix reads a dense layer's weights, a .npy path or inline rows, and
// checks them against [out, in]; either may be unknownSize.
func (p *parser) matrix(n *yaml.Node, name string, out, in int) [][]float64 {
	what := name + ": weights"
	switch {
	case n.Kind == yaml.ScalarNode && n.ShortTag() == "!!str":
		data, shape, ok := p.npy(n, what)
		if !ok {
			return nil
		}
		if len(shape) != 2 || out != unknownSize && shape[0] != out || in != unknownSize && shape[1] != in {
			p.errorf(n, "%s shape %v, want [%s %s] (out × in)", what, shape, sizeWord(out), sizeWord(in))
			return nil
		}
		if !p.finite(n, what, data, shape) {
			return nil
		}
		w := make([][]float64, shape[0])
		for i := range w {
			w[i] = data[i*shape[1] : (i+1)*shape[1] : (i+1)*shape[1]]
		}
		return w
	case n.Kind == yaml.SequenceNode && len(n.Content) > 0:
		if !p.charge(len(n.Content), n) {
			return nil
		}
		rows := make([]*yaml.Node, len(n.Content))
		for i, r := range n.Content {
			rows[i] = resolve(r)
			if rows[i].Kind != yaml.SequenceNode {
				p.errorf(rows[i], "%s[%d]: found %s, expected a row, a list of %s", what, i, describe(rows[i]), listOf(in, "numbers"))
				return nil
			}
		}
		cols := len(rows[0].Content)
		for i, r := range rows {
			if len(r.Content) != cols {
				p.errorf(r, "%s[%d] has %d numbers but %s[0] has %d; rows must all have the same length", what, i, len(r.Content), what, cols)
				return nil
			}
		}
		if out != unknownSize && len(rows) != out || in != unknownSize && cols != in {
			p.errorf(n, "%s shape [%d %d], want [%s %s] (out × in)", what, len(rows), cols, sizeWord(out), sizeWord(in))
			return nil
		}
		if cols == 0 || len(rows) > MaxElements/cols {
			p.errorf(n, "%s shape [%d %d]: expected 1 to %d elements", what, len(rows), cols, MaxElements)
			return nil
		}
		w := make([][]float64, len(rows))
		ok := true
		for i, r := range rows {
			var rowOK bool
			w[i], rowOK = p.inlineNumbers(r.Content, r, what, []int{i})
			ok = ok && rowOK
			if p.exhausted {
				return nil
			}
		}
		if !ok {
			return nil
		}
		return w
	default:
		p.errorf(n, "%s: found %s, expected a path to a .npy file or a list of %s", what, describe(n), listOf(out, "rows"))
		return nil
	}
}

// vector reads a dense layer's bias, a .npy path or an inline list, and
// checks its length against out, which may be unknownSize.
func (p *parser) vector(n *yaml.Node, name string, out int) []float64 {
	return p.vectorOf(n, name+": bias", out, "out")
}

// vectorOf reads a vector, a .npy path or an inline list, and checks its
// length against want (unknownSize: any); unit names the length in
// messages ("out", "channels").
func (p *parser) vectorOf(n *yaml.Node, what string, want int, unit string) []float64 {
	switch {
	case n.Kind == yaml.ScalarNode && n.ShortTag() == "!!str":
		data, shape, ok := p.npy(n, what)
		if !ok {
			return nil
		}
		if len(shape) != 1 || want != unknownSize && shape[0] != want {
			p.errorf(n, "%s shape %v, want [%s] (%s)", what, shape, sizeWord(want), unit)
			return nil
		}
		if !p.finite(n, what, data, shape) {
			return nil
		}
		return data
	case n.Kind == yaml.SequenceNode && len(n.Content) > 0:
		if want != unknownSize && len(n.Content) != want {
			p.errorf(n, "%s has %d numbers, want %d (%s)", what, len(n.Content), want, unit)
			return nil
		}
		b, ok := p.inlineNumbers(n.Content, n, what, nil)
		if !ok {
			return nil
		}
		return b
	default:
		p.errorf(n, "%s: found %s, expected a path to a .npy file or a list of %s", what, describe(n), listOf(want, "numbers"))
		return nil
	}
}

// inlineNumbers decodes a list of finite numbers. row is the index of the
// list in a matrix, for messages, or nil.
func (p *parser) inlineNumbers(elems []*yaml.Node, list *yaml.Node, what string, row []int) ([]float64, bool) {
	if !p.charge(len(elems), list) {
		return nil, false
	}
	out := make([]float64, len(elems))
	bad := 0
	for i, e := range elems {
		e = resolve(e)
		x, problem := number(e)
		if problem != "" {
			bad++
			if bad <= maxReported {
				p.errorf(e, "%s%s: %s", what, index(append(row, i)), problem)
			}
			continue
		}
		out[i] = x
	}
	if bad > maxReported {
		p.errorf(list, "%s: %d more bad elements in this list", what, bad-maxReported)
	}
	return out, bad == 0
}

// index formats an element index as [i][j].
func index(idx []int) string {
	var b strings.Builder
	for _, i := range idx {
		fmt.Fprintf(&b, "[%d]", i)
	}
	return b.String()
}

// finite reports the first non-finite element of an array read from the
// file named by n, with the count of others.
func (p *parser) finite(n *yaml.Node, what string, data []float64, shape []int) bool {
	bad, first := 0, -1
	for i, x := range data {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			if bad == 0 {
				first = i
			}
			bad++
		}
	}
	if bad == 0 {
		return true
	}
	idx := make([]int, len(shape))
	r := first
	for k := len(shape) - 1; k >= 0; k-- {
		idx[k] = r % shape[k]
		r /= shape[k]
	}
	more := ""
	if bad > 1 {
		more = fmt.Sprintf(" (and %d more non-finite elements)", bad-1)
	}
	p.errorf(n, "%s: %s: element %s is %s%s; weights must be finite", what, path.Clean(n.Value), index(idx), fmtNum(data[first]), more)
	return false
}

// npy reads the .npy file named by scalar n, relative to the spec's
// directory, and records it among the spec's inputs.
func (p *parser) npy(n *yaml.Node, what string) ([]float64, []int, bool) {
	name := n.Value
	switch {
	case name == "":
		p.errorf(n, "%s: empty path, expected a path to a .npy file", what)
		return nil, nil, false
	case strings.HasPrefix(name, "/") || strings.Contains(name, `\`) || len(name) > 1 && name[1] == ':':
		p.errorf(n, "%s: %q is not a relative slash-separated path; weight paths are relative to the spec's directory", what, name)
		return nil, nil, false
	}
	clean := path.Clean(name)
	if clean == ".." || strings.HasPrefix(clean, "../") || !fs.ValidPath(clean) {
		p.errorf(n, "%s: %q is outside the spec's directory; weight files must be in it or below it", what, name)
		return nil, nil, false
	}
	if !p.seen[clean] {
		p.seen[clean] = true
		p.files = append(p.files, clean)
	}
	if p.fsys == nil {
		p.errorf(n, "%s: open %s: no file system to read weights from", what, clean)
		return nil, nil, false
	}
	f, err := p.fsys.Open(clean)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			// The same words for os.DirFS ("no such file or directory")
			// and embed.FS or fstest.MapFS.
			p.errorf(n, "%s: open %s: file does not exist", what, clean)
		} else {
			p.errorf(n, "%s: %v", what, err)
		}
		return nil, nil, false
	}
	defer f.Close()
	if st, err := f.Stat(); err == nil && st.IsDir() {
		p.errorf(n, "%s: %s is a directory, expected a .npy file", what, clean)
		return nil, nil, false
	}
	data, shape, err := ReadNPY(f)
	if err != nil {
		p.errorf(n, "%s: %s: %v", what, clean, err)
		return nil, nil, false
	}
	return data, shape, true
}
