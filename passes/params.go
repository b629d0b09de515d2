package passes

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"sync"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/runtime"
)

// chooseParams picks the CKKS parameters. The depth is the longest chain of
// rescales and polynomial levels from input to output. The default scale
// 2^s carries the precision target plus the noise the program amplifies;
// q0 holds the largest value any ciphertext carries at that scale; each
// other prime is as large as the scale, so rescaling keeps it; one special
// prime at least as large as every other prime bounds key-switching noise.
// The ring degree is the smallest whose 128-bit bound holds log2(QP) and
// whose slots hold the layout's period. Spec pins override each choice.
//
// The gain counts the extra noise of layers folded after their rescale
// (foldsAfterRescale, foldNoiseFactors).
func chooseParams(s *State) error {
	return setParams(s, s.Prog, foldsAfterRescale(s.Prog, s.Graph), s.noise())
}

// setParams is chooseParams for program p with the given fold counts per
// layer and noise terms (noiseTerms); it sets p.Params.
func setParams(s *State, p *ir.Program, folds []int, terms []float64) error {
	g := s.Graph
	depth := programDepth(p)
	bounds := valueBounds(g)
	gain := weightedGain(terms, foldNoiseFactors(folds))
	pin := g.Pin
	if pin == nil {
		pin = &ir.ParamPin{}
	}
	var why []string
	why = append(why, fmt.Sprintf("depth %d: the longest chain of rescales and polynomial levels", depth))

	// q0 holds the output at the default scale. Every earlier value lies
	// at level 1 or above, scaled by at most the square of the scale before
	// its rescale, under a modulus of at least q0 times two scale-sized
	// primes: it needs only log2|v| + 1 < log2 q0, far weaker for all but
	// the largest intermediate values, which raise q0 where they need to.
	outBound := math.Max(bounds[len(bounds)-1], 1)
	midBound := 1.0
	for _, b := range bounds[:len(bounds)-1] {
		midBound = math.Max(midBound, b)
	}
	magnitude := int(math.Ceil(math.Log2(outBound))) + 1 // sign bit and rounding room
	midBits := int(math.Ceil(math.Log2(midBound))) + 2

	var chosen *ir.Params
	for logN := 10; logN <= 15; logN++ {
		if pin.LogN != 0 && logN != pin.LogN {
			continue
		}
		if 1<<(logN-1) < p.Period {
			continue
		}
		// Noise in slots, in bits of the scale: rescale rounding grows as
		// sqrt(N); key switching adds about N·σ·q/P, kept to the same size by
		// a special prime ceil(logN/2) bits above the largest ciphertext prime
		// (common practice; the end-to-end tests measure the outcome).
		noise := logN/2 + 4
		logScale := g.Precision + noise + int(math.Ceil(math.Log2(gain)))
		logScale = min(max(logScale, 20), 60)
		if pin.LogScale != 0 {
			logScale = pin.LogScale
		}
		q0 := min(max(logScale+magnitude+2, midBits), 60) // lattigo takes ciphertext primes of at most 60 bits
		logQ := make([]int, depth+1)
		logQ[0] = q0
		for i := 1; i <= depth; i++ {
			logQ[i] = logScale
		}
		if len(pin.LogQ) > 0 {
			logQ = slices.Clone(pin.LogQ)
		}
		logP := []int{min(slices.Max(logQ)+(logN+1)/2, 61)}
		if len(pin.LogP) > 0 {
			logP = slices.Clone(pin.LogP)
		}
		sum := 0
		for _, b := range append(slices.Clone(logQ), logP...) {
			sum += b
		}
		bound, inTable := MaxLogQP128[logN]
		cand := &ir.Params{LogN: logN, LogQ: logQ, LogP: logP, LogScale: logScale, LogQP: sum, SecurityBound: bound}
		if pin.LogN == 0 && (!inTable || sum > bound) {
			continue // try the next ring degree
		}
		if pin.LogN == 0 {
			// The primes lie near 2^b on either side: bound log2 of
			// their product, not the sum of the b.
			q, pp, err := generatePrimes(logN, logQ, logP)
			if err != nil {
				return fmt.Errorf("params: %w", err)
			}
			if log2Product(q)+log2Product(pp) > float64(bound) {
				continue
			}
		}
		chosen = cand
		break
	}
	if chosen == nil {
		return fmt.Errorf("%s: no ring degree up to 2^15 holds depth %d at the precision asked (%d bits) within the 128-bit bound; lower the precision, the depth (smaller activation degrees) or pin parameters", g.SpecFile, depth, g.Precision)
	}
	c := chosen
	if len(c.LogQ)-1 < depth {
		return fmt.Errorf("%s: params: the pinned chain has %d levels, the model needs %d", pin.Pos, len(c.LogQ)-1, depth)
	}
	if 1<<(c.LogN-1) < p.Period {
		return fmt.Errorf("%s: params: logN %d gives %d slots, the layout needs %d", pin.Pos, c.LogN, 1<<(c.LogN-1), p.Period)
	}
	if bound, ok := MaxLogQP128[c.LogN]; !ok || c.LogQP > bound {
		if !g.Insecure {
			if !ok {
				return fmt.Errorf("%s: params: logN %d is outside the security table; say insecure: true to accept unvetted parameters", pin.Pos, c.LogN)
			}
			return fmt.Errorf("%s: params: log2(QP) = %d exceeds the 128-bit bound %d for logN %d (%s); say insecure: true to accept it", pin.Pos, c.LogQP, bound, c.LogN, SecuritySource)
		}
		c.Insecure = true
		why = append(why, "INSECURE: the spec accepts parameters above the 128-bit bound")
	}
	q, pp, err := generatePrimes(c.LogN, c.LogQ, c.LogP)
	if err != nil {
		return fmt.Errorf("params: %w", err)
	}
	c.Q, c.P = q, pp
	why = append(why,
		fmt.Sprintf("scale 2^%d: %d bits of precision asked, noise and its growth through the model (gain %.3g%s)", c.LogScale, g.Precision, gain, describeFolds(g, folds)),
		fmt.Sprintf("q0 of %d bits: outputs up to %.3g at the default scale (interval arithmetic over the declared input range)", c.LogQ[0], outBound),
		fmt.Sprintf("logN %d: smallest ring whose 128-bit bound (%d) holds log2(QP) = %d and %d slots hold the period %d",
			c.LogN, c.SecurityBound, c.LogQP, 1<<(c.LogN-1), p.Period))
	c.Why = why
	p.Params = *c
	return nil
}

