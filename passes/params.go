package passes

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

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
func chooseParams(s *State) error {
	p := s.Prog
	g := s.Graph
	depth := programDepth(p)
	bounds := valueBounds(g)
	gain := noiseGain(g)
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
	q, pp, err := runtime.GeneratePrimes(c.LogN, c.LogQ, c.LogP)
	if err != nil {
		return fmt.Errorf("params: %w", err)
	}
	c.Q, c.P = q, pp
	why = append(why,
		fmt.Sprintf("scale 2^%d: %d bits of precision asked, noise and its growth through the model (gain %.3g)", c.LogScale, g.Precision, gain),
		fmt.Sprintf("q0 of %d bits: outputs up to %.3g at the default scale (interval arithmetic over the declared input range)", c.LogQ[0], outBound),
		fmt.Sprintf("logN %d: smallest ring whose 128-bit bound (%d) holds log2(QP) = %d and %d slots hold the period %d",
			c.LogN, c.SecurityBound, c.LogQP, 1<<(c.LogN-1), p.Period))
	c.Why = why
	p.Params = *c
	return nil
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
// time they reach the output: Σ_k g_k, where g_k is the largest observed
// ratio |Δoutput|∞ / ε when every value after layer k (k = 0: the input) is
// perturbed by ±ε, over inputs drawn from the declared input range, times
// two for safety. Bounds by interval arithmetic (products of ∞-norms) are
// far too pessimistic for real models and would double the ring degree.
func noiseGain(g *ir.Graph) float64 {
	r := rand.New(rand.NewPCG(0x6e6f697365, 1)) // fixed seed: builds are reproducible
	const samples, eps = 24, 1e-7
	var total float64
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
		total += 2 * worst
	}
	return math.Max(total, 1)
}

// forward runs a chain of (folded) layers in float64.
func forward(layers []*ir.Layer, x []float64) []float64 {
	v := append([]float64(nil), x...)
	for _, l := range layers {
		v = l.Eval(v)
	}
	return v
}
