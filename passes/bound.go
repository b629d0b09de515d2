package passes

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/runtime"
)

// BoundDefinition says in prose what LowerBound counts; the benchmark
// prints it under its table.
const BoundDefinition = `lower bound: the work that the compiled program's layout cannot avoid, at the program's own levels, priced with
primitives measured in the same run. Per linear layer, with K the set of nonzero diagonals of its layout (of the
blocked matrix where the layer is blocked): |K| plaintext products and |K|-1 additions, or |K| terms of a dot
where that is cheaper; rotations as the cheapest baby-step giant-step split of K over every baby-step count n1,
with diagonals read in [0, D) or as signed offsets (the baby-step window from 0 or centred on 0), in either
orientation (baby steps k mod n1 rotate the input ciphertext and are priced as one hoisted set, giant
steps k div n1 rotate distinct sums and are priced as full rotations, or as the terms of one rotate-sum where a sum has two or more and that is cheaper;
or the roles of the two swapped); a blocked layer's sum of P/B shifted copies (P the period D, or the shorter
period with which its input repeats, read off its folds) priced as the cheapest staging of hoisted sets
(log2(P/B) single rotations at most); a sum of shifted copies of a layer's input, read by the products as their
input, priced as one hoisted set of its nonzero shifts; one rescale per level at which it multiplies. Per
ciphertext product one product with its relinearization and one rescale; per polynomial of degree d,
ceil(log2 d) such products (each at most doubles the degree) and one rescale per level it consumes. A hoisted
set of r rotations costs rot + (r-1)(hoisted4 - rot)/3 (fitted to one rotation and a hoisted set of 4).
Everything else (encoding, level drops, scalar products, bias additions) is free.`

// Bound is the lower bound of one program's evaluation: see LowerBound.
type Bound struct {
	Layers []BoundLayer
	// Totals over the layers.
	PlainMuls   int
	KeySwitches int // rotations of the cheapest splits, folds and copies, and relinearizations
	Relins      int
	Rescales    int
	MS          float64
}

// BoundLayer is the bound of one layer.
type BoundLayer struct {
	Layer     string
	Diagonals int // plaintext products: nonzero diagonals of the layout
	// BabySteps and GiantSteps are the rotations of the cheapest split
	// at baby-step count Split: BabySteps rotate the inputs in hoisted
	// sets, GiantSteps rotate sums. Transposed says the split hoists the
	// input rotations by multiples of Split and rotates the sums by the
	// remainders. Folds are the rotations of the cheapest staging of a
	// blocked layer's sum. Copies are the rotations of the input whose
	// sum the products read (the copies method).
	Split, BabySteps, GiantSteps, Folds, Copies int
	Transposed                                  bool
	Relins, Rescales                            int
	MS                                          float64
}

