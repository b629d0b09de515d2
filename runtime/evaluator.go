package runtime

import (
	"errors"
	"fmt"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
)

// Evaluator runs ciphertext ops; its methods mirror the IR ops. It keeps
// the first error: once an op fails, later ops do nothing and return nil,
// and Err reports the first failure with the op's number and name. So
// generated straight-line code runs every op and checks Err once.
//
// Every op checks its operands before lattigo sees them (parameters,
// levels, degrees, exact scales, keys) and returns a new ciphertext; inputs
// are never modified. An Evaluator is not safe for concurrent use: give each
// goroutine its own ShallowCopy.
type Evaluator struct {
	p    *Params
	keys *EvaluationKeys
	ev   *hefloat.Evaluator
	poly *hefloat.PolynomialEvaluator
	err  error
	ops  int
}

// NewEvaluator makes an evaluator with the evaluation keys k (nil for none:
// then only ops that need no key work).
func NewEvaluator(p *Params, k *EvaluationKeys) *Evaluator {
	e := &Evaluator{p: p, keys: k}
	if !p.ok() {
		e.err = errors.New("evaluator: nil parameters (or not made by NewParams)")
		return e
	}
	if k != nil {
		if err := k.check(p, KeyRequest{}); err != nil {
			e.err = fmt.Errorf("evaluator: %w", err)
			return e
		}
	}
	func() {
		defer recoverTo(&e.err, "evaluator")
		var set rlwe.EvaluationKeySet
		if k != nil {
			set = k.keySet()
		}
		e.ev = hefloat.NewEvaluator(p.hp, set)
		e.poly = hefloat.NewPolynomialEvaluator(p.hp, e.ev)
	}()
	return e
}

// ShallowCopy returns an evaluator sharing the keys but with its own
// buffers and its own error state, for use in another goroutine.
func (e *Evaluator) ShallowCopy() *Evaluator {
	if e == nil {
		return nil
	}
	c := &Evaluator{p: e.p, keys: e.keys}
	if e.ev == nil {
		c.err = e.err
		return c
	}
	func() {
		defer recoverTo(&c.err, "evaluator")
		c.ev = e.ev.ShallowCopy()
		c.poly = hefloat.NewPolynomialEvaluator(e.p.hp, c.ev)
	}()
	return c
}

// Err returns the first error the evaluator met, or nil.
func (e *Evaluator) Err() error {
	if e == nil {
		return errors.New("evaluator: nil evaluator")
	}
	return e.err
}

// do runs one op under the sticky error and the panic guard.
func (e *Evaluator) do(name func() string, op func() (*rlwe.Ciphertext, error)) *Ciphertext {
	if e == nil || e.err != nil {
		return nil
	}
	e.ops++
	if !e.p.ok() || e.ev == nil {
		e.err = fmt.Errorf("op %d (%s): evaluator not made by NewEvaluator", e.ops, name())
		return nil
	}
	var out *rlwe.Ciphertext
	err := func() (err error) {
		defer recoverTo(&err, "")
		out, err = op()
		return err
	}()
	if err == nil && out == nil {
		err = errors.New("no result")
	}
	if err != nil {
		e.err = fmt.Errorf("op %d (%s): %w", e.ops, name(), err)
		return nil
	}
	return e.p.wrap(out)
}

// fail records an error found after do returned, under the same op number.
func (e *Evaluator) fail(name string, err error) {
	e.err = fmt.Errorf("op %d (%s): %w", e.ops, name, err)
}

func (e *Evaluator) check(cts ...*Ciphertext) error {
	for _, ct := range cts {
		if err := e.p.checkCiphertext(ct); err != nil {
			return err
		}
	}
	return nil
}

func sameLevel(a, b int, what string) error {
	if a != b {
		return fmt.Errorf("levels differ: ciphertext at %d, %s at %d", a, what, b)
	}
	return nil
}

func degreeOne(ct *Ciphertext, op string) error {
	if d := ct.Degree(); d != 1 {
		return fmt.Errorf("%s needs a degree-1 ciphertext, got degree %d (relinearize first)", op, d)
	}
	return nil
}

