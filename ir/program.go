package ir

// Program is the ciphertext-level form of a model: SSA values and the
// operations that produce them, in execution order. Lowering fills the
// operations; later passes assign parameters, levels, exact scales and keys.
type Program struct {
	Name       string
	SpecFile   string
	InputName  string
	InputSize  int
	OutputName string
	OutputSize int

	// Period is the length D of the slot layout: every ciphertext holds a
	// chunk of a vector in slots [0, D) zero-padded and is replicated with
	// period D over all slots, so a rotation of the whole slot vector is a
	// cyclic rotation of length D.
	Period int

	// Input and Output are the layouts of the program's input and result:
	// the input op has one result per input ciphertext and the output op
	// one operand per output ciphertext, chunk by chunk. Both have period
	// Period. A vector wider than one ciphertext is split in chunks.
	Input  Layout
	Output Layout

	Params Params

	Values []*Value // indexed by ValueID
	Ops    []*Op    // in execution order
	Consts []*Const // plaintext vectors and polynomials, in first-use order
	Layers []*LayerInfo

	Rotations []int // exact set of rotation steps used, ascending
	// RotationLevels[i] is the highest level the program rotates by
	// Rotations[i] at: the level its key is made for.
	RotationLevels []int
	Relinearize    bool // a relinearization key is needed
}

// Params are the CKKS parameters the program runs under.
type Params struct {
	LogN     int
	LogQ     []int // bits of each ciphertext prime, q0 first
	LogP     []int // bits of each key-switching prime
	LogScale int   // log2 of the default scale
	// Q and P are the primes themselves, filled by the params pass.
	Q, P []uint64
	// Why records the reasoning behind the choice, for plan reports.
	Why []string
	// SecurityBound is the largest log2(QP) for LogN at 128-bit security in
	// the HomomorphicEncryption.org standard; LogQP is the chain's own.
	SecurityBound int
	LogQP         int
	Insecure      bool
}

// MaxLevel is the level of a fresh ciphertext.
func (p Params) MaxLevel() int { return len(p.LogQ) - 1 }

// Slots is the number of complex slots, N/2.
func (p Params) Slots() int {
	if p.LogN == 0 {
		return 0
	}
	return 1 << (p.LogN - 1)
}

// ValueID indexes Program.Values.
type ValueID int

// ValueKind says whether a value is a ciphertext or a plaintext.
type ValueKind int

const (
	// Cipher is an encrypted vector.
	Cipher ValueKind = iota
	// Plain is a plaintext vector; it always comes from a Const.
	Plain
)

// Value is one SSA value.
type Value struct {
	ID     ValueID
	Name   string // Go identifier chosen from the spec's layer names
	Kind   ValueKind
	Level  int
	Scale  Scale
	Degree int // 1 for a fresh ciphertext, 2 after a ciphertext product
	Layer  int // index into Program.Layers, -1 for the input
}

// OpKind names a ciphertext-level operation.
type OpKind string

// The operations. Each mirrors one method of the runtime evaluator.
const (
	OpInput       OpKind = "input"      // → one fresh ciphertext per input chunk
	OpRotate      OpKind = "rotate"     // ct → ct rotated left by Steps[0]
	OpRotHoisted  OpKind = "rothoisted" // ct → one result per Steps, one decomposition
	OpRotSum      OpKind = "rotsum"     // ct, ct, … → Σ_i rot_{Steps[i]}(Args[i]) (step 0: unrotated), one basis change back for all
	OpMulPlain    OpKind = "mulplain"   // ct, Const → ct
	OpDot         OpKind = "dot"        // ct, ct, … with Consts → Σ_i Args[i] ⊙ Consts[i], one accumulator
	OpAddPlain    OpKind = "addplain"   // ct, Const → ct
	OpAdd         OpKind = "add"        // ct, ct → ct
	OpMul         OpKind = "mul"        // ct, ct → ct of degree 2
	OpRelinearize OpKind = "relin"      // degree 2 → degree 1
	OpRescale     OpKind = "rescale"    // level l, scale s → level l-1, scale s/q_l
	OpDropLevel   OpKind = "drop"       // level l → level l-Drop, same scale
	OpPoly        OpKind = "poly"       // ct, Const polynomial → ct at the default scale
	OpOutput      OpKind = "output"     // marks the result, one operand per output chunk
)

// Op is one operation.
type Op struct {
	Kind    OpKind
	Args    []ValueID
	Results []ValueID
	Steps   []int // rotations
	Const   int   // index into Program.Consts for mulplain, addplain, poly; else -1
	Consts  []int // indices into Program.Consts for dot, one per operand
	Drop    int   // levels dropped by OpDropLevel
	Layer   int   // index into Program.Layers
}

// ConstKind says what a constant holds.
type ConstKind int

const (
	// Vector is a slot vector of length Period, encoded as a plaintext.
	Vector ConstKind = iota
	// Polynomial is the coefficient list of an activation.
	Polynomial
)

// Const is a plaintext constant: a vector encoded at a level and an exact
// scale, or a polynomial evaluated by OpPoly.
type Const struct {
	Name  string // weight-blob key, e.g. "dense1.diag3"
	Ident string // Go identifier, e.g. "Dense1Diag3"
	Kind  ConstKind
	Data  []float64 // vector of length Period, or coefficients
	Basis Basis     // for polynomials
	Level int
	Scale Scale
}

// LayerInfo describes one graph layer as lowered, for trace comments and
// reports.
type LayerInfo struct {
	Name       string
	Kind       string // "dense 10→16", "tanh (chebyshev, degree 7)", …
	Pos        Pos
	LevelIn    int
	LevelOut   int
	Rotations  int // total rotations
	Hoisted    int // rotations sharing a decomposition with another
	PlainMuls  int
	CtMuls     int
	Rescales   int
	Relins     int
	Depth      int // levels consumed
	BabySteps  int // BSGS split of a dense layer
	GiantSteps int
}

// Op returns the op that defines v, or nil.
func (p *Program) Def(v ValueID) *Op {
	for _, op := range p.Ops {
		for _, r := range op.Results {
			if r == v {
				return op
			}
		}
	}
	return nil
}

// NewValue appends a value and returns its ID.
func (p *Program) NewValue(name string, kind ValueKind, layer int) ValueID {
	id := ValueID(len(p.Values))
	p.Values = append(p.Values, &Value{ID: id, Name: name, Kind: kind, Degree: 1, Layer: layer})
	return id
}

// Outputs returns the values marked by the output op, one per output
// ciphertext in chunk order, or nil.
func (p *Program) Outputs() []ValueID {
	for _, op := range p.Ops {
		if op.Kind == OpOutput {
			return op.Args
		}
	}
	return nil
}

// Inputs returns the values produced by the input op, one per input
// ciphertext in chunk order, or nil.
func (p *Program) Inputs() []ValueID {
	for _, op := range p.Ops {
		if op.Kind == OpInput {
			return op.Results
		}
	}
	return nil
}
