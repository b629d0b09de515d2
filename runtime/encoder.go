package runtime

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"github.com/tuneinsight/lattigo/v5/he/hefloat"
)

// Basis is the basis a polynomial's coefficients are given in.
type Basis int

// The zero Basis is invalid, so a forgotten basis is an error, not a guess.
const (
	Monomial  Basis = iota + 1 // c0 + c1·x + c2·x² + …
	Chebyshev                  // c0·T0(x) + c1·T1(x) + …, on [-1, 1] (no change of variable)
)

// String names the basis.
func (b Basis) String() string {
	switch b {
	case Monomial:
		return "monomial"
	case Chebyshev:
		return "chebyshev"
	}
	return fmt.Sprintf("Basis(%d)", int(b))
}

// Polynomial is a polynomial with float64 coefficients, ready for
// Evaluator.Poly.
type Polynomial struct {
	name   string
	basis  Basis
	coeffs []float64
}

// NewPolynomial makes a polynomial from coefficients c0, c1, …, cd (d ≥ 1).
// The name appears in messages.
func NewPolynomial(name string, basis Basis, coeffs []float64) (*Polynomial, error) {
	if basis != Monomial && basis != Chebyshev {
		return nil, fmt.Errorf("polynomial %q: invalid basis %v", name, basis)
	}
	if len(coeffs) < 2 {
		return nil, fmt.Errorf("polynomial %q: %d coefficients, want at least 2 (degree ≥ 1)", name, len(coeffs))
	}
	for i, c := range coeffs {
		if math.IsNaN(c) || math.IsInf(c, 0) {
			return nil, fmt.Errorf("polynomial %q: coefficient %d is %v", name, i, c)
		}
	}
	return &Polynomial{name: name, basis: basis, coeffs: slices.Clone(coeffs)}, nil
}

// Degree returns the polynomial's declared degree, len(coefficients)-1;
// Evaluator.Poly consumes ceil(log2(Degree+1)) levels.
func (p *Polynomial) Degree() int {
	if p == nil {
		return -1
	}
	return len(p.coeffs) - 1
}

// Encoder encodes weight vectors of a weights blob as plaintexts. It keeps
// the first error: after one, its methods return nil and Err reports it.
// An Encoder is not safe for concurrent use.
type Encoder struct {
	p   *Params
	w   *Weights
	enc *hefloat.Encoder
	err error
}

// NewEncoder makes an encoder for the weights w under parameters p.
func NewEncoder(p *Params, w *Weights) *Encoder {
	e := &Encoder{p: p, w: w}
	switch {
	case !p.ok():
		e.err = errors.New("encoder: nil parameters (or not made by NewParams)")
	case w == nil:
		e.err = errors.New("encoder: nil weights")
	default:
		func() {
			defer recoverTo(&e.err, "encoder")
			e.enc = hefloat.NewEncoder(p.hp)
		}()
	}
	return e
}

// Err returns the first error the encoder met, or nil.
func (e *Encoder) Err() error {
	if e == nil {
		return errors.New("encoder: nil encoder")
	}
	return e.err
}

// ready reports whether the encoder may run, recording an error for an
// encoder that was not made by NewEncoder.
func (e *Encoder) ready() bool {
	if e == nil || e.err != nil {
		return false
	}
	if !e.p.ok() || e.w == nil || e.enc == nil {
		e.err = errors.New("encoder not made by NewEncoder")
		return false
	}
	return true
}

// Plaintext encodes the named vector, which must have exactly period
// values, replicated with that period over all slots, at the given level
// and exact scale.
func (e *Encoder) Plaintext(name string, level int, scale Scale, period int) *Plaintext {
	if !e.ready() {
		return nil
	}
	pt, err := e.plaintext(name, level, scale, period)
	if err != nil {
		e.err = fmt.Errorf("encode %q at level %d, scale %v: %w", name, level, scale, err)
		return nil
	}
	return pt
}

// Multiplier encodes the named vector as Plaintext does, for use only as a
// factor of MulPlain and DotPlain: its value is kept in Montgomery form,
// so that products need not convert it on every evaluation.
func (e *Encoder) Multiplier(name string, level int, scale Scale, period int) *Plaintext {
	pt := e.Plaintext(name, level, scale, period)
	if pt == nil {
		return nil
	}
	func() {
		defer recoverTo(&e.err, "encoder")
		e.p.hp.RingQ().AtLevel(level).MForm(pt.pt.Value, pt.pt.Value)
		pt.mform = true
	}()
	if e.err != nil {
		return nil
	}
	return pt
}

func (e *Encoder) plaintext(name string, level int, scale Scale, period int) (pt *Plaintext, err error) {
	defer recoverTo(&err, "")
	v, err := e.w.Vector(name)
	if err != nil {
		return nil, err
	}
	if len(v) != period {
		return nil, fmt.Errorf("%d values, want the period %d", len(v), period)
	}
	if level < 0 || level > e.p.MaxLevel() {
		return nil, fmt.Errorf("level %d, want 0..%d", level, e.p.MaxLevel())
	}
	packed, err := Layout{Size: period, Chunk: period, Copies: 1, Period: period}.pack(e.p.Slots(), v)
	if err != nil {
		return nil, err
	}
	slots := packed[0]
	s, err := e.p.rlweScale(scale)
	if err != nil {
		return nil, err
	}
	if err := e.p.checkFits(slots, log2Scale(s), level); err != nil {
		return nil, err
	}
	r := hefloat.NewPlaintext(e.p.hp, level)
	r.Scale = s
	if err := e.enc.Encode(slots, r); err != nil {
		return nil, err
	}
	return &Plaintext{pt: r, fp: e.p.fp, scale: scale}, nil
}

// checkFits refuses an encoding whose largest value times the scale would
// not fit below half the modulus of the level (it would wrap around).
func (p *Params) checkFits(values []float64, logScale float64, level int) error {
	var m float64
	for _, v := range values {
		m = max(m, math.Abs(v))
	}
	if m == 0 {
		return nil
	}
	logQ := 0.0
	for _, q := range p.spec.Q[:level+1] {
		logQ += math.Log2(float64(q))
	}
	// Coefficients after the inverse embedding stay within a small factor
	// of the largest slot value; keep one bit for that and one for the sign.
	if need := math.Log2(m) + logScale + 2; need >= logQ {
		return fmt.Errorf("largest value %g at scale 2^%.1f needs %.1f bits, level %d has %.1f", m, logScale, need, level, logQ)
	}
	return nil
}

// Polynomial reads the named coefficient vector, c0 first, as a polynomial
// in the given basis.
func (e *Encoder) Polynomial(name string, basis Basis) *Polynomial {
	if !e.ready() {
		return nil
	}
	v, err := e.w.Vector(name)
	if err == nil {
		var p *Polynomial
		if p, err = NewPolynomial(name, basis, v); err == nil {
			return p
		}
	}
	e.err = fmt.Errorf("encode polynomial %q: %w", name, err)
	return nil
}
