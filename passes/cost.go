package passes

import (
	_ "embed"
	"fmt"
	"math"
	"slices"

	"gopkg.in/yaml.v3"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/runtime"
)

// Cost-model operations: one per primitive the runtime times.
const (
	CostAdd      = "add"
	CostMulPlain = "mulplain"
	CostMulRelin = "mulrelin"
	CostRescale  = "rescale"
	CostRotate   = "rotate"
	CostHoisted  = "hoisted" // HoistedSteps rotations sharing one decomposition
	CostEncode   = "encode"
	// CostRotSum is a rotate-sum of HoistedSteps rotated terms: their key
	// switches summed in the extended basis, one basis change back.
	// Profiles written before it was measured lack it; a rotate-sum is
	// then priced as its rotations.
	CostRotSum = "rotsum"
	// CostDot is a dot of HoistedSteps plaintext products accumulated in
	// one ciphertext; without it a dot is priced as its products and
	// additions.
	CostDot = "dot"
)

// keySwitchOps are the primitives whose cost depends on how many primes the
// special modulus P has: a profile may hold them measured with k > 1 special
// primes as well, under their name and "@k" ("rotate@2").
var keySwitchOps = []string{CostMulRelin, CostRotate, CostHoisted, CostRotSum}

var costOps = []string{CostAdd, CostMulPlain, CostMulRelin, CostRescale, CostRotate, CostHoisted, CostEncode}

// fitOps are the primitives calibrate measures: the required ones and
// those a profile may lack.
var fitOps = append(slices.Clone(costOps), CostRotSum, CostDot)

// Profile is a cost model: for each primitive and ring degree, its median
// time in nanoseconds at a few measured levels. Between measured levels the
// time is interpolated linearly, beyond them extrapolated from the nearest
// two; ring degrees not measured are scaled as N·log N from the nearest one.
type Profile struct {
	Machine string                     `yaml:"machine"`
	Ops     map[string]map[int][]Point `yaml:"ops"`
	// specials is the number of special primes key switches are priced
	// with (ForSpecials); 0 and 1 mean one.
	specials int
}

// ForSpecials returns the profile pricing key switches as made with k
// special primes: from the "op@k" entries where the profile has them, else
// as measured with one (profiles written before they were measured).
func (p *Profile) ForSpecials(k int) *Profile {
	c := *p
	c.specials = k
	return &c
}

// HasSpecials reports whether the profile measured key switches with k
// special primes at ring degree 2^logN (always true for k = 1).
func (p *Profile) HasSpecials(k, logN int) bool {
	if k <= 1 {
		return true
	}
	for _, op := range keySwitchOps {
		if len(p.Ops[specialsName(op, k)][logN]) == 0 {
			return false
		}
	}
	return true
}

func specialsName(op string, k int) string { return fmt.Sprintf("%s@%d", op, k) }

// Point is one measured time: level and nanoseconds.
type Point struct {
	Level int     `yaml:"level"`
	NS    float64 `yaml:"ns"`
}

//go:embed profiles/default.yaml
var defaultProfileYAML []byte

// DefaultProfile is the profile measured on the reference machine (a 2-core
// build machine of this project) by `lanthorn calibrate`.
func DefaultProfile() *Profile {
	p, err := ParseProfile(defaultProfileYAML)
	if err != nil {
		panic("embedded profile: " + err.Error()) // a build defect, caught by tests
	}
	return p
}

// ParseProfile decodes a profile written by `lanthorn calibrate`.
func ParseProfile(data []byte) (*Profile, error) {
	var p Profile
	if err := yaml.Unmarshal(data, &p); err != nil {
		return nil, fmt.Errorf("profile: %w", err)
	}
	for _, op := range costOps {
		if len(p.Ops[op]) == 0 {
			return nil, fmt.Errorf("profile: no timings for %q", op)
		}
	}
	return &p, nil
}