// generatePrimes is runtime.GeneratePrimes, remembered: the selection
// compiles many variants whose chains repeat, and the primality tests
// dominate a compilation otherwise. The function is deterministic.
func generatePrimes(logN int, logQ, logP []int) (q, p []uint64, err error) {
	key := fmt.Sprint(logN, logQ, logP)
	primesMemo.Lock()
	r, ok := primesMemo.m[key]
	primesMemo.Unlock()
	if !ok {
		r.q, r.p, r.err = runtime.GeneratePrimes(logN, logQ, logP)
		primesMemo.Lock()
		if primesMemo.m == nil {
			primesMemo.m = map[string]primeSet{}
		}
		primesMemo.m[key] = r
		primesMemo.Unlock()
	}
	return slices.Clone(r.q), slices.Clone(r.p), r.err
}

type primeSet struct {
	q, p []uint64
	err  error
}

var primesMemo struct {
	sync.Mutex
	m map[string]primeSet
}

// log2Product is log2 of the product of the primes: the quantity the
// standard's table bounds (log2 of the modulus QP). A prime just above 2^b
// adds a little more than b.
func log2Product(primes []uint64) float64 {
	t := 0.0
	for _, q := range primes {
		t += math.Log2(float64(q))
	}
	return t
}

// programDepth is the number of levels the program consumes.
func programDepth(p *ir.Program) int {
	depth := 0
	for _, u := range levelsUsed(p) {
		depth = max(depth, u)
	}
	return depth
}

// levelsUsed is, for every value of p, the levels consumed on the way from
// the input to it: one per rescale, a polynomial's depth, a drop's count.
func levelsUsed(p *ir.Program) []int {
	used := make([]int, len(p.Values))
	for _, op := range p.Ops {
		u := 0
		for _, a := range op.Args {
			u = max(u, used[a])
		}
		switch op.Kind {
		case ir.OpRescale:
			u++
		case ir.OpPoly:
			u += ir.PolyDepth(len(p.Consts[op.Const].Data) - 1)
		case ir.OpDropLevel:
			u += op.Drop
		}
		for _, r := range op.Results {
			used[r] = u
		}
	}
	return used
}

// noiseGain estimates how much the errors that encryption adds grow by the
// time they reach the output: Σ_k 2·g_k·m_k, where g_k is the largest
// observed ratio |Δoutput|∞ / ε when every value after layer k (k = 0: the
// input) is perturbed by ±ε, over inputs drawn from the declared input
// range, the 2 is for safety, and m_k (factor[k], 1 where factor is short)
// is how many times one rescale's noise the encrypted value after layer k
// carries (foldNoiseFactors). Bounds by interval arithmetic (products of
// ∞-norms) are far too pessimistic for real models and would double the
// ring degree.
func noiseGain(g *ir.Graph, factor []float64) float64 {
	return weightedGain(noiseTerms(g), factor)
}

// noise is noiseTerms of the state's graph, measured once: the rescale
// pass and params both read it, and the graph does not change after
// lowering.
func (s *State) noise() []float64 {
	if s.noiseTerms == nil {
		s.noiseTerms = noiseTerms(s.Graph)
	}
	return s.noiseTerms
}