// LowerBound is the cost of the work that a leveled program's layout
// cannot avoid (BoundDefinition states it for readers of the benchmark),
// priced with prof at the levels the program assigns.
//
// It reads the layout off the program itself, so that it holds for any
// lowering of the same layout: a plaintext product whose ciphertext
// operand is a layer input rotated by i (0 when unrotated), and whose
// result reaches the layer's sum through additions and rotations totalling
// j (giant steps) before any value is used twice, multiplies diagonal
// (i + j) mod D. Rotations of a layer that are neither of an input nor on
// such a path sum shifted copies of the whole (a blocked layer's fold);
// the smallest of their steps is the block B, and D/B copies must be
// summed. For each layer:
//
//   - one plaintext product per diagonal and |K|-1 additions, at the level
//     of the products;
//   - rotations: min over n1 in [1, max K + 1] of hoisted(|I|) + |J|·rot,
//     with I the nonzero k mod n1 of each input ciphertext's diagonals (its
//     hoisted baby steps) and J the nonzero k div n1 of each sum's (its
//     giant steps, one rotation each, shared by the inputs the sum adds up),
//     and of the transposed split with the roles of k mod n1 and k div n1
//     swapped (inputs rotated by n1·(k div n1) in one hoisted set, sums by
//     k mod n1), at the level of the layer's input;
//   - the fold of n = D/B copies: min over n = a·m of hoisted(a−1) plus the
//     fold of m copies (rotate-and-sum by halves at most), at the level of
//     the program's fold;
//   - a sum of rotations of one layer input that the products read as
//     their input (the copies method): hoisted(r) for its r nonzero
//     shifts; the sum is then an input of its own for the splits above;
//   - one rescale per distinct level of its plaintext products, and for
//     every ciphertext product one product with relinearization and one
//     rescale;
//   - a polynomial of degree d: ⌈log2 d⌉ ciphertext products, each with its
//     relinearization and rescale, and one rescale per further level it
//     consumes, at the levels it runs through.
//
// hoisted(r) is rot + (r−1)·m with m = (hoisted4 − rot)/3 clamped to
// [0, rot]: one decomposition and r inner products, fitted to the
// profile's single rotation and its hoisted set of runtime.HoistedSteps.
func LowerBound(p *ir.Program, prof *Profile) (*Bound, error) {
	if p.Params.LogN == 0 {
		return nil, fmt.Errorf("bound: program %s has no parameters yet", p.Name)
	}
	prof = prof.ForSpecials(len(p.Params.LogP))
	logN, D := p.Params.LogN, p.Period
	cost := func(op string, level int) float64 { return prof.Cost(op, logN, max(level, 0)) / 1e6 }
	def := map[ir.ValueID]*ir.Op{}
	uses := map[ir.ValueID][]*ir.Op{}
	for _, op := range p.Ops {
		for _, r := range op.Results {
			def[r] = op
		}
		for _, a := range op.Args {
			uses[a] = append(uses[a], op)
		}
	}
	level := func(v ir.ValueID) int { return p.Values[v].Level }

	// pre[v]: v is a rotation of a layer input base by off.
	type rotated struct {
		base ir.ValueID
		off  int
	}
	pre := map[ir.ValueID]rotated{}
	onPath := map[*ir.Op]bool{} // rotations accounted for as baby or giant steps
	origin := func(v ir.ValueID, layer int) (rotated, bool) {
		if r, ok := pre[v]; ok {
			return r, true
		}
		if d := def[v]; d == nil || d.Layer != layer {
			return rotated{base: v}, true
		}
		return rotated{}, false
	}
	b := &Bound{}
	for li, info := range p.Layers {
		bl := BoundLayer{Layer: info.Name}
		// copySum[v]: v adds up rotations of one layer input by these
		// offsets (0 for the input itself); v is then an input of its own.
		copySum := map[ir.ValueID][]int{}
		copyBase := map[ir.ValueID]ir.ValueID{}
		type product struct {
			base ir.ValueID
			k    int
			sum  ir.ValueID // where the trace stopped: the layer's sum
		}
		var prods []product
		var prodLevels []int
		inputLevel := -1
		// traceProduct follows a product of arg, first value res, to the
		// layer's sum: the diagonal it multiplies is its input's rotation
		// plus the rotations on the way.
		traceProduct := func(arg, res ir.ValueID) product {
			src, ok := origin(arg, li)
			if !ok {
				src = rotated{base: arg} // a product of an intermediate value: its own base
			}
			inputLevel = max(inputLevel, level(arg))
			prodLevels = append(prodLevels, level(arg))
			cur, post := res, 0
			for {
				us := uses[cur]
				if len(us) != 1 || us[0].Layer != li {
					break
				}
				u := us[0]
				if u.Kind == ir.OpRotate {
					post += u.Steps[0]
					onPath[u] = true
				} else if u.Kind == ir.OpRotSum {
					post += u.Steps[slices.Index(u.Args, cur)]
				} else if u.Kind != ir.OpAdd && u.Kind != ir.OpAddPlain && u.Kind != ir.OpRescale &&
					u.Kind != ir.OpRelinearize && u.Kind != ir.OpDropLevel {
					break
				}
				cur = u.Results[0]
			}
			return product{src.base, (src.off + post) % D, cur}
		}
		for _, op := range p.Ops {
			if op.Layer != li {
				continue
			}
			switch op.Kind {
			case ir.OpRotate, ir.OpRotHoisted:
				src, ok := origin(op.Args[0], li)
				if !ok {
					continue
				}
				onPath[op] = true
				for i, r := range op.Results {
					pre[r] = rotated{src.base, (src.off + op.Steps[i]) % D}
				}
				inputLevel = max(inputLevel, level(op.Args[0]))
			case ir.OpRescale, ir.OpDropLevel, ir.OpRelinearize:
				if r, ok := pre[op.Args[0]]; ok {
					pre[op.Results[0]] = r
				}
			case ir.OpAdd:
				// A sum of rotations of one input: shifted copies.
				var offs []int
				var base ir.ValueID
				ok := true
				for n, a := range op.Args {
					var bs ir.ValueID
					var os []int
					if c, isSum := copySum[a]; isSum {
						bs, os = copyBase[a], c
					} else if r, isRot := origin(a, li); isRot {
						bs, os = r.base, []int{r.off}
					} else {
						ok = false
						break
					}
					if n > 0 && bs != base {
						ok = false
						break
					}
					base, offs = bs, append(offs, os...)
				}
				if ok {
					v := op.Results[0]
					copySum[v], copyBase[v] = offs, base
					pre[v] = rotated{base: v}
				}
			case ir.OpMulPlain, ir.OpDot:
				// Each product (a dot's terms) multiplies one diagonal.
				for _, arg := range op.Args {
					prods = append(prods, traceProduct(arg, op.Results[0]))
				}
			}
		}
		// Diagonals, per sum and input.
		type key struct{ sum, base ir.ValueID }
		diags := map[key]map[int]bool{}
		var keys []key
		maxK := 0
		for _, pr := range prods {
			k := key{pr.sum, pr.base}
			if diags[k] == nil {
				diags[k] = map[int]bool{}
				keys = append(keys, k)
			}
			diags[k][pr.k] = true
			maxK = max(maxK, pr.k)
		}
		for _, k := range keys {
			bl.Diagonals += len(diags[k])
		}
		if bl.Diagonals > 0 {
			l := inputLevel
			n := float64(bl.Diagonals)
			bl.MS += math.Min(n*cost(CostMulPlain, l)+(n-1)*cost(CostAdd, l), n*dotTerm(prof, logN, max(l, 0))/1e6)
			bases := map[ir.ValueID][]int{} // diagonals by input, for the baby steps
			sums := map[ir.ValueID][]int{}  // diagonals by sum, for the giant steps
			var baseOrder, sumOrder []ir.ValueID
			for _, k := range keys {
				for d := range diags[k] {
					if bases[k.base] == nil {
						baseOrder = append(baseOrder, k.base)
					}
					if sums[k.sum] == nil {
						sumOrder = append(sumOrder, k.sum)
					}
					bases[k.base] = append(bases[k.base], d)
					sums[k.sum] = append(sums[k.sum], d)
				}
			}
			// distinct counts the distinct nonzero f(d) < D+1 over ds,
			// with a generation stamp instead of a set per count.
			stamp, gen := make([]int, 2*D+1), 0
			distinct := func(ds []int, f func(int) int) int {
				gen++
				n := 0
				for _, d := range ds {
					if v := f(d); v != 0 && stamp[D+v] != gen {
						stamp[D+v] = gen
						n++
					}
				}
				return n
			}
			best := math.Inf(1)
			// The usual split hoists the input rotations by k mod n1 and
			// rotates each sum by k − k mod n1; the transposed one hoists
			// the input rotations by n1·(k div n1) and rotates each sum by
			// k mod n1. Ties go to the usual split and the smallest n1.
			// The signed readings of bestSplit (diagonals as offsets in
			// (−D/2, D/2], the window from 0 or centred on zero) count
			// steps the same way.
			signed := func(centred bool) func(d, n1 int) (int, int) {
				return func(d, n1 int) (int, int) {
					s := split{n1: n1, signed: true}
					if centred {
						s.i0 = -(n1 / 2)
					}
					return s.parts(d, D)
				}
			}
			forms := []struct {
				input, sum func(d, n1 int) int
			}{
				{func(d, n1 int) int { return d % n1 }, func(d, n1 int) int { return d / n1 }},
				{func(d, n1 int) int { return d / n1 }, func(d, n1 int) int { return d % n1 }},
				{func(d, n1 int) int { i, _ := signed(false)(d, n1); return i }, func(d, n1 int) int { _, g := signed(false)(d, n1); return g }},
				{func(d, n1 int) int { i, _ := signed(true)(d, n1); return i }, func(d, n1 int) int { _, g := signed(true)(d, n1); return g }},
			}
			for form, f := range forms {
				for n1 := 1; n1 <= maxK+1; n1++ {
					ms, nb, ng := 0.0, 0, 0
					for _, base := range baseOrder { // one hoisted set per input
						r := distinct(bases[base], func(d int) int { return f.input(d, n1) })
						ms += hoistedMS(prof, logN, l, r)
						nb += r
					}
					for _, sum := range sumOrder { // one rotation per step of each sum
						n := distinct(sums[sum], func(d int) int { return f.sum(d, n1) })
						ms += giantMS(prof, logN, l, n)
						ng += n
					}
					if ms < best {
						best, bl.Split, bl.BabySteps, bl.GiantSteps, bl.Transposed = ms, n1, nb, ng, form == 1
					}
				}
			}
			bl.MS += best
			for _, base := range baseOrder {
				if offs, ok := copySum[base]; ok {
					r := distinct(offs, func(d int) int { return d })
					bl.Copies += r
					bl.MS += hoistedMS(prof, logN, level(base), r)
				}
			}
			slices.Sort(prodLevels)
			prodLevels = slices.Compact(prodLevels)
			bl.Rescales += len(prodLevels)
			bl.MS += rescalesMS(prof, logN, prodLevels)
		}
		// Folds: rotations off the products' paths.
		block, span, foldLevel := 0, 0, -1
		for _, op := range p.Ops {
			if op.Layer == li && (op.Kind == ir.OpRotate || op.Kind == ir.OpRotHoisted) && !onPath[op] {
				for _, s := range op.Steps {
					if block == 0 || s < block {
						block = s
					}
					span = max(span, 2*s)
				}
				foldLevel = max(foldLevel, level(op.Args[0]))
			}
		}
		if block > 0 {
			// The copies span D, or the shorter period of an input that
			// repeats (the largest fold step is half of it).
			span = min(nextPow2(span), D)
			if D%block != 0 || span%block != 0 {
				return nil, fmt.Errorf("bound: layer %s: fold step %d does not divide the period %d", info.Name, block, span)
			}
			ms, rots := foldMS(prof, logN, foldLevel, span/block)
			bl.MS += ms
			bl.Folds = rots
		}
		// Ciphertext products and polynomials.
		for _, op := range p.Ops {
			if op.Layer != li {
				continue
			}
			switch op.Kind {
			case ir.OpMul:
				l := level(op.Args[0])
				bl.Relins++
				bl.Rescales++
				bl.MS += cost(CostMulRelin, l) + cost(CostRescale, l)
			case ir.OpPoly:
				d := len(p.Consts[op.Const].Data) - 1
				l := level(op.Args[0])
				depth := ir.PolyDepth(d)
				products := 0
				if d >= 2 {
					products = int(math.Ceil(math.Log2(float64(d))))
				}
				for t := range depth {
					if t < products {
						bl.Relins++
						bl.MS += cost(CostMulRelin, l-t)
					}
					bl.Rescales++
					bl.MS += cost(CostRescale, l-t)
				}
			}
		}
		b.Layers = append(b.Layers, bl)
		b.PlainMuls += bl.Diagonals
		b.KeySwitches += bl.BabySteps + bl.GiantSteps + bl.Folds + bl.Copies + bl.Relins
		b.Relins += bl.Relins
		b.Rescales += bl.Rescales
		b.MS += bl.MS
	}
	return b, nil
}