// Cost is the estimated time of op at ring degree 2^logN and level ℓ, in
// nanoseconds.
func (p *Profile) Cost(op string, logN, level int) float64 {
	byN := p.Ops[op]
	if p.specials > 1 && slices.Contains(keySwitchOps, op) {
		if m := p.Ops[specialsName(op, p.specials)]; len(m) > 0 {
			byN = m
		}
	}
	if len(byN) == 0 {
		return 0
	}
	near, found := 0, false
	for n := range byN {
		if !found || abs(n-logN) < abs(near-logN) || (abs(n-logN) == abs(near-logN) && n > near) {
			near, found = n, true
		}
	}
	t := interpolate(byN[near], level)
	if near != logN { // N·log N scaling
		t *= math.Exp2(float64(logN-near)) * float64(logN) / float64(near)
	}
	return t
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// interpolate reads a time off measured points (sorted by level), linearly
// between them and from the nearest two beyond them, never below half the
// smallest measured time.
func interpolate(pts []Point, level int) float64 {
	if len(pts) == 1 {
		return pts[0].NS
	}
	i := 1
	for i < len(pts)-1 && pts[i].Level < level {
		i++
	}
	a, b := pts[i-1], pts[i]
	t := a.NS + (b.NS-a.NS)*float64(level-a.Level)/float64(b.Level-a.Level)
	floor := pts[0].NS
	for _, p := range pts {
		floor = math.Min(floor, p.NS)
	}
	return math.Max(t, floor/2)
}

// FitProfile turns measured timings into a profile. Key switches measured
// with k > 1 special primes go under "op@k"; every other primitive, and key
// switches with one special prime, under their names. A primitive that does
// not depend on P is taken from the timings with the fewest special primes
// at each ring degree.
func FitProfile(machine string, ts []runtime.OpTiming) (*Profile, error) {
	get := map[string]func(runtime.OpTiming) float64{
		CostAdd:      func(t runtime.OpTiming) float64 { return t.Add },
		CostMulPlain: func(t runtime.OpTiming) float64 { return t.MulPlain },
		CostMulRelin: func(t runtime.OpTiming) float64 { return t.MulRelin },
		CostRescale:  func(t runtime.OpTiming) float64 { return t.Rescale },
		CostRotate:   func(t runtime.OpTiming) float64 { return t.Rotate },
		CostHoisted:  func(t runtime.OpTiming) float64 { return t.Hoisted },
		CostEncode:   func(t runtime.OpTiming) float64 { return t.Encode },
		CostRotSum:   func(t runtime.OpTiming) float64 { return t.RotSum },
		CostDot:      func(t runtime.OpTiming) float64 { return t.Dot },
	}
	p := &Profile{Machine: machine, Ops: map[string]map[int][]Point{}}
	type set struct{ logN, specials int }
	count := map[set]int{}
	fewest := map[int]int{} // per ring degree, the fewest special primes measured
	for _, t := range ts {
		k := max(t.Specials, 1)
		count[set{t.LogN, k}]++
		if f, ok := fewest[t.LogN]; !ok || k < f {
			fewest[t.LogN] = k
		}
	}
	for c, n := range count {
		if n < 2 {
			return nil, fmt.Errorf("calibrate: logN %d (%d special primes) measured at %d levels, need at least 2", c.logN, c.specials, n)
		}
	}
	for _, op := range fitOps {
		if !slices.Contains(costOps, op) && !slices.ContainsFunc(ts, func(t runtime.OpTiming) bool { return get[op](t) > 0 }) {
			continue // an optional primitive these timings do not have
		}
		switches := slices.Contains(keySwitchOps, op)
		for _, t := range ts {
			k := max(t.Specials, 1)
			name := op
			switch {
			case switches && k > 1:
				name = specialsName(op, k)
			case !switches && k != fewest[t.LogN]:
				continue
			}
			if p.Ops[name] == nil {
				p.Ops[name] = map[int][]Point{}
			}
			p.Ops[name][t.LogN] = append(p.Ops[name][t.LogN], Point{Level: t.Level, NS: math.Round(get[op](t))})
		}
	}
	for _, byN := range p.Ops {
		for _, pts := range byN {
			slices.SortFunc(pts, func(a, b Point) int { return a.Level - b.Level })
		}
	}
	return p, nil
}

// Marshal writes the profile as YAML.
func (p *Profile) Marshal() ([]byte, error) { return yaml.Marshal(p) }

// Estimate is the estimated cost of a leveled program, per layer and in all.
type Estimate struct {
	TotalMS float64
	LayerMS []float64 // indexed like Program.Layers
}

// EstimateProgram prices every op of a program at its level.
func EstimateProgram(p *ir.Program, prof *Profile) Estimate {
	prof = prof.ForSpecials(len(p.Params.LogP))
	est := Estimate{LayerMS: make([]float64, len(p.Layers))}
	logN := p.Params.LogN
	for _, op := range p.Ops {
		level := 0
		if len(op.Args) > 0 {
			level = p.Values[op.Args[0]].Level
		}
		var ns float64
		switch op.Kind {
		case ir.OpAdd, ir.OpAddPlain:
			ns = prof.Cost(CostAdd, logN, level)
		case ir.OpMulPlain:
			ns = prof.Cost(CostMulPlain, logN, level)
		case ir.OpMul:
			ns = prof.Cost(CostMulRelin, logN, level)
		case ir.OpRescale:
			ns = prof.Cost(CostRescale, logN, level)
		case ir.OpRotate:
			ns = prof.Cost(CostRotate, logN, level)
		case ir.OpRotHoisted:
			ns = prof.Cost(CostHoisted, logN, level) * float64(len(op.Steps)) / runtime.HoistedSteps
		case ir.OpRotSum:
			ns = rotSumCost(prof, logN, level, op.Steps)
		case ir.OpDot:
			ns = float64(len(op.Args)) * dotTerm(prof, logN, level)
		case ir.OpPoly:
			ns = polyCost(prof, logN, level, len(p.Consts[op.Const].Data)-1)
		}
		est.TotalMS += ns / 1e6
		if op.Layer >= 0 && op.Layer < len(est.LayerMS) {
			est.LayerMS[op.Layer] += ns / 1e6
		}
	}
	return est
}

// polyCost prices a Paterson–Stockmeyer evaluation of degree d from level
// ℓ: about 2^⌈k/2⌉ + (k − ⌈k/2⌉) ciphertext products for the powers (k =
// ⌈log2(d+1)⌉), d plaintext-constant products and additions, and one rescale
// a level, spread over the levels it consumes.
func polyCost(prof *Profile, logN, level, d int) float64 {
	k := ir.PolyDepth(d)
	baby := 1 << ((k + 1) / 2)
	products := baby + (k - (k+1)/2) + (d+1)/baby
	mid := max(level-k/2, 0)
	return float64(products)*(prof.Cost(CostMulRelin, logN, mid)+prof.Cost(CostRescale, logN, mid)) +
		float64(d+1)*(prof.Cost(CostMulPlain, logN, mid)+prof.Cost(CostAdd, logN, mid))
}

// rotSumCost prices a rotate-sum: its rotated terms at the measured cost
// per term (the rotations' cost where the profile has no rotate-sum), and
// the additions that join its terms, as the ops it replaces are priced.
func rotSumCost(prof *Profile, logN, level int, steps []int) float64 {
	rotated := 0
	for _, s := range steps {
		if s != 0 {
			rotated++
		}
	}
	return float64(rotated)*rotSumTerm(prof, logN, level) + float64(len(steps)-1)*prof.Cost(CostAdd, logN, level)
}

// rotSumTerm is the cost in ns of one rotated term of a rotate-sum: the
// measured rotate-sum per term, or a rotation where the profile has none.
func rotSumTerm(prof *Profile, logN, level int) float64 {
	if len(prof.Ops[CostRotSum]) > 0 {
		return prof.Cost(CostRotSum, logN, level) / runtime.HoistedSteps
	}
	return prof.Cost(CostRotate, logN, level)
}

// dotTerm is the cost in ns of one product of a dot: the measured dot per
// product, or a plaintext product and an addition where the profile has
// no dot (which prices a dot of n as its n products and n−1 additions,
// within one addition).
func dotTerm(prof *Profile, logN, level int) float64 {
	if len(prof.Ops[CostDot]) > 0 {
		return prof.Cost(CostDot, logN, level) / runtime.HoistedSteps
	}
	return prof.Cost(CostMulPlain, logN, level) + prof.Cost(CostAdd, logN, level)
}
