package passes

import (
	"fmt"
	"math"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// maxChunkLogN is the largest ring degree the planner considers (params
// tries up to 2^15), so 2^14 slots are the most one ciphertext holds.
const maxChunkLogN = 15

// chunkPeriod is the period D of the slot layout and so the chunk size: the
// smallest power of two holding the widest layer, but no more than the
// slots of the largest ring the program may use — the pinned ring degree,
// Options.ChunkSlots, or 2^(maxChunkLogN−1). A vector wider than D is split
// in chunks of D values, one ciphertext each. Preferring one ciphertext in
// a larger ring to several in a smaller one is the params pass's default;
// ChunkSlots asks for the split.
func chunkPeriod(s *State, widest int) int {
	limit := 1 << (maxChunkLogN - 1)
	if pin := s.Graph.Pin; pin != nil && pin.LogN > 1 {
		limit = min(limit, 1<<(pin.LogN-1))
	}
	if c := s.Opts.ChunkSlots; c > 0 {
		limit = min(limit, nextPow2(c))
	}
	return min(nextPow2(widest), limit)
}

// inputValues appends the input op, one fresh ciphertext per chunk of the
// input layout, and returns its results.
func inputValues(p *ir.Program, name string) []ir.ValueID {
	op := &ir.Op{Kind: ir.OpInput, Const: -1, Layer: -1}
	for j := range p.Input.Count() {
		n := name
		if p.Input.Count() > 1 {
			n = fmt.Sprintf("%s%d", name, j)
		}
		op.Results = append(op.Results, p.NewValue(n, ir.Cipher, -1))
	}
	p.Ops = append(p.Ops, op)
	return op.Results
}

// chunks is the number of ciphertexts a vector of n values takes in chunks
// of D.
func chunks(n, D int) int { return (n + D - 1) / D }

// chunked lowers a layer whose input or output spans several ciphertexts.
// Linear layers become block matrix-vector products y_j = Σ_i M_ji x_i
// (blockMatVec); activations apply to each chunk.
func (b *builder) chunked(l *ir.Layer, xs []ir.ValueID, info *ir.LayerInfo) ([]ir.ValueID, error) {
	switch l.Kind {
	case ir.Dense:
		info.Kind = fmt.Sprintf("dense %d→%d", l.In, l.Out)
		return b.blockMatVec(l, xs, info, func(emit func(r, c int, v float64)) {
			for r, row := range l.Weights {
				for c, v := range row {
					emit(r, c, v)
				}
			}
		})
	case ir.Linear:
		info.Kind = describeLinear(l)
		return b.blockMatVec(l, xs, info, func(emit func(r, c int, v float64)) {
			for r, row := range l.Map.Row {
				for _, e := range row {
					emit(r, e.Col, e.Val)
				}
			}
		})
	case ir.Activation:
		return b.chunkedActivation(l, xs, info)
	}
	return nil, fmt.Errorf("%s: %s: cannot lower a %s layer", l.Pos, l.Name, l.Kind)
}

// chunkedActivation applies the activation to every chunk; the chunks
// share one polynomial constant.
func (b *builder) chunkedActivation(l *ir.Layer, xs []ir.ValueID, info *ir.LayerInfo) ([]ir.ValueID, error) {
	base := b.prefix
	defer func() { b.prefix = base }()
	ys := make([]ir.ValueID, len(xs))
	poly := -1
	for j, x := range xs {
		b.prefix = fmt.Sprintf("%sPart%d", base, j)
		if poly < 0 {
			y, err := b.activation(l, x, info)
			if err != nil {
				return nil, err
			}
			ys[j] = y
			if op := b.p.Ops[len(b.p.Ops)-1]; op.Kind == ir.OpPoly {
				poly = op.Const
			}
			continue
		}
		ys[j] = b.op(ir.OpPoly, "Out", x)
		b.p.Ops[len(b.p.Ops)-1].Const = poly
	}
	info.CtMuls *= len(xs)
	info.Kind += fmt.Sprintf(", on %d ciphertexts", len(xs))
	return ys, nil
}

// blockKey names the diagonal k of block (j, i): output chunk j, input
// chunk i.
type blockKey struct{ j, i, k int }

// blockMatVec lowers y = Mx + b over chunks of D = Period values: block
// (j, i) of M maps input chunk i to output chunk j, and each block is
// multiplied with the diagonal method and one baby-step giant-step split
// n1 shared by the whole layer,
//
//	y_j = Σ_g rot_{n1·g}( Σ_i Σ_b rot_{-n1·g}(diag^{ji}_{n1·g+b}) ⊙ rot_b(x_i) ) + b_j,
//
// so the baby rotations rot_b(x_i) of each input chunk share one hoisted
// decomposition and serve every output block that reads the chunk, and
// each giant step of an output chunk costs one rotation whatever the number
// of input chunks. n1 minimises the rotations of the whole layer. A layer
// with one output chunk of fewer than D rows may fold its blocks into
// B = nextPow2(Out) diagonals each (blockDiags) and sum the D/B partial
// results with log2(D/B) rotations after adding up the input chunks.
func (b *builder) blockMatVec(l *ir.Layer, xs []ir.ValueID, info *ir.LayerInfo, entries func(func(r, c int, v float64))) ([]ir.ValueID, error) {
	if b.naive {
		return b.naiveBlockMatVec(l, xs, info, entries)
	}
	if b.method[l.Name] == Copies {
		return nil, fmt.Errorf("%s: %s: %w (the layer spans several ciphertexts)", l.Pos, l.Name, errNoCopies)
	}
	D := b.p.Period
	in, out := chunks(l.In, D), chunks(l.Out, D)
	if len(xs) != in {
		return nil, fmt.Errorf("%s: %s: input in %d ciphertexts, the layer reads %d values (%d chunks of %d)", l.Pos, l.Name, len(xs), l.In, in, D)
	}
	// The diagonals are built only for the method chosen: a layer of few
	// outputs over wide chunks has D diagonals of D slots per block before
	// folding, B after.
	type entry struct {
		r, c int
		v    float64
	}
	var es []entry
	entries(func(r, c int, v float64) {
		if v != 0 {
			es = append(es, entry{r, c, v})
		}
	})
	plain := func(e entry) (blockKey, int) {
		t := e.r % D
		return blockKey{e.r / D, e.c / D, ((e.c%D-t)%D + D) % D}, t
	}
	place := plain
	keys := func(at func(entry) (blockKey, int)) map[blockKey]bool {
		m := map[blockKey]bool{}
		for _, e := range es {
			k, _ := at(e)
			m[k] = true
		}
		return m
	}
	n1, cost := bestSharedBabySteps(keys(plain), D)
	block := D
	if B := nextPow2(l.Out); out == 1 && B < D {
		// blockDiags directly: entry (t, c) on diagonal K = (c − t) mod D
		// of its block goes to folded diagonal K mod B, slot ⌊K/B⌋·B + t.
		folded := func(e entry) (blockKey, int) {
			K := ((e.c%D-e.r)%D + D) % D
			return blockKey{0, e.c / D, K % B}, (K/B)*B + e.r
		}
		fn1, fcost := bestSharedBabySteps(keys(folded), D)
		if fcost += log2(D / B); useBlocks(b.method, l.Name, cost, fcost) {
			place, n1, block = folded, fn1, B
		}
	}
	diags := map[blockKey][]float64{}
	for _, e := range es {
		key, slot := place(e)
		d, ok := diags[key]
		if !ok {
			d = make([]float64, D)
			diags[key] = d
		}
		d[slot] += e.v
	}
	for k, d := range diags {
		if allZero(d) {
			delete(diags, k)
		}
	}
	info.BabySteps, info.GiantSteps = n1, (D+n1-1)/n1

	// Baby steps: one hoisted rotation per input chunk, shared by every
	// output chunk.
	rot := make([]map[int]ir.ValueID, in)
	for i := range in {
		rot[i] = map[int]ir.ValueID{0: xs[i]}
		var babies []int
		for key := range diags {
			if key.i == i && key.k%n1 != 0 && !slices.Contains(babies, key.k%n1) {
				babies = append(babies, key.k%n1)
			}
		}
		if len(babies) == 0 {
			continue
		}
		slices.Sort(babies)
		op := &ir.Op{Kind: ir.OpRotHoisted, Args: []ir.ValueID{xs[i]}, Steps: babies, Const: -1, Layer: b.layer}
		for _, s := range babies {
			v := b.p.NewValue(fmt.Sprintf("%sIn%dRot%d", b.prefix, i, s), ir.Cipher, b.layer)
			op.Results = append(op.Results, v)
			rot[i][s] = v
		}
		b.p.Ops = append(b.p.Ops, op)
		info.Rotations += len(babies)
		if len(babies) > 1 {
			info.Hoisted += len(babies)
		}
	}

	ys := make([]ir.ValueID, out)
	for j := range out {
		var acc ir.ValueID
		haveAcc := false
		for g := 0; g*n1 < D; g++ {
			var sum ir.ValueID
			haveSum := false
			for i := range in {
				for s := 0; s < n1 && g*n1+s < D; s++ {
					k := g*n1 + s
					d, ok := diags[blockKey{j, i, k}]
					if !ok {
						continue
					}
					shifted := make([]float64, D) // rot_{-n1·g}(diag)
					for t := range shifted {
						shifted[t] = d[((t-g*n1)%D+D)%D]
					}
					prod := b.withConst(ir.OpMulPlain, fmt.Sprintf("Out%dIn%dProd%d", j, i, k), rot[i][s],
						&ir.Const{Name: fmt.Sprintf("%s.out%d.in%d.diag%d", l.Name, j, i, k), Kind: ir.Vector, Data: shifted})
					info.PlainMuls++
					if haveSum {
						sum = b.op(ir.OpAdd, fmt.Sprintf("Out%dBlock%dSum", j, g), sum, prod)
					} else {
						sum, haveSum = prod, true
					}
				}
			}
			if !haveSum {
				continue
			}
			if g > 0 {
				sum = b.rotate(sum, g*n1, fmt.Sprintf("Out%dBlock%d", j, g))
				info.Rotations++
			}
			if haveAcc {
				acc = b.op(ir.OpAdd, fmt.Sprintf("Out%dAcc%d", j, g), acc, sum)
			} else {
				acc, haveAcc = sum, true
			}
		}
		if !haveAcc {
			return nil, fmt.Errorf("%s: %s: every weight of outputs %d..%d is zero; they are constants and need not be encrypted", l.Pos, l.Name, j*D, min(l.Out, (j+1)*D)-1)
		}
		for step := block; step < D; step *= 2 {
			r := b.rotate(acc, step, fmt.Sprintf("Out%dFold%d", j, step))
			acc = b.op(ir.OpAdd, fmt.Sprintf("Out%dFolded%d", j, step), acc, r)
			info.Rotations++
		}
		bias := make([]float64, D)
		for t := range bias {
			if r := j*D + t%block; r < len(l.Bias) {
				bias[t] = l.Bias[r]
			}
		}
		if !allZero(bias) {
			acc = b.withConst(ir.OpAddPlain, fmt.Sprintf("Out%d", j), acc,
				&ir.Const{Name: fmt.Sprintf("%s.out%d.bias", l.Name, j), Kind: ir.Vector, Data: bias})
		}
		ys[j] = acc
	}
	info.Kind += fmt.Sprintf(" (%d×%d blocks of %d", out, in, D)
	if block < D {
		info.Kind += fmt.Sprintf(", folded in blocks of %d", block)
	}
	info.Kind += ")"
	return ys, nil
}

// bestSharedBabySteps picks the baby-step count n1 of a block product that
// minimises its rotations: for each input chunk i, the distinct nonzero
// k mod n1 of its blocks' diagonals (its hoisted baby steps), plus for each
// output chunk j, the distinct nonzero k / n1 (its giant steps). Ties go to
// the smallest n1. The candidates are those of babyCandidates, not every
// n1 ≤ D: chunks are wide and layers have up to D diagonals per block.
func bestSharedBabySteps(diags map[blockKey]bool, D int) (n1, rotations int) {
	keys := make([]blockKey, 0, len(diags))
	in, out := 1, 1
	for k := range diags {
		keys = append(keys, k)
		in, out = max(in, k.i+1), max(out, k.j+1)
	}
	// babies[i·D + s] == n marks baby step s of input chunk i as counted for
	// this n; likewise giants. No clearing between candidates.
	babies, giants := make([]int, in*D), make([]int, out*(D+1))
	best, bestCost := 1, math.MaxInt
	for _, n := range babyCandidates(D) {
		cost := 0
		for _, k := range keys {
			if s := k.k % n; s != 0 && babies[k.i*D+s] != n {
				babies[k.i*D+s] = n
				cost++
			}
			if g := k.k / n; g != 0 && giants[k.j*(D+1)+g] != n {
				giants[k.j*(D+1)+g] = n
				cost++
			}
		}
		if cost < bestCost {
			best, bestCost = n, cost
		}
	}
	return best, bestCost
}

// babyCandidates are the baby-step counts bestSharedBabySteps tries, in
// ascending order: every n up to 4·√D (a dense block's best split is near
// √D) and every power of two up to D (a folded block of B diagonals is
// best split at B).
func babyCandidates(D int) []int {
	limit := min(D, 4*int(math.Ceil(math.Sqrt(float64(D)))))
	var out []int
	for n := 1; n <= limit; n++ {
		out = append(out, n)
	}
	for n := nextPow2(limit + 1); n <= D; n *= 2 {
		out = append(out, n)
	}
	return out
}