// hoistedMS prices r rotations of one ciphertext sharing one
// decomposition: rot + (r−1)·m, m the profile's cost of one more rotation
// in its hoisted set, clamped to [0, rot].
func hoistedMS(prof *Profile, logN, level, r int) float64 {
	if r == 0 {
		return 0
	}
	rot := prof.Cost(CostRotate, logN, max(level, 0))
	h := prof.Cost(CostHoisted, logN, max(level, 0))
	m := math.Min(math.Max((h-rot)/(runtime.HoistedSteps-1), 0), rot)
	return (rot + float64(r-1)*m) / 1e6
}

// foldMS is the cheapest way to sum n cyclic shifts (by multiples of the
// block) of one ciphertext in stages: a stage sums a shifts of the current
// ciphertext with one hoisted set of a−1 rotations (a = 2: one rotation),
// leaving n/a to sum. It returns the time and the rotations of the
// cheapest staging.
func foldMS(prof *Profile, logN, level, n int) (float64, int) {
	if n <= 1 {
		return 0, 0
	}
	best, bestRots := math.Inf(1), 0
	for a := 2; a <= n; a++ {
		if n%a != 0 {
			continue
		}
		rest, rots := foldMS(prof, logN, level, n/a)
		ms := hoistedMS(prof, logN, level, a-1) + float64(a-1)*prof.Cost(CostAdd, logN, max(level, 0))/1e6 + rest
		if ms < best {
			best, bestRots = ms, rots+a-1
		}
	}
	return best, bestRots
}

