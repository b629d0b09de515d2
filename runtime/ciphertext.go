package runtime

import (
	"crypto/sha256"
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
)

// Ciphertext is an encrypted slot vector. It remembers the fingerprint of
// the parameters it was made under, so that a ciphertext of another model
// is refused instead of computed on. Ciphertexts are never modified after
// creation: every op returns a new one.
//
// A ciphertext returned by an Evaluator with more than one thread may still
// be computing: every method and every function that reads it waits for it
// first (and finds nil if its op failed).
type Ciphertext struct {
	ct *rlwe.Ciphertext
	fp [sha256.Size]byte
	f  *future // set by a parallel Evaluator: the op that makes ct
}

// wait blocks until the op that makes ct is done; a nil or finished
// ciphertext returns at once.
func (ct *Ciphertext) wait() {
	if ct != nil && ct.f != nil {
		<-ct.f.done
	}
}

// Level returns the ciphertext's level (the number of rescales it can still
// take), or -1 for a nil ciphertext.
func (ct *Ciphertext) Level() int {
	ct.wait()
	if ct == nil || ct.ct == nil {
		return -1
	}
	return ct.ct.Level()
}

// Degree returns the ciphertext's degree: 1 normally, 2 after Mul and before
// Relinearize; -1 for a nil ciphertext.
func (ct *Ciphertext) Degree() int {
	ct.wait()
	if ct == nil || ct.ct == nil {
		return -1
	}
	return ct.ct.Degree()
}

// Scale returns log2 of the ciphertext's scale, for messages and reports
// (NaN for a nil ciphertext). Scales are compared exactly inside the
// evaluator, never through this value.
func (ct *Ciphertext) Scale() float64 {
	ct.wait()
	if ct == nil || ct.ct == nil || ct.ct.MetaData == nil {
		return math.NaN()
	}
	return log2Scale(ct.ct.Scale)
}

// Plaintext is an encoded (not encrypted) slot vector, at a given level and
// exact scale, ready to be multiplied with or added to a ciphertext.
type Plaintext struct {
	pt    *rlwe.Plaintext
	fp    [sha256.Size]byte
	scale Scale
	// mform: the value is kept in Montgomery form, ready for products
	// (Encoder.Multiplier); such a plaintext cannot be added.
	mform bool
}

// Level returns the plaintext's level, or -1 for a nil plaintext.
func (pt *Plaintext) Level() int {
	if pt == nil || pt.pt == nil {
		return -1
	}
	return pt.pt.Level()
}

// ExactScale returns the exact scale the plaintext was encoded at.
func (pt *Plaintext) ExactScale() Scale {
	if pt == nil {
		return Scale{}
	}
	return pt.scale
}

// wrap makes a Ciphertext of these parameters.
func (p *Params) wrap(ct *rlwe.Ciphertext) *Ciphertext {
	return &Ciphertext{ct: ct, fp: p.fp}
}

// checkCiphertext verifies that ct belongs to p and is well formed, so that
// lattigo never sees a ciphertext of another ring degree or level count.
func (p *Params) checkCiphertext(ct *Ciphertext) error {
	ct.wait()
	if ct == nil || ct.ct == nil {
		return errors.New("nil ciphertext")
	}
	if ct.fp != p.fp {
		return fmt.Errorf("ciphertext for another model (%s)", fingerprints(ct.fp[:], p.fp[:]))
	}
	c := ct.ct
	if c.MetaData == nil {
		return errors.New("ciphertext without metadata")
	}
	if c.Degree() < 1 || c.Degree() > 2 {
		return fmt.Errorf("ciphertext degree %d, want 1 or 2", c.Degree())
	}
	if c.Level() < 0 || c.Level() > p.MaxLevel() {
		return fmt.Errorf("ciphertext level %d, want 0..%d", c.Level(), p.MaxLevel())
	}
	for _, v := range c.Value {
		if v.N() != 1<<p.spec.LogN || v.Level() != c.Level() {
			return fmt.Errorf("ciphertext polynomial of degree %d at level %d, want %d at level %d", v.N(), v.Level(), 1<<p.spec.LogN, c.Level())
		}
	}
	if c.Scale.Value.Sign() <= 0 || c.Scale.Value.IsInf() {
		return errors.New("ciphertext scale is not a positive number")
	}
	return nil
}

// checkAt checks that ct is at the level and exact scale at, with the given
// degree; the error says what differs.
func (p *Params) checkAt(ct *Ciphertext, at LevelScale, degree int) error {
	if err := p.checkCiphertext(ct); err != nil {
		return err
	}
	want, err := p.rlweScale(at.Scale)
	if err != nil {
		return err
	}
	var diffs []string
	if ct.Level() != at.Level {
		diffs = append(diffs, fmt.Sprintf("level %d, want %d", ct.Level(), at.Level))
	}
	if !sameScale(ct.ct.Scale, want) {
		diffs = append(diffs, fmt.Sprintf("scale %s, want %s (%v)", fmtScale(ct.ct.Scale), fmtScale(want), at.Scale))
	}
	if ct.Degree() != degree {
		diffs = append(diffs, fmt.Sprintf("degree %d, want %d", ct.Degree(), degree))
	}
	if len(diffs) > 0 {
		return fmt.Errorf("ciphertext at %s", strings.Join(diffs, ", "))
	}
	return nil
}

// checkPlaintext verifies that pt belongs to p.
func (p *Params) checkPlaintext(pt *Plaintext) error {
	if pt == nil || pt.pt == nil {
		return errors.New("nil plaintext")
	}
	if pt.fp != p.fp {
		return fmt.Errorf("plaintext for another model (%s)", fingerprints(pt.fp[:], p.fp[:]))
	}
	if pt.pt.Level() < 0 || pt.pt.Level() > p.MaxLevel() || pt.pt.Value.N() != 1<<p.spec.LogN {
		return fmt.Errorf("malformed plaintext (level %d)", pt.pt.Level())
	}
	return nil
}
