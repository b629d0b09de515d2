package passes

import (
	"cmp"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"strings"

	"github.com/lanthorn/lanthorn/ir"
)

// unpadHow says how unpadPoly zeroes slots, in notes.
const unpadHow = "p(0) subtracted in the padding slots"

// maskSamples is the number of random inputs on which slots are classified.
const maskSamples = 3

// maskOutput makes the result ciphertexts hold only the declared outputs.
// Every slot of the period beyond a ciphertext's outputs must be zero or
// equal to one of the outputs: the block method leaves copies of the
// outputs with period nextPow2(outputs), and they reveal nothing beyond the
// outputs. Any other slot — a partial
// sum of the last linear layer, or p(0) of a final activation in padding
// slots — would tell the client more of the model than its outputs, and is
// zeroed, in the cheapest of three ways:
//
//  1. if the result is a polynomial and each such slot is zero at its
//     input, the slot holds p(0): a plaintext addition of −p(0) there
//     zeroes it, with no level;
//  2. if the result is a tree of sums, rotations and rescales over
//     plaintext products (a linear layer) whose values have no other use,
//     the 0/1 mask multiplies each product's plaintext (rotated back
//     through the rotations on its way) and the bias: no level;
//  3. otherwise a plaintext product by the 0/1 mask, one level.
//
// Slots are classified by evaluating the lowered program on random inputs
// from the declared range: each slot is a polynomial in the inputs, and a
// nonzero polynomial (or a difference of two) vanishes at random points
// with probability zero (Schwartz–Zippel lemma; common practice, from
// memory). The spec opts out with output: {mask: false}.
func maskOutput(s *State) error {
	p := s.Prog
	outs := p.Outputs()
	if len(outs) == 0 {
		return nil
	}
	xs := maskInputs(s.Graph)
	leaks, err := outputLeaks(p, xs)
	if err != nil {
		return fmt.Errorf("output mask: %w", err)
	}
	total := 0
	for _, l := range leaks {
		total += len(l)
	}
	if total == 0 {
		return nil
	}
	last := p.Layers[len(p.Layers)-1]
	if s.Graph.NoOutputMask {
		s.note("output: not masked (the spec says mask: false); %d slots beyond the outputs hold values derived from the model", total)
		return nil
	}
	levels := false
	var hows []string
	for j, out := range outs {
		if len(leaks[j]) == 0 {
			continue
		}
		keep := make([]float64, p.Period)
		for t := range keep {
			keep[t] = 1
		}
		for _, t := range leaks[j] {
			keep[t] = 0
		}
		name := last.Name + ".mask"
		if len(outs) > 1 {
			name += fmt.Sprint(j)
		}
		switch {
		case unpadPoly(p, out, leaks[j], xs, j, len(outs)):
			hows = append(hows, unpadHow)
		case foldMask(p, out, keep):
			hows = append(hows, "mask folded into the last plaintext products")
		default:
			v := insertAfterDef(p, out, ir.OpMulPlain, "Masked", nil)
			op := p.Def(v)
			op.Const = len(p.Consts)
			p.Consts = append(p.Consts, &ir.Const{Name: name, Kind: ir.Vector, Data: keep})
			last.PlainMuls++
			levels = true
			hows = append(hows, "a plaintext product by a 0/1 mask")
		}
	}
	hows = slices.Compact(hows)
	switch {
	case levels:
		last.Kind += " · output mask (one level)"
	case slices.Contains(hows, unpadHow):
		last.Kind += " · p(0) zeroed in padding (no level)"
	default:
		last.Kind += " · output mask folded (no level)"
	}
	if left, err := outputLeaks(p, xs); err != nil {
		return fmt.Errorf("output mask: %w", err)
	} else if slices.ContainsFunc(left, func(l []int) bool { return len(l) > 0 }) {
		return fmt.Errorf("output mask: slots %v still hold more than outputs after masking (a generator bug)", left)
	}
	s.note("output: %d slots beyond the %d outputs would carry values derived from the model; zeroed by %s", total, p.Output.Size, strings.Join(hows, "; "))
	return nil
}

// maskInputs draws the sample inputs from the declared range with a fixed
// seed, so that builds are reproducible.
func maskInputs(g *ir.Graph) [][]float64 {
	r := rand.New(rand.NewPCG(0x6d61736b, 2))
	xs := make([][]float64, maskSamples)
	for k := range xs {
		xs[k] = make([]float64, g.Input.Size)
		for i := range xs[k] {
			xs[k][i] = g.Input.Min + r.Float64()*(g.Input.Max-g.Input.Min)
		}
	}
	return xs
}

// slotSamples returns, for each input, the whole period of every value vs,
// by the cleartext simulation: [sample][value][slot].
func slotSamples(p *ir.Program, vs []ir.ValueID, xs [][]float64) ([][][]float64, error) {
	q := *p
	q.Output = ir.PackedLayout(len(vs)*p.Period, p.Period, p.Period)
	q.Ops = make([]*ir.Op, 0, len(p.Ops)+1)
	for _, op := range p.Ops {
		if op.Kind != ir.OpOutput {
			q.Ops = append(q.Ops, op)
		}
	}
	q.Ops = append(q.Ops, &ir.Op{Kind: ir.OpOutput, Args: vs, Const: -1})
	ys := make([][][]float64, len(xs))
	for k, x := range xs {
		y, err := q.Simulate(x)
		if err != nil {
			return nil, err
		}
		for j := range vs {
			ys[k] = append(ys[k], y[j*p.Period:(j+1)*p.Period])
		}
	}
	return ys, nil
}