// rotationKey checks that a key for the normalised step k is loaded.
func (e *Evaluator) rotationKey(k int) error {
	if e.keys == nil {
		return fmt.Errorf("no evaluation keys loaded, and rotation %d needs one", k)
	}
	if _, ok := e.keys.galois[k]; !ok {
		return fmt.Errorf("no rotation key for step %d (the keys hold %v)", k, e.keys.steps)
	}
	return nil
}

// Rotate rotates the slot vector left by step: slot i of the result holds
// slot i+step (mod Slots) of ct.
func (e *Evaluator) Rotate(ct *Ciphertext, step int) *Ciphertext {
	return e.do(func() string { return fmt.Sprintf("rotate %d", step) }, func() (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if err := degreeOne(ct, "rotation"); err != nil {
			return nil, err
		}
		k := e.p.normStep(step)
		if k == 0 {
			return ct.ct.CopyNew(), nil
		}
		if err := e.rotationKey(k); err != nil {
			return nil, err
		}
		return e.ev.RotateNew(ct.ct, k)
	})
}

// RotateHoisted rotates ct left by each of steps, sharing one key-switch
// decomposition of ct among them; result i is the rotation by steps[i].
func (e *Evaluator) RotateHoisted(ct *Ciphertext, steps ...int) []*Ciphertext {
	if e == nil || e.err != nil {
		return nil
	}
	name := func() string { return fmt.Sprintf("rotate-hoisted %v", steps) }
	var rots map[int]*rlwe.Ciphertext
	// do returns one ciphertext: here the input, as a token of success; the
	// rotations come out through rots.
	if e.do(name, func() (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if err := degreeOne(ct, "rotation"); err != nil {
			return nil, err
		}
		ks := normalizeSteps(e.p.Slots(), steps)
		for _, k := range ks {
			if err := e.rotationKey(k); err != nil {
				return nil, err
			}
		}
		rots = map[int]*rlwe.Ciphertext{}
		if len(ks) > 0 {
			var err error
			if rots, err = e.ev.RotateHoistedNew(ct.ct, ks); err != nil {
				return nil, err
			}
		}
		return ct.ct, nil
	}) == nil {
		return nil
	}
	out := make([]*Ciphertext, len(steps))
	for i, s := range steps {
		k := e.p.normStep(s)
		if k == 0 {
			out[i] = e.p.wrap(ct.ct.CopyNew())
			continue
		}
		r, ok := rots[k]
		if !ok || r == nil {
			e.fail(name(), fmt.Errorf("lattigo returned no rotation for step %d", s))
			return nil
		}
		out[i] = e.p.wrap(r)
	}
	return out
}

// MulPlain multiplies ct by pt slot-wise. It does not rescale; the result's
// scale is the product of the two scales. Levels must match.
func (e *Evaluator) MulPlain(ct *Ciphertext, pt *Plaintext) *Ciphertext {
	return e.do(func() string { return "mul-plain" }, func() (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if err := e.p.checkPlaintext(pt); err != nil {
			return nil, err
		}
		if err := degreeOne(ct, "a plaintext product"); err != nil {
			return nil, err
		}
		if err := sameLevel(ct.Level(), pt.Level(), "plaintext"); err != nil {
			return nil, err
		}
		return e.ev.MulNew(ct.ct, pt.pt)
	})
}

// AddPlain adds pt to ct slot-wise. Levels and scales must match exactly.
func (e *Evaluator) AddPlain(ct *Ciphertext, pt *Plaintext) *Ciphertext {
	return e.do(func() string { return "add-plain" }, func() (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if err := e.p.checkPlaintext(pt); err != nil {
			return nil, err
		}
		if err := sameLevel(ct.Level(), pt.Level(), "plaintext"); err != nil {
			return nil, err
		}
		if !sameScale(ct.ct.Scale, pt.pt.Scale) {
			return nil, fmt.Errorf("scales differ: ciphertext %s, plaintext %s (%v)", fmtScale(ct.ct.Scale), fmtScale(pt.pt.Scale), pt.scale)
		}
		return e.ev.AddNew(ct.ct, pt.pt)
	})
}

