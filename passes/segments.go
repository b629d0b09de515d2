package passes

import (
	"errors"
	"fmt"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// A segment is one layer of the program the selection may produce, with
// the choices that shape it: layers [from, to] of the graph before
// merge-linear (one layer, or a run of linear layers merged into one), the
// matrix method of a linear segment, the interpolant degree of an
// activation declared with a tolerance.
type segment struct {
	from, to int
	method   Method // linear segments where the block method applies; "" otherwise
	degree   int    // activations declared with a tolerance; 0 otherwise
	name     string // the layer's name after merging (Options.Method's key)
	out      int    // its output size, which sets the period with the others
	lowered  map[int]*segProgram
}

// segProgram is a segment lowered alone at one period: its ops, the levels
// they consume, and their cost at each (ring degree, level in) met so far.
type segProgram struct {
	prog      *ir.Program
	depth     int
	rotations int
	cost      map[[3]int]float64
}

// segmentSpace is every segment the selection can build from a graph
// before merge-linear, indexed by the position they start at.
type segmentSpace struct {
	layers  []*ir.Layer
	inSize  int
	degrees map[string][]DegreeOption
	starts  [][]*segment
	methods map[methodKey]*segment
	opts    Options // the compilation's options (Naive, say)
	pin     *ir.ParamPin
}

// period is the layout period lower gives a program whose widest vector
// holds n values: the next power of two, capped where vectors are chunked
// (chunkPeriod).
func (sp *segmentSpace) period(n int) int {
	return chunkPeriod(&State{Graph: &ir.Graph{Pin: sp.pin}, Opts: sp.opts}, n)
}

// outputPasses are the program passes before params that concern the
// model's output only; a segment runs them only when it ends the model.
var outputPasses = map[string]bool{"output-mask": true}

// newSegmentSpace lists the segments of pre, the graph after the graph
// passes that come before merge-linear.
func newSegmentSpace(pre *ir.Graph, degrees map[string][]DegreeOption, opts Options) *segmentSpace {
	sp := &segmentSpace{layers: pre.Layers, inSize: pre.Input.Size, degrees: degrees, opts: opts, pin: pre.Pin,
		starts: make([][]*segment, len(pre.Layers)), methods: map[methodKey]*segment{}}
	for i, l := range pre.Layers {
		switch {
		case mergeable(l):
			for j := i; j < len(pre.Layers) && mergeable(pre.Layers[j]); j++ {
				name := pre.Layers[i].Name
				for _, m := range pre.Layers[i+1 : j+1] {
					name += "_" + m.Name // as compose names a product
				}
				sp.starts[i] = append(sp.starts[i], &segment{from: i, to: j, name: name, out: pre.Layers[j].Out})
			}
		case l.Kind == ir.Activation && len(degrees[l.Name]) > 0:
			for _, o := range degrees[l.Name] {
				sp.starts[i] = append(sp.starts[i], &segment{from: i, to: i, degree: o.Degree, name: l.Name, out: l.Out})
			}
		default:
			sp.starts[i] = append(sp.starts[i], &segment{from: i, to: i, name: l.Name, out: l.Out})
		}
	}
	return sp
}

// variants returns the segments starting at i in a layout of period D: a
// linear segment whose output is shorter than the period comes with each
// matrix method (the copies method only where lowering accepts it).
func (sp *segmentSpace) variants(i, D int) []*segment {
	var out []*segment
	for _, s := range sp.starts[i] {
		if s.degree == 0 && mergeable(sp.layers[s.from]) && nextPow2(s.out) < D {
			for _, m := range []Method{BSGS, Blocks} {
				out = append(out, sp.withMethod(s, m))
			}
			// The copies method where the input's zeros let it apply.
			if c := sp.withMethod(s, Copies); sp.zerosBefore(s.from, D) != nil {
				if _, err := sp.lower(c, D); !errors.Is(err, errNoCopies) {
					out = append(out, c)
				}
			}
			continue
		}
		out = append(out, s)
	}
	return out
}

// withMethod is s with matrix method m, one value per (segment, method)
// so that its lowerings are cached once.
func (sp *segmentSpace) withMethod(s *segment, m Method) *segment {
	key := methodKey{s, m}
	if c, ok := sp.methods[key]; ok {
		return c
	}
	c := *s
	c.method, c.lowered = m, nil
	sp.methods[key] = &c
	return &c
}

type methodKey struct {
	s *segment
	m Method
}

// zerosBefore is what knownZeros proves of the input of layer i at period
// D from the layers before it, whatever variants they take: an activation
// keeps the zeros only if it and every degree the selection may give it
// map zero to zero.
func (sp *segmentSpace) zerosBefore(i, D int) []bool {
	return knownZeros(nil, sp.layers[:i], D, func(l *ir.Layer) bool {
		if !zeroAtZero(l.Act) {
			return false
		}
		for _, o := range sp.degrees[l.Name] {
			a := *l.Act
			a.Coeffs, a.Basis = o.Coeffs, ir.Chebyshev
			if !zeroAtZero(&a) {
				return false
			}
		}
		return true
	})
}

// lower lowers the segment alone at period D, through the program passes
// of the pipeline that come before params (they place the rescales that
// make its depth), and caches the result.
func (sp *segmentSpace) lower(s *segment, D int) (*segProgram, error) {
	if sp2, ok := s.lowered[D]; ok {
		return sp2, nil
	}
	layers := make([]*ir.Layer, 0, s.to-s.from+1)
	for _, l := range sp.layers[s.from : s.to+1] {
		c := *l
		if l.Act != nil && s.degree > 0 {
			a := *l.Act
			for _, o := range sp.degrees[l.Name] {
				if o.Degree == s.degree {
					a.Degree, a.Coeffs, a.Basis = o.Degree, slices.Clone(o.Coeffs), ir.Chebyshev
				}
			}
			c.Act = &a
		}
		layers = append(layers, &c)
	}
	// The input sets the period (with the pin, which caps it where vectors
	// are chunked) and, wider than the period, the number of chunks the
	// first layer reads, as in the whole program.
	g := &ir.Graph{Name: "segment", SpecFile: "segment", Input: ir.Input{Name: "x", Size: max(D, layers[0].In)}, OutputName: "y", Layers: layers, Pin: sp.pin}
	st := &State{Source: g, Model: g, Graph: cloneGraph(g), Opts: sp.opts, Report: &Report{Dumps: map[string]string{}}}
	st.Opts.KeepApart, st.Opts.Method = nil, nil
	st.inputZeros = sp.zerosBefore(s.from, D)
	if s.method != "" {
		st.Opts.Method = map[string]Method{s.name: s.method}
	}
	started := false
	for _, p := range Pipeline {
		if p.Name == "merge-linear" {
			started = true
		}
		if p.Name == "params" {
			break
		}
		if !started || (outputPasses[p.Name] && s.to != len(sp.layers)-1) {
			continue
		}
		if err := p.Run(st); err != nil {
			return nil, fmt.Errorf("segment %s: %w", s.name, err)
		}
	}
	if st.Prog == nil {
		return nil, fmt.Errorf("segment %s: not lowered", s.name)
	}
	if st.Prog.Period != D {
		return nil, fmt.Errorf("segment %s: lowered at period %d, want %d", s.name, st.Prog.Period, D)
	}
	rot := 0
	for _, l := range st.Prog.Layers {
		rot += l.Rotations
	}
	out := &segProgram{prog: st.Prog, depth: programDepth(st.Prog), rotations: rot, cost: map[[3]int]float64{}}
	if s.lowered == nil {
		s.lowered = map[int]*segProgram{}
	}
	s.lowered[D] = out
	return out, nil
}

// price is the estimated time in ms of the segment entered at level top
// under parameters pr (its ring degree and special primes): its ops get the levels they would have in the whole
// program (each rescale and polynomial level counts down from top), and
// EstimateProgram prices them, as it prices the compiled program.
func (p *segProgram) price(prof *Profile, pr ir.Params, top int) float64 {
	key := [3]int{pr.LogN, len(pr.LogP), top}
	if c, ok := p.cost[key]; ok {
		return c
	}
	prog := p.prog
	for i, u := range levelsUsed(prog) {
		prog.Values[i].Level = top - u
	}
	prog.Params.LogN, prog.Params.LogP = pr.LogN, pr.LogP
	// Its sums of rotations are priced as the rotate-sums sum-rotations
	// makes of them in the compiled program.
	merged := snapshot(prog)
	mergeRotationSums(merged)
	fuseDots(merged)
	c := EstimateProgram(merged, prof).TotalMS
	p.cost[key] = c
	return c
}