// outputLeaks lists, per output ciphertext, the slots that are neither one
// of the outputs (the first copy of its chunk) nor, on every sample, zero
// or equal to some output.
func outputLeaks(p *ir.Program, xs [][]float64) ([][]int, error) {
	outs := p.Outputs()
	ys, err := slotSamples(p, outs, xs)
	if err != nil {
		return nil, err
	}
	// The outputs, sorted by their value on the first sample.
	type elem struct{ chunk, slot int }
	var elems []elem
	for j := range outs {
		for i := range p.Output.ChunkLen(j) {
			elems = append(elems, elem{j, i})
		}
	}
	at := func(k int, e elem) float64 { return ys[k][e.chunk][e.slot] }
	slices.SortStableFunc(elems, func(a, b elem) int { return cmp.Compare(at(0, a), at(0, b)) })
	tol := make([]float64, len(xs))
	for k := range ys {
		m := 1.0
		for _, y := range ys[k] {
			m = math.Max(m, largestAbs(y))
		}
		tol[k] = 1e-9 * m
	}
	isOutput := func(j, t int) bool {
		first := sort.Search(len(elems), func(n int) bool { return at(0, elems[n]) >= ys[0][j][t]-tol[0] })
		for n := first; n < len(elems) && at(0, elems[n]) <= ys[0][j][t]+tol[0]; n++ {
			same := true
			for k := range ys {
				same = same && math.Abs(at(k, elems[n])-ys[k][j][t]) <= tol[k]
			}
			if same {
				return true
			}
		}
		return false
	}
	leaks := make([][]int, len(outs))
	for j := range outs {
		for t := p.Output.ChunkLen(j); t < p.Period; t++ {
			zero := true
			for k := range ys {
				zero = zero && math.Abs(ys[k][j][t]) <= tol[k]
			}
			if !zero && !isOutput(j, t) {
				leaks[j] = append(leaks[j], t)
			}
		}
	}
	return leaks, nil
}

// zeroSlots reports whether every listed slot of y is zero.
func zeroSlots(y []float64, slots []int) bool {
	tol := 1e-9 * math.Max(1, largestAbs(y))
	for _, t := range slots {
		if math.Abs(y[t]) > tol {
			return false
		}
	}
	return true
}

func largestAbs(v []float64) float64 {
	m := 0.0
	for _, x := range v {
		m = math.Max(m, math.Abs(x))
	}
	return m
}

// unpadPoly handles a result made by a polynomial whose input is zero in
// every leaking slot: those slots hold p(0), and adding −p(0) there makes
// them zero (the other slots are untouched).
func unpadPoly(p *ir.Program, out ir.ValueID, leaks []int, xs [][]float64, chunk, chunks int) bool {
	def := p.Def(out)
	if def == nil || def.Kind != ir.OpPoly {
		return false
	}
	in, err := slotSamples(p, def.Args[:1], xs)
	if err != nil {
		return false
	}
	for _, y := range in {
		if !zeroSlots(y[0], leaks) {
			return false
		}
	}
	c := p.Consts[def.Const]
	p0 := ir.EvalPoly(c.Basis, c.Data, 0)
	if p0 == 0 {
		return false
	}
	fix := make([]float64, p.Period)
	for _, t := range leaks {
		fix[t] = -p0
	}
	v := insertAfterDef(p, out, ir.OpAddPlain, "Unpadded", nil)
	op := p.Def(v)
	op.Const = len(p.Consts)
	name := p.Layers[def.Layer].Name + ".unpad"
	if chunks > 1 {
		name += fmt.Sprint(chunk)
	}
	p.Consts = append(p.Consts, &ir.Const{Name: name, Kind: ir.Vector, Data: fix})
	return true
}

// foldMask multiplies the mask into the plaintexts of the linear tree that
// makes out, if there is one: sums, rotations (the mask rotates back with
// them), rescales and bias additions over plaintext products, every inner
// value used once and every plaintext by one op. It changes nothing and
// returns false otherwise.
func foldMask(p *ir.Program, out ir.ValueID, keep []float64) bool {
	constUses := map[int]int{}
	for _, op := range p.Ops {
		if op.Const >= 0 {
			constUses[op.Const]++
		}
	}
	type edit struct {
		c    int
		mask []float64
	}
	var edits []edit
	var visit func(v ir.ValueID, m []float64, root bool) bool
	visit = func(v ir.ValueID, m []float64, root bool) bool {
		if !root && len(uses(p, v)) != 1 {
			return false
		}
		def := p.Def(v)
		if def == nil {
			return false
		}
		switch def.Kind {
		case ir.OpMulPlain, ir.OpAddPlain:
			if constUses[def.Const] != 1 || p.Consts[def.Const].Kind != ir.Vector {
				return false
			}
			edits = append(edits, edit{def.Const, m})
			return def.Kind == ir.OpMulPlain || visit(def.Args[0], m, false)
		case ir.OpAdd:
			return visit(def.Args[0], m, false) && visit(def.Args[1], m, false)
		case ir.OpRotate:
			// y = rot_k(u), so m ⊙ y = rot_k(m' ⊙ u) with m'[t] = m[t − k].
			k, D := def.Steps[0], len(m)
			r := make([]float64, D)
			for t := range r {
				r[t] = m[((t-k)%D+D)%D]
			}
			return visit(def.Args[0], r, false)
		case ir.OpRescale, ir.OpRelinearize, ir.OpDropLevel:
			return visit(def.Args[0], m, false)
		}
		return false
	}
	if !visit(out, keep, true) {
		return false
	}
	for _, e := range edits {
		c := p.Consts[e.c]
		data := slices.Clone(c.Data)
		for t := range data {
			data[t] *= e.mask[t]
		}
		c.Data = data
	}
	return true
}