// noiseTerms are the terms 2·g_k of noiseGain, k = 0 … len(g.Layers).
func noiseTerms(g *ir.Graph) []float64 {
	r := rand.New(rand.NewPCG(0x6e6f697365, 1)) // fixed seed: builds are reproducible
	const samples, eps = 24, 1e-7
	terms := make([]float64, 0, len(g.Layers)+1)
	for k := 0; k <= len(g.Layers); k++ {
		worst := 1e-3
		for range samples {
			x := make([]float64, g.Input.Size)
			for i := range x {
				x[i] = g.Input.Min + r.Float64()*(g.Input.Max-g.Input.Min)
			}
			v := forward(g.Layers[:k], x)
			d := make([]float64, len(v))
			for i := range v {
				d[i] = v[i] + eps*float64(1-2*r.IntN(2))
			}
			a, b := forward(g.Layers[k:], v), forward(g.Layers[k:], d)
			for i := range a {
				worst = math.Max(worst, math.Abs(a[i]-b[i])/eps)
			}
		}
		terms = append(terms, 2*worst)
	}
	return terms
}

// weightedGain is Σ_k terms[k]·factor[k] (factor 1 where factor is short),
// at least 1.
func weightedGain(terms, factor []float64) float64 {
	var total float64
	for k, t := range terms {
		m := 1.0
		if k < len(factor) {
			m = factor[k]
		}
		total += t * m
	}
	return math.Max(total, 1)
}

// foldsAfterRescale counts, for every graph layer, the fold rotations its
// output goes through after its rescale (placeRescale rescales a folded
// product before its folds): the longest chain v → v + rot(v) → … that
// starts at a rescale of one of the layer's ops (the most over the
// layer's output chunks). It reads the program as the rescale pass leaves
// it (rotations and additions, before sum-rotations merges anything). The
// program's layers are the graph's, in order (lower makes one LayerInfo
// per graph layer, and each op's Layer indexes them); a program that does
// not have them (the selection's stand-in of a given depth, which has no
// layers) counts none.
func foldsAfterRescale(p *ir.Program, g *ir.Graph) []int {
	if len(p.Layers) != len(g.Layers) {
		return nil
	}
	folds := make([]int, len(g.Layers))
	for _, op := range p.Ops {
		if op.Kind != ir.OpRescale || op.Layer < 0 || op.Layer >= len(folds) {
			continue
		}
		n, v := 0, op.Results[0]
		for {
			w, ok := foldOf(p, v)
			if !ok {
				break
			}
			n, v = n+1, w
		}
		folds[op.Layer] = max(folds[op.Layer], n)
	}
	return folds
}

// foldOf returns the sum v + rot(v), if the program forms one.
func foldOf(p *ir.Program, v ir.ValueID) (ir.ValueID, bool) {
	for _, u := range uses(p, v) {
		if u.Kind != ir.OpRotate {
			continue
		}
		for _, w := range uses(p, u.Results[0]) {
			if w.Kind == ir.OpAdd && slices.Contains(w.Args, v) {
				return w.Results[0], true
			}
		}
	}
	return 0, false
}

// foldNoiseFactors maps fold counts per graph layer (foldsAfterRescale) to
// the factors of noiseGain, indexed by boundary k = layer + 1.
//
// A layer rescaled after its folds carries one rescale's rounding noise, of
// standard deviation σ: the folds' key switches add their noise at Δ·q,
// where the rescale divides it by q. Rescaled before its f folds, it
// carries σ² of variance from the rescale; each fold x + rot(x) adds two
// copies of the noise so far, which sit in different slots and are taken
// as independent, and one key switch's noise, taken as σ² (the special
// primes are sized so that a key switch adds no more than a rescale, see
// chooseParams): v_0 = σ², v_i = 2·v_{i-1} + σ², so v_f = (2^(f+1) − 1)·σ².
// The factor is the ratio of standard deviations, sqrt(2^(f+1) − 1): the
// root-mean-square growth of a sum of independent equal noises (common
// practice; the per-boundary terms themselves are added as magnitudes).
func foldNoiseFactors(folds []int) []float64 {
	if len(folds) == 0 {
		return nil
	}
	out := make([]float64, len(folds)+1)
	out[0] = 1 // the input: fresh encryption noise, no fold
	for i, f := range folds {
		out[i+1] = foldNoiseFactor(f)
	}
	return out
}

// foldNoiseFactor is sqrt(2^(f+1) − 1), 1 for no fold (foldNoiseFactors).
func foldNoiseFactor(f int) float64 {
	return math.Sqrt(math.Ldexp(1, f+1) - 1)
}

// describeFolds names, for the plan's scale line, the layers whose noise
// is multiplied for folds after their rescale.
func describeFolds(g *ir.Graph, folds []int) string {
	var parts []string
	for i, f := range folds {
		if f > 0 {
			noun := "folds"
			if f == 1 {
				noun = "fold"
			}
			parts = append(parts, fmt.Sprintf("%s ×%.3g for %d %s after its rescale", g.Layers[i].Name, foldNoiseFactor(f), f, noun))
		}
	}
	if len(parts) == 0 {
		return ""
	}
	return "; noise of " + strings.Join(parts, ", ")
}

// forward runs a chain of (folded) layers in float64.
func forward(layers []*ir.Layer, x []float64) []float64 {
	v := append([]float64(nil), x...)
	for _, l := range layers {
		v = l.Eval(v)
	}
	return v
}
