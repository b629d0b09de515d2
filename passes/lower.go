package passes

import (
	"errors"
	"fmt"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// lower turns the graph into a program. Layout: every vector of length n
// sits in slots [0, n) of a period D (the smallest power of two holding the
// widest layer), zero-padded, replicated over all slots; a rotation of the
// slot vector is then a cyclic rotation of length D. A vector wider than
// the largest ring's slots is split in chunks of D, one ciphertext each
// (chunkPeriod, blocks.go).
func lower(s *State) error {
	g := s.Graph
	p := &ir.Program{
		Name: g.Name, SpecFile: g.SpecFile,
		InputName: g.Input.Name, InputSize: g.Input.Size,
		OutputName: g.OutputName, OutputSize: g.OutSize(),
	}
	widest := g.Input.Size
	for _, l := range g.Layers {
		widest = max(widest, l.Out)
	}
	p.Period = chunkPeriod(s, widest)
	p.Input = ir.PackedLayout(g.Input.Size, p.Period, p.Period)
	p.Output = ir.PackedLayout(g.OutSize(), p.Period, p.Period)

	pitch := 0
	if len(g.Layers) > 0 && p.Input.Count() == 1 && chunks(g.Layers[0].Out, p.Period) == 1 {
		if copies, pt := inputCopies(g.Layers[0], p.Period); copies > 1 {
			// One ciphertext: chunks as long as the input, copies pitch apart.
			p.Input.Chunk, p.Input.Copies, p.Input.Pitch, pitch = g.Input.Size, copies, pt, pt
		}
	}
	xs := inputValues(p, identifier(g.Input.Name))
	repeat := 0 // x repeats with this period (0: not known to)
	// zero: the slots of the next layer's input known to be exactly zero
	// (knownZeros); for the program's input, what the selection's segment
	// was told of the layers before it, nothing otherwise.
	zero := s.inputZeros
	if pitch > 0 {
		zero = nil
	}
	for i, l := range g.Layers {
		info := &ir.LayerInfo{Name: l.Name, Pos: l.Pos}
		p.Layers = append(p.Layers, info)
		b := &builder{p: p, layer: i, prefix: identifier(l.Name), method: s.Opts.Method, zero: zero}
		b.naive = s.Opts.Naive
		if i == 0 {
			b.pitch = pitch
		}
		if !b.naive {
			b.repeat = repeat
		}
		zero = knownZeros(zero, []*ir.Layer{l}, p.Period, func(l *ir.Layer) bool { return zeroAtZero(l.Act) })
		if len(xs) > 1 || chunks(l.Out, p.Period) > 1 {
			var err error
			if xs, err = b.chunked(l, xs, info); err != nil {
				return err
			}
			repeat = 0
			continue
		}
		x := xs[0]
		var err error
		switch l.Kind {
		case ir.Dense:
			info.Kind = fmt.Sprintf("dense %d→%d", l.In, l.Out)
			x, err = b.dense(l, x, info)
		case ir.Linear:
			info.Kind = describeLinear(l)
			x, err = b.linear(l, x, info)
		case ir.Activation:
			x, err = b.activation(l, x, info)
		default:
			err = fmt.Errorf("%s: %s: cannot lower a %s layer", l.Pos, l.Name, l.Kind)
		}
		if err != nil {
			return err
		}
		xs = []ir.ValueID{x}
		if l.Kind != ir.Activation {
			repeat = b.outRepeat // an activation keeps its input's period
		}
	}
	p.Ops = append(p.Ops, &ir.Op{Kind: ir.OpOutput, Args: xs, Const: -1, Layer: len(p.Layers) - 1})
	s.Prog = p
	return nil
}

// builder appends the ops of one layer.
type builder struct {
	p      *ir.Program
	layer  int
	prefix string
	method map[string]Method // the selection's matrix methods (method.go)
	naive  bool              // Options.Naive: naiveMatVec (naive.go)
	pitch  int               // the input is copied every pitch slots (see inputCopies); 0: one copy
	// repeat is the period with which the layer's input is known to
	// repeat (a blocked layer's output, through activations), 0 if none;
	// outRepeat the output's, once lowered.
	repeat, outRepeat int
	zero              []bool // the input's slots known to be exactly zero (knownZeros); nil: none
}

func (b *builder) op(kind ir.OpKind, name string, args ...ir.ValueID) ir.ValueID {
	v := b.p.NewValue(b.prefix+name, ir.Cipher, b.layer)
	b.p.Ops = append(b.p.Ops, &ir.Op{Kind: kind, Args: args, Results: []ir.ValueID{v}, Const: -1, Layer: b.layer})
	return v
}

func (b *builder) withConst(kind ir.OpKind, name string, arg ir.ValueID, c *ir.Const) ir.ValueID {
	v := b.op(kind, name, arg)
	op := b.p.Ops[len(b.p.Ops)-1]
	op.Const = len(b.p.Consts)
	b.p.Consts = append(b.p.Consts, c)
	return v
}

// dense lowers y = Wx + b with the diagonal method and a baby-step
// giant-step split: with diag_k[t] = W[t][(t+k) mod D],
//
//	y = Σ_j rot_{n1·j}( Σ_i rot_{-n1·j}(diag_{n1·j+i}) ⊙ rot_i(x) ) + b,
//
// so the baby rotations rot_i(x) share one hoisted decomposition and each
// giant block costs one rotation. Zero diagonals and empty blocks are
// skipped; n1 minimises the number of rotations.
func (b *builder) dense(l *ir.Layer, x ir.ValueID, info *ir.LayerInfo) (ir.ValueID, error) {
	D := b.p.Period
	diags := map[int][]float64{}
	for k := 0; k < D; k++ {
		d := make([]float64, D)
		nonzero := false
		for t := 0; t < l.Out; t++ {
			c := (t + k) % D
			if c < l.In && l.Weights[t][c] != 0 {
				d[t] = l.Weights[t][c]
				nonzero = true
			}
		}
		if nonzero {
			diags[k] = d
		}
	}
	return b.matVec(l, diags, x, info)
}

// linear lowers a sparse linear layer like a dense one, building each
// diagonal from the nonzero entries: entry (t, c) lies on diagonal
// (c − t) mod D, so the cost is the number of nonzeros, not D² per layer.
func (b *builder) linear(l *ir.Layer, x ir.ValueID, info *ir.LayerInfo) (ir.ValueID, error) {
	D := b.p.Period
	diags := map[int][]float64{}
	for t, row := range l.Map.Row {
		for _, e := range row {
			k := ((copyColumn(e.Col, t, b.pitch)-t)%D + D) % D
			d, ok := diags[k]
			if !ok {
				d = make([]float64, D)
				diags[k] = d
			}
			d[t] += e.Val
		}
	}
	for k, d := range diags {
		if allZero(d) {
			delete(diags, k)
		}
	}
	return b.matVec(l, diags, x, info)
}

// matVec emits the baby-step giant-step product of the nonzero diagonals
// with x, then adds the layer's bias.
func (b *builder) matVec(l *ir.Layer, diags map[int][]float64, x ir.ValueID, info *ir.LayerInfo) (ir.ValueID, error) {
	if b.naive {
		return b.naiveMatVec(l, diags, x, info)
	}
	D := b.p.Period
	sp := bestSplit(diags, D)
	// A layer with few outputs may instead fold its matrix into blocks of
	// B = nextPow2(Out) rows: B diagonals, then log2(D/B) rotate-and-add
	// steps sum the D/B partial results (see blockDiags).
	//
	// An input that repeats with period P (a blocked layer's output) needs
	// only the P/B blocks of one period summed, in log2(P/B) steps: the
	// product repeats with period P too (periodicDiags).
	block, span, full := D, D, diags
	var copies *copyPlan
	if B := nextPow2(l.Out); B < D {
		h, P := blockDiags(diags, l.Out, B, D), D
		if r := b.repeat; l.Kind == ir.Dense && r > 0 && r < D && r%B == 0 && l.In <= r {
			h, P = periodicDiags(l.Weights, l.In, B, r, D), r
		}
		hs := bestSplit(h, D)
		rotations := sp.rotations
		if useBlocks(b.method, l.Name, sp.rotations, hs.rotations+log2(P/B)) {
			diags, sp, block, span = h, hs, B, P
			rotations = hs.rotations + log2(P/B)
		}
		// Or read the entries from shifted copies of a sparse input
		// (copies.go), when the zeros that needs are proven; not tried
		// where the selection chose another method.
		if m, chosen := b.method[l.Name]; !chosen || m == Copies {
			cp, err := planCopies(copyEntries(full, l.Out, D), b.zero, B, D)
			switch {
			case err == nil:
				cs := bestSplit(cp.diags, D)
				if useCopies(b.method, l.Name, rotations, len(diags), len(cp.shifts)-1+cs.rotations+log2(D/B), len(cp.diags)) {
					diags, sp, block, span, copies = cp.diags, cs, B, D, cp
				}
			case chosen || !errors.Is(err, errNoCopies):
				return 0, fmt.Errorf("%s: %s: %w", l.Pos, l.Name, err)
			}
		}
	} else if b.method[l.Name] == Copies {
		return 0, fmt.Errorf("%s: %s: %w (the output is longer than half the period)", l.Pos, l.Name, errNoCopies)
	}
	if copies != nil {
		x = b.sumCopies(x, copies.shifts, info)
	}
	n1 := sp.n1
	info.BabySteps, info.GiantSteps = n1, (D+n1-1)/n1

	keys := make([]int, 0, len(diags))
	for k := range diags {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	// Baby steps ascending; giant blocks in ascending giant step, each
	// with its diagonals in ascending baby step.
	type term struct{ k, i int }
	blocks := map[int][]term{}
	var babySet, giants []int
	for _, k := range keys {
		i, g := sp.parts(k, D)
		if i != 0 && !slices.Contains(babySet, i) {
			babySet = append(babySet, i)
		}
		if _, ok := blocks[g]; !ok {
			giants = append(giants, g)
		}
		blocks[g] = append(blocks[g], term{k, i})
	}
	slices.Sort(babySet)
	slices.Sort(giants)
	mod := func(s int) int { return (s%D + D) % D }
	rot := map[int]ir.ValueID{0: x}
	if len(babySet) > 0 {
		var steps []int
		for _, i := range babySet {
			steps = append(steps, mod(i))
		}
		op := &ir.Op{Kind: ir.OpRotHoisted, Args: []ir.ValueID{x}, Steps: steps, Const: -1, Layer: b.layer}
		for _, i := range babySet {
			v := b.p.NewValue(fmt.Sprintf("%sRot%d", b.prefix, mod(i)), ir.Cipher, b.layer)
			op.Results = append(op.Results, v)
			rot[i] = v
		}
		b.p.Ops = append(b.p.Ops, op)
		info.Rotations += len(babySet)
		if len(babySet) > 1 {
			info.Hoisted += len(babySet)
		}
	}
	var acc ir.ValueID
	haveAcc := false
	for _, g := range giants {
		ts := blocks[g]
		slices.SortFunc(ts, func(a, b term) int { return a.i - b.i })
		step := mod(g * n1)
		var sum ir.ValueID
		for n, tm := range ts {
			d := diags[tm.k]
			shifted := make([]float64, D) // rot_{-g·n1}(diag_k)
			for t := range shifted {
				shifted[t] = d[mod(t-g*n1)]
			}
			prod := b.withConst(ir.OpMulPlain, fmt.Sprintf("Prod%d", tm.k), rot[tm.i],
				&ir.Const{Name: fmt.Sprintf("%s.diag%d", l.Name, tm.k), Kind: ir.Vector, Data: shifted})
			info.PlainMuls++
			if n == 0 {
				sum = prod
			} else {
				sum = b.op(ir.OpAdd, fmt.Sprintf("Block%dSum", step), sum, prod)
			}
		}
		if step != 0 {
			sum = b.rotate(sum, step, fmt.Sprintf("Block%d", step))
			info.Rotations++
		}
		if haveAcc {
			acc = b.op(ir.OpAdd, fmt.Sprintf("Acc%d", step), acc, sum)
		} else {
			acc, haveAcc = sum, true
		}
	}
	if !haveAcc {
		return 0, fmt.Errorf("%s: %s: every weight is zero; the layer is a constant and need not be encrypted", l.Pos, l.Name)
	}
	for step := block; step < span; step *= 2 {
		rot := b.rotate(acc, step, fmt.Sprintf("Fold%d", step))
		acc = b.op(ir.OpAdd, fmt.Sprintf("Folded%d", step), acc, rot)
		info.Rotations++
	}
	switch {
	case copies != nil:
		info.Kind += fmt.Sprintf(" (in blocks of %d, %d shifted copies, %d diagonals)", block, len(copies.shifts), len(diags))
	case span < D:
		info.Kind += fmt.Sprintf(" (in blocks of %d, over the input's period %d)", block, span)
	case block < D:
		info.Kind += fmt.Sprintf(" (in blocks of %d)", block)
	}
	if block < D {
		b.outRepeat = block
	}
	// With blocks the result repeats with period B over the whole period;
	// so does the bias, so every copy is the output and stays in range.
	bias := make([]float64, D)
	for t := range bias {
		if r := t % block; r < len(l.Bias) {
			bias[t] = l.Bias[r]
		}
	}
	if !allZero(bias) {
		acc = b.withConst(ir.OpAddPlain, "Out", acc,
			&ir.Const{Name: l.Name + ".bias", Kind: ir.Vector, Data: bias})
	}
	return acc, nil
}

// copyEntries lists the nonzero entries of the matrix whose diagonals
// (diag_K[t] = W[t][(t+K) mod D]) are given, by diagonal then row.
func copyEntries(diags map[int][]float64, out, D int) []copyEntry {
	ks := make([]int, 0, len(diags))
	for k := range diags {
		ks = append(ks, k)
	}
	slices.Sort(ks)
	var es []copyEntry
	for _, k := range ks {
		for t, v := range diags[k][:out] {
			if v != 0 {
				es = append(es, copyEntry{t, (t + k) % D, v})
			}
		}
	}
	return es
}

// sumCopies emits x̃ = Σ_{σ∈S} rot_{−σ}(x), the shifts in one hoisted set.
func (b *builder) sumCopies(x ir.ValueID, shifts []int, info *ir.LayerInfo) ir.ValueID {
	D := b.p.Period
	op := &ir.Op{Kind: ir.OpRotHoisted, Args: []ir.ValueID{x}, Const: -1, Layer: b.layer}
	for _, s := range shifts[1:] {
		step := ((-s)%D + D) % D
		op.Steps = append(op.Steps, step)
		op.Results = append(op.Results, b.p.NewValue(fmt.Sprintf("%sCopy%d", b.prefix, step), ir.Cipher, b.layer))
	}
	b.p.Ops = append(b.p.Ops, op)
	info.Rotations += len(op.Steps)
	if len(op.Steps) > 1 {
		info.Hoisted += len(op.Steps)
	}
	sum := x
	for i, r := range op.Results {
		name := "Copies"
		if i < len(op.Results)-1 {
			name = fmt.Sprintf("Copies%d", i+2)
		}
		sum = b.op(ir.OpAdd, name, sum, r)
	}
	return sum
}

func (b *builder) rotate(v ir.ValueID, k int, name string) ir.ValueID {
	r := b.op(ir.OpRotate, name+"Rot", v)
	b.p.Ops[len(b.p.Ops)-1].Steps = []int{k}
	return r
}

// blockDiags folds the diagonals of an Out×In matrix (diag_K[t] = W[t][(t+K)
// mod D], t < Out) into B = nextPow2(Out) diagonals over the whole period:
// h_k[r + mB] = diag_{mB+k}[r], so slot r + mB of Σ_k h_k ⊙ rot_k(x) is the
// part of row r over the columns (r + mB + k) mod D, k < B, and summing the
// D/B blocks (rotations by B, 2B, …, D/2) gives every row in full, repeated
// with period B. It is the hybrid diagonal method of Halevi and Shoup
// (common practice, from memory); it never reads a column ≥ In.
func blockDiags(diags map[int][]float64, out, B, D int) map[int][]float64 {
	h := map[int][]float64{}
	for K, d := range diags {
		k, m := K%B, K/B
		hk, ok := h[k]
		if !ok {
			hk = make([]float64, D)
			h[k] = hk
		}
		copy(hk[m*B:m*B+out], d[:out])
	}
	return h
}

// periodicDiags are the B folded diagonals of an out×in dense matrix W for
// an input that repeats with period P (B divides P, in ≤ P): entry (t, c)
// lies on diagonal K = (c − t) mod P of one period, and h_k[r + mB] =
// W[r][(r + mB + k) mod P] for mB + k < P, as blockDiags folds them; each
// h_k then repeats with period P over the D slots, so that the product
// does too and summing the P/B blocks of a period gives every row.
func periodicDiags(w [][]float64, in, B, P, D int) map[int][]float64 {
	h := map[int][]float64{}
	for k := range B {
		hk := make([]float64, D)
		nonzero := false
		for m := 0; m < P/B; m++ {
			for r := 0; r < len(w) && r < B; r++ {
				c := (r + m*B + k) % P
				if c >= in || w[r][c] == 0 {
					continue
				}
				for j := 0; j < D; j += P {
					hk[j+m*B+r] = w[r][c]
				}
				nonzero = true
			}
		}
		if nonzero {
			h[k] = hk
		}
	}
	return h
}

func log2(n int) int {
	k := 0
	for 1<<k < n {
		k++
	}
	return k
}

func (b *builder) activation(l *ir.Layer, x ir.ValueID, info *ir.LayerInfo) (ir.ValueID, error) {
	a := l.Act
	if a.Func == ir.Square {
		info.Kind = "square"
		info.CtMuls = 1
		sq := b.op(ir.OpMul, "Sq", x, x)
		b.p.Values[sq].Degree = 2
		return sq, nil
	}
	if a.Basis == ir.Chebyshev && a.Interval != [2]float64{-1, 1} {
		return 0, fmt.Errorf("%s: %s: interval not folded", l.Pos, l.Name)
	}
	if len(a.Coeffs) < 2 {
		return 0, fmt.Errorf("%s: %s: polynomial of degree below 1", l.Pos, l.Name)
	}
	d := len(a.Coeffs) - 1
	info.Kind = fmt.Sprintf("%s (%s, degree %d)", a.Func, a.Basis, d)
	info.Depth = ir.PolyDepth(d)
	return b.withConst(ir.OpPoly, "Out", x,
		&ir.Const{Name: l.Name + ".poly", Kind: ir.Polynomial, Data: append([]float64(nil), a.Coeffs...), Basis: a.Basis}), nil
}

func nextPow2(n int) int {
	p := 1
	for p < n {
		p <<= 1
	}
	return p
}

func allZero(v []float64) bool {
	for _, x := range v {
		if x != 0 {
			return false
		}
	}
	return true
}
