// Package passes turns a model graph into a ciphertext-level program. The
// whole compiler is the one ordered table below; each pass is a plain
// function in a file of its own, never prints, and reports through State.
package passes

import (
	"fmt"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// Pass is one step of the compiler.
type Pass struct {
	Name     string
	Run      func(*State) error
	Required bool     // the program is wrong without it; Options.Disable may not name it
	Stage    ir.Stage // what the verifier can check after it (program passes)
	Graph    bool     // the pass transforms the graph, before lowering
	Why      string
}

// Pipeline is the compiler, in order.
var Pipeline = []Pass{
	{Name: "approximate", Run: approximate, Required: true, Graph: true,
		Why: "replace relu, sigmoid and tanh by Chebyshev interpolants over their declared intervals"},
	{Name: "fold-interval", Run: foldInterval, Required: true, Graph: true,
		Why: "map each interpolant's interval onto [-1, 1] inside the preceding linear layer, so no level is spent on it"},
	{Name: "fold-batchnorm", Run: foldBatchNorm, Required: true, Graph: true,
		Why: "fold each batch norm into the convolution or dense layer before it; others become diagonal maps for merge-linear"},
	{Name: "linearize", Run: linearize, Required: true, Graph: true,
		Why: "convolutions, pools and scalings become sparse matrices on the packed channel-major tensor; flatten moves no data"},
	{Name: "merge-linear", Run: mergeLinear, Graph: true,
		Why: "consecutive linear layers become their product: one level and one rescale instead of one each"},
	{Name: "lower", Run: lower, Required: true, Stage: ir.Lowered,
		Why: "lay vectors out in slots; dense layers become baby-step giant-step diagonal products, activations polynomials"},
	{Name: "output-mask", Run: maskOutput, Stage: ir.Lowered,
		Why: "the result holds only outputs: zero what else the last layer leaves (partial sums, an activation's p(0)), folded into its constants where possible"},
	{Name: "relinearize", Run: placeRelinearize, Required: true, Stage: ir.Relinearized,
		Why: "bring every ciphertext product back to degree 1 before it is rotated, multiplied or returned"},
	{Name: "rescale", Run: placeRescale, Required: true, Stage: ir.Relinearized,
		Why: "rescale once per layer, after its products are summed (before the folds of a blocked layer, where the noise allows), before the value is multiplied again"},
	{Name: "params", Run: chooseParams, Required: true, Stage: ir.Placed,
		Why: "pick the smallest ring degree whose 128-bit bound holds the modulus chain the depth and precision need"},
	{Name: "levels", Run: assignLevels, Required: true, Stage: ir.Leveled,
		Why: "assign levels and exact scales; encode plaintexts at the scale of the prime the next rescale drops"},
	{Name: "special-primes", Run: chooseSpecials, Stage: ir.Leveled,
		Why: "give P as many primes as makes key switches cheapest within the 128-bit bound: fewer, larger digits, smaller keys"},
	{Name: "key-budget", Run: keyBudget, Stage: ir.Leveled,
		Why: "under a key budget, keep fewer rotation keys; nest sums of rotations and compose the other rotations as chains of them"},
	{Name: "sum-rotations", Run: sumRotations, Stage: ir.Leveled,
		Why: "a sum of rotations becomes one rotate-sum: the key switches are added in the extended basis and brought down once"},
	{Name: "fuse-products", Run: fuseProducts, Stage: ir.Leveled,
		Why: "a sum of plaintext products becomes one dot: the products accumulate in one ciphertext"},
	{Name: "keys", Run: collectKeys, Required: true, Stage: ir.Keyed,
		Why: "the Galois key set is exactly the rotations used"},
	{Name: "names", Run: nameValues, Required: true, Stage: ir.Keyed,
		Why: "give every value and constant a unique Go identifier taken from the spec's layer names"},
}

// Order lists ordering constraints between passes, each with its reason; a
// test checks that Pipeline honours them.
var Order = []struct{ Before, After, Why string }{
	{"approximate", "fold-interval", "the interval map folds into coefficients that exist only after approximation"},
	{"fold-interval", "lower", "lowering reads the folded weights"},
	{"fold-interval", "fold-batchnorm", "the reference model is kept before batch norms fold, and an interval folds into a batch norm's γ and β"},
	{"fold-batchnorm", "linearize", "a batch norm folds into a convolution's kernel before it becomes a matrix"},
	{"linearize", "merge-linear", "merging multiplies the matrices linearize makes"},
	{"merge-linear", "lower", "lowering reads the merged layers"},
	{"relinearize", "rescale", "rescale placement needs degree-1 values"},
	{"rescale", "params", "the depth is known only once every rescale is placed"},
	{"params", "levels", "levels count down from the chain's top"},
	{"levels", "keys", "keys are generated per level of use"},
	{"lower", "output-mask", "the mask reads the lowered program's slot layout"},
	{"output-mask", "rescale", "a mask that is a plaintext product gets its rescale placed with the others, and params counts its level"},
	{"levels", "special-primes", "the program is priced at its levels"},
	{"special-primes", "key-budget", "keys are sized and key switches priced with the special primes chosen"},
	{"levels", "key-budget", "each rotation is weighted by its level's cost, and keys are sized by the chain params chose"},
	{"key-budget", "keys", "the key set is collected from the rotations the budget leaves"},
	{"key-budget", "sum-rotations", "the budget rewrites single rotations; they merge only after it"},
	{"levels", "sum-rotations", "the terms of a sum meet at one level and scale once drops are placed"},
	{"sum-rotations", "keys", "keys are collected from the rotate-sums too"},
	{"levels", "fuse-products", "every product of a dot is encoded at its term's level and scale"},
	{"key-budget", "fuse-products", "the budget nests sums of rotations through their additions"},
}

// Options are the per-run settings of one compilation.
type Options struct {
	// Verify runs the IR verifier after every pass (cheap; on by default in
	// Compile).
	NoVerify bool
	// DumpAfter names passes whose output is kept in Report.Dumps.
	DumpAfter []string
	// KeepApart names linear layers that merge-linear must not merge into
	// the linear layer before them (the selection pass sets it).
	KeepApart map[string]bool
	// Degree gives the interpolant degree of activations declared with a
	// tolerance, by layer name (the selection sets it; one of
	// Report.Degrees).
	Degree map[string]int
	// Method gives the matrix method of linear layers by (merged) layer
	// name; absent, lower takes the one with fewer rotations.
	Method map[string]Method
	// Objective is what the selection minimises.
	Objective Objective
	// Naive lowers without the ciphertext-level optimisations, as the
	// benchmark's yardstick: one rotation per diagonal, a rescale after
	// every product, eager relinearization (naive.go).
	Naive bool
	// MaxKeyBytes bounds the evaluation keys (rotation and relinearization
	// keys) in bytes; 0 means no bound. See keyBudget.
	MaxKeyBytes int64
	// ChunkSlots caps the ciphertext chunk: vectors wider than it (rounded
	// up to a power of two) are split over several ciphertexts even when a
	// larger ring would hold them in one; 0 splits only beyond the pinned
	// ring or the largest ring (see chunkPeriod).
	ChunkSlots int
	// Profile is the cost model passes price choices with (the
	// selection's); nil means DefaultProfile().
	Profile *Profile
}

// Report collects what the passes decided, for plans and trace comments.
type Report struct {
	Notes []string
	// Mergeable lists the linear layers merge-linear could merge into the
	// one before them, merged or not: the selection's choices.
	Mergeable []string
	// Degrees lists, per activation declared with a tolerance, the
	// interpolants that meet it: the selection's choices.
	Degrees map[string][]DegreeOption
	// Choices are the selection's decisions, each with its runner-up.
	Choices []Choice
	// Budget is what the key budget did, when Options.MaxKeyBytes is set.
	Budget *BudgetReport
	Dumps  map[string]string
}

// State is what passes read and write.
type State struct {
	Source *ir.Graph // the graph as parsed, never modified
	Model  *ir.Graph // the graph with activations approximated, before folding: the float64 reference
	Graph  *ir.Graph // the graph the passes transform
	Prog   *ir.Program
	Opts   Options
	Report *Report
	// inputZeros marks the slots of the program's input known to be
	// exactly zero: set by the selection when it lowers a segment that
	// reads what earlier layers made (knownZeros); nil otherwise.
	inputZeros []bool
	// noiseTerms caches noise() once the graph is final.
	noiseTerms []float64
}

// profile is the cost model of this compilation, pricing key switches with
// the program's special primes once params has chosen them.
func (s *State) profile() *Profile {
	prof := s.Opts.Profile
	if prof == nil {
		prof = DefaultProfile()
	}
	if s.Prog != nil {
		prof = prof.ForSpecials(len(s.Prog.Params.LogP))
	}
	return prof
}

func (s *State) note(format string, args ...any) {
	s.Report.Notes = append(s.Report.Notes, fmt.Sprintf(format, args...))
}

// Compile runs the pipeline on a graph. The graph is not modified.
func Compile(g *ir.Graph, opts Options) (*ir.Program, *State, error) {
	if err := ir.VerifyGraph(g); err != nil {
		return nil, nil, fmt.Errorf("graph: %w", err)
	}
	s := &State{Source: g, Graph: cloneGraph(g), Opts: opts, Report: &Report{Dumps: map[string]string{}}}
	for _, p := range Pipeline {
		if err := p.Run(s); err != nil {
			return nil, s, err // passes' errors lead with the spec position they concern
		}
		if !opts.NoVerify {
			if err := verifyAfter(s, p); err != nil {
				return nil, s, fmt.Errorf("internal error: pass %s broke an IR invariant (a generator bug; please report it): %w", p.Name, err)
			}
		}
		if slices.Contains(opts.DumpAfter, p.Name) {
			if p.Graph {
				s.Report.Dumps[p.Name] = s.Graph.String()
			} else {
				s.Report.Dumps[p.Name] = s.Prog.String()
			}
		}
	}
	return s.Prog, s, nil
}

func verifyAfter(s *State, p Pass) error {
	if p.Graph {
		return ir.VerifyGraph(s.Graph)
	}
	return ir.VerifyProgram(s.Prog, p.Stage)
}

func cloneGraph(g *ir.Graph) *ir.Graph {
	c := *g
	c.Input.Shape = slices.Clone(g.Input.Shape)
	c.Layers = make([]*ir.Layer, len(g.Layers))
	for i, l := range g.Layers {
		lc := *l
		lc.Weights = make([][]float64, len(l.Weights))
		for r, row := range l.Weights {
			lc.Weights[r] = slices.Clone(row)
		}
		lc.Bias = slices.Clone(l.Bias)
		lc.InShape, lc.OutShape = slices.Clone(l.InShape), slices.Clone(l.OutShape)
		lc.Kernel = slices.Clone(l.Kernel)
		lc.From = slices.Clone(l.From)
		if l.Window != nil {
			w := *l.Window
			lc.Window = &w
		}
		if l.Norm != nil {
			n := ir.Norm{Gamma: slices.Clone(l.Norm.Gamma), Beta: slices.Clone(l.Norm.Beta),
				Mean: slices.Clone(l.Norm.Mean), Var: slices.Clone(l.Norm.Var), Eps: l.Norm.Eps}
			lc.Norm = &n
		}
		if l.Map != nil {
			m := ir.SparseMap{Rows: l.Map.Rows, Cols: l.Map.Cols, Row: make([][]ir.Entry, len(l.Map.Row))}
			for r, row := range l.Map.Row {
				m.Row[r] = slices.Clone(row)
			}
			lc.Map = &m
		}
		if l.Act != nil {
			a := *l.Act
			a.Coeffs = slices.Clone(l.Act.Coeffs)
			lc.Act = &a
		}
		c.Layers[i] = &lc
	}
	if g.Pin != nil {
		pin := *g.Pin
		c.Pin = &pin
	}
	return &c
}