func rescalesMS(prof *Profile, logN int, levels []int) float64 {
	ms := 0.0
	for _, l := range levels {
		ms += prof.Cost(CostRescale, logN, max(l, 0)) / 1e6
	}
	return ms
}

// String is a one-line summary of the bound.
func (b *Bound) String() string {
	var parts []string
	for _, l := range b.Layers {
		if l.Diagonals == 0 && l.Relins == 0 && l.Rescales == 0 {
			continue
		}
		s := fmt.Sprintf("%s: %d products", l.Layer, l.Diagonals)
		if l.BabySteps+l.GiantSteps > 0 {
			t := ""
			if l.Transposed {
				t = ", transposed"
			}
			s += fmt.Sprintf(", %d+%d rotations (n1=%d%s)", l.BabySteps, l.GiantSteps, l.Split, t)
		}
		if l.Folds > 0 {
			s += fmt.Sprintf(", %d fold rotations", l.Folds)
		}
		if l.Copies > 0 {
			s += fmt.Sprintf(", %d copy rotations", l.Copies)
		}
		if l.Relins > 0 {
			s += fmt.Sprintf(", %d relinearizations", l.Relins)
		}
		parts = append(parts, s+fmt.Sprintf(", %.1f ms", l.MS))
	}
	return strings.Join(parts, "; ")
}

// giantMS is the cost in ms of n giant steps of one sum at level ℓ: n full
// rotations, or, for two or more, one rotate-sum of n terms where that is
// cheaper.
func giantMS(prof *Profile, logN, level, n int) float64 {
	per := prof.Cost(CostRotate, logN, level)
	if n >= 2 {
		per = math.Min(per, rotSumTerm(prof, logN, level))
	}
	return float64(n) * per / 1e6
}