// Add adds two ciphertexts slot-wise. Levels and scales must match
// exactly; lattigo would otherwise rescale one operand silently.
func (e *Evaluator) Add(a, b *Ciphertext) *Ciphertext {
	return e.do(func() string { return "add" }, func() (*rlwe.Ciphertext, error) {
		if err := e.check(a, b); err != nil {
			return nil, err
		}
		if err := sameLevel(a.Level(), b.Level(), "other ciphertext"); err != nil {
			return nil, err
		}
		if !sameScale(a.ct.Scale, b.ct.Scale) {
			return nil, fmt.Errorf("scales differ: %s and %s", fmtScale(a.ct.Scale), fmtScale(b.ct.Scale))
		}
		return e.ev.AddNew(a.ct, b.ct)
	})
}

// Mul multiplies two degree-1 ciphertexts slot-wise. The result has degree
// 2 (no relinearization) and the product of the scales (no rescale).
// Levels must match.
func (e *Evaluator) Mul(a, b *Ciphertext) *Ciphertext {
	return e.do(func() string { return "mul" }, func() (*rlwe.Ciphertext, error) {
		if err := e.check(a, b); err != nil {
			return nil, err
		}
		if err := degreeOne(a, "a ciphertext product"); err != nil {
			return nil, err
		}
		if err := degreeOne(b, "a ciphertext product"); err != nil {
			return nil, err
		}
		if err := sameLevel(a.Level(), b.Level(), "other ciphertext"); err != nil {
			return nil, err
		}
		out := hefloat.NewCiphertext(e.p.hp, 2, a.Level())
		if err := e.ev.Mul(a.ct, b.ct, out); err != nil {
			return nil, err
		}
		return out, nil
	})
}

// Relinearize brings a degree-2 ciphertext back to degree 1 with the
// relinearization key.
func (e *Evaluator) Relinearize(ct *Ciphertext) *Ciphertext {
	return e.do(func() string { return "relinearize" }, func() (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if ct.Degree() != 2 {
			return nil, fmt.Errorf("relinearize needs a degree-2 ciphertext, got degree %d", ct.Degree())
		}
		if !e.keys.HasRelinearization() {
			return nil, errors.New("no relinearization key loaded")
		}
		return e.ev.RelinearizeNew(ct.ct)
	})
}

// Rescale divides ct by q_level, the prime of its level, exactly: the level
// drops by one and the scale is divided by that prime.
func (e *Evaluator) Rescale(ct *Ciphertext) *Ciphertext {
	return e.do(func() string { return "rescale" }, func() (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if ct.Level() < 1 {
			return nil, errors.New("rescale needs level > 0, ciphertext is at level 0")
		}
		out := hefloat.NewCiphertext(e.p.hp, ct.Degree(), ct.Level()-1)
		if err := e.ev.Rescale(ct.ct, out); err != nil {
			return nil, err
		}
		return out, nil
	})
}

// DropLevel lowers ct by n levels without dividing it (the scale stays).
func (e *Evaluator) DropLevel(ct *Ciphertext, n int) *Ciphertext {
	return e.do(func() string { return fmt.Sprintf("drop-level %d", n) }, func() (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if n < 0 || n > ct.Level() {
			return nil, fmt.Errorf("cannot drop %d levels from level %d", n, ct.Level())
		}
		return e.ev.DropLevelNew(ct.ct, n), nil
	})
}

// Expect records an error if ct is not at the given level and exact scale.
// Generated code calls it on its inputs, so a ciphertext made for another
// plan fails at once with a clear message.
func (e *Evaluator) Expect(ct *Ciphertext, level int, scale Scale) {
	e.do(func() string { return fmt.Sprintf("expect level %d, scale %v", level, scale) }, func() (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if ct.Level() != level {
			return nil, fmt.Errorf("ciphertext at level %d", ct.Level())
		}
		want, err := e.p.rlweScale(scale)
		if err != nil {
			return nil, err
		}
		if !sameScale(ct.ct.Scale, want) {
			return nil, fmt.Errorf("ciphertext at scale %s, want %s", fmtScale(ct.ct.Scale), fmtScale(want))
		}
		return ct.ct, nil
	})
}
