package runtime

import (
	"errors"
	"fmt"
	"sync/atomic"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
	"github.com/tuneinsight/lattigo/v5/ring/ringqp"
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
//
// With more than one thread (NewParallelEvaluator) the ops run concurrently
// as their arguments become ready, with results bit-identical to a
// one-thread run; Err waits for them (see pool.go). Then an op issued after
// a failure may still have run before the failure was known: its result is
// to be discarded with the rest, as generated code does.
type Evaluator struct {
	p       *Params
	keys    *EvaluationKeys
	ev      *hefloat.Evaluator
	poly    *hefloat.PolynomialEvaluator
	err     error
	ops     int
	threads int
	pool    *pool // nil with one thread: each op runs when it is called
	lane    *lane // the one-thread lane, made on first use
}

// NewEvaluator makes a one-thread evaluator with the evaluation keys k (nil
// for none: then only ops that need no key work). Each op runs when it is
// called.
func NewEvaluator(p *Params, k *EvaluationKeys) *Evaluator {
	return NewParallelEvaluator(p, k, 1)
}

// MaxThreads bounds the threads of an Evaluator: each thread past the first
// holds its own copy of lattigo's scratch buffers.
const MaxThreads = 256

// NewParallelEvaluator makes an evaluator that runs independent ops on up
// to threads goroutines (1..MaxThreads), each with its own lattigo
// evaluator. With more than one thread every op returns at once and its
// result is computed when its arguments are; anything that reads a result
// (Err, Level, Decrypt, writing it) waits for it. Results, and the first
// error, are those of a one-thread run.
func NewParallelEvaluator(p *Params, k *EvaluationKeys, threads int) *Evaluator {
	e := &Evaluator{p: p, keys: k, threads: threads}
	if threads < 1 || threads > MaxThreads {
		e.err = fmt.Errorf("evaluator: %d threads, want 1..%d", threads, MaxThreads)
		return e
	}
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
	if e.err == nil && threads > 1 {
		e.pool = newPool(p, &lane{ev: e.ev, poly: e.poly}, threads)
	}
	return e
}

// ShallowCopy returns an evaluator sharing the keys but with its own
// buffers, its own error state and as many threads, for use in another
// goroutine.
func (e *Evaluator) ShallowCopy() *Evaluator {
	if e == nil {
		return nil
	}
	c := &Evaluator{p: e.p, keys: e.keys, threads: e.threads}
	if e.ev == nil {
		c.err = e.err
		return c
	}
	func() {
		defer recoverTo(&c.err, "evaluator")
		c.ev = e.ev.ShallowCopy()
		c.poly = hefloat.NewPolynomialEvaluator(e.p.hp, c.ev)
	}()
	if c.err == nil && c.threads > 1 {
		c.pool = newPool(c.p, &lane{ev: c.ev, poly: c.poly}, c.threads)
	}
	return c
}

// Threads returns the number of goroutines the evaluator computes on.
func (e *Evaluator) Threads() int {
	if e == nil || e.threads < 1 {
		return 1
	}
	return e.threads
}

// Err waits for every op issued so far and returns the first error the
// evaluator met, in program order, or nil.
func (e *Evaluator) Err() error {
	if e == nil {
		return errors.New("evaluator: nil evaluator")
	}
	if e.pool != nil {
		if err := e.pool.wait(); err != nil && e.err == nil {
			e.err = err
		}
	}
	return e.err
}

// start counts one op and reports whether it should run: no earlier op
// failed and the evaluator is usable.
func (e *Evaluator) start(name func() string) bool {
	if e == nil || e.err != nil {
		return false
	}
	e.ops++
	if !e.p.ok() || e.ev == nil {
		e.err = fmt.Errorf("op %d (%s): evaluator not made by NewEvaluator", e.ops, name())
		return false
	}
	// In parallel, once a failure is known every later op would be
	// skipped: return nil at once, as the one-thread run does.
	return e.pool == nil || !e.pool.failed()
}

// runOp runs op with lane l under the panic guard.
func runOp(op func(l *lane) (*rlwe.Ciphertext, error), l *lane) (out *rlwe.Ciphertext, err error) {
	defer recoverTo(&err, "")
	out, err = op(l)
	if err == nil && out == nil {
		err = errors.New("no result")
	}
	return out, err
}

// do runs one op under the sticky error and the panic guard: at once with
// one thread, as a task of the pool otherwise. args are the ciphertexts op
// reads; the task runs once they are done.
func (e *Evaluator) do(name func() string, args []*Ciphertext, op func(l *lane) (*rlwe.Ciphertext, error)) *Ciphertext {
	if !e.start(name) {
		return nil
	}
	seq := e.ops
	if e.pool == nil {
		if e.lane == nil {
			e.lane = &lane{ev: e.ev, poly: e.poly}
		}
		out, err := runOp(op, e.lane)
		if err != nil {
			e.err = fmt.Errorf("op %d (%s): %w", seq, name(), err)
			return nil
		}
		return e.p.wrap(out)
	}
	q := e.pool
	res := q.newFuture()
	q.submit(&task{seq: seq, outs: []*Ciphertext{res}, run: func(l *lane) []*task {
		out, err := runOp(op, l)
		if err != nil {
			q.fail(seq, 0, fmt.Errorf("op %d (%s): %w", seq, name(), err))
			return nil
		}
		res.ct = out
		return nil
	}}, args...)
	return res
}

// inline runs a check that computes nothing, at once, after waiting for
// args; a failure is recorded under its op number like any op's.
func (e *Evaluator) inline(name func() string, args []*Ciphertext, check func() error) {
	if !e.start(name) {
		return
	}
	for _, a := range args {
		a.wait()
	}
	err := func() (err error) {
		defer recoverTo(&err, "")
		return check()
	}()
	if err == nil {
		return
	}
	err = fmt.Errorf("op %d (%s): %w", e.ops, name(), err)
	if e.pool == nil {
		e.err = err
	} else {
		e.pool.fail(e.ops, 0, err)
	}
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

// rotationKey checks that a key for the normalised step k is loaded and
// made for the ciphertext's level or above.
func (e *Evaluator) rotationKey(k, level int) error {
	if e.keys == nil {
		return fmt.Errorf("no evaluation keys loaded, and rotation %d needs one", k)
	}
	gk, ok := e.keys.galois[k]
	if !ok {
		return fmt.Errorf("no rotation key for step %d (the keys hold %v)", k, e.keys.steps)
	}
	// lattigo would use a lower key's digits silently and return garbage.
	if gk.LevelQ() < level {
		return fmt.Errorf("the rotation key for step %d is made for level %d, the ciphertext is at level %d", k, gk.LevelQ(), level)
	}
	return nil
}

// Rotate rotates the slot vector left by step: slot i of the result holds
// slot i+step (mod Slots) of ct. With several threads its key switch is
// split into tasks that two lanes share (keyswitch.go), bit-identically.
func (e *Evaluator) Rotate(ct *Ciphertext, step int) *Ciphertext {
	name := func() string { return fmt.Sprintf("rotate %d", step) }
	if e != nil && e.splits() {
		if k := e.p.normStep(step); k != 0 {
			if !e.start(name) {
				return nil
			}
			return e.rotateSplit(ct, k, name)
		}
	}
	return e.do(name, []*Ciphertext{ct}, func(l *lane) (*rlwe.Ciphertext, error) {
		k := e.p.normStep(step)
		if err := e.rotateCheck(ct, k); err != nil {
			return nil, err
		}
		if k == 0 {
			return ct.ct.CopyNew(), nil
		}
		return l.ev.RotateNew(ct.ct, k)
	})
}

// rotateCheck checks a rotation of ct by the normalised step k: a degree-1
// ciphertext of these parameters and, for k ≠ 0, its key.
func (e *Evaluator) rotateCheck(ct *Ciphertext, k int) error {
	if err := e.check(ct); err != nil {
		return err
	}
	if err := degreeOne(ct, "rotation"); err != nil {
		return err
	}
	if k == 0 {
		return nil
	}
	return e.rotationKey(k, ct.Level())
}

// RotateHoisted rotates ct left by each of steps, sharing one key-switch
// decomposition of ct among them; result i is the rotation by steps[i].
// The result always has len(steps) entries (nil after a failure), so that
// generated code may index it before it checks Err. With several threads
// the rotations by distinct steps run concurrently on one decomposition.
func (e *Evaluator) RotateHoisted(ct *Ciphertext, steps ...int) []*Ciphertext {
	out := make([]*Ciphertext, len(steps))
	name := func() string { return fmt.Sprintf("rotate-hoisted %v", steps) }
	if !e.start(name) {
		return out
	}
	if e.pool != nil {
		e.rotateHoistedTasks(ct, steps, out, name)
		return out
	}
	var rots map[int]*rlwe.Ciphertext
	err := func() (err error) {
		defer recoverTo(&err, "")
		ks, err := e.hoistedSteps(ct, steps)
		if err != nil || len(ks) == 0 {
			return err
		}
		rots, err = e.ev.RotateHoistedNew(ct.ct, ks)
		return err
	}()
	for i, s := range steps {
		if err != nil {
			break
		}
		k := e.p.normStep(s)
		if k == 0 {
			out[i] = e.p.wrap(ct.ct.CopyNew())
			continue
		}
		r, ok := rots[k]
		if !ok || r == nil {
			err = fmt.Errorf("lattigo returned no rotation for step %d", s)
			break
		}
		out[i] = e.p.wrap(r)
	}
	if err != nil {
		e.err = fmt.Errorf("op %d (%s): %w", e.ops, name(), err)
		clear(out)
	}
	return out
}

// hoistedSteps checks a hoisted rotation of ct and returns its distinct
// nonzero normalised steps.
func (e *Evaluator) hoistedSteps(ct *Ciphertext, steps []int) ([]int, error) {
	if err := e.check(ct); err != nil {
		return nil, err
	}
	if err := degreeOne(ct, "rotation"); err != nil {
		return nil, err
	}
	ks := normalizeSteps(e.p.Slots(), steps)
	for _, k := range ks {
		if err := e.rotationKey(k, ct.Level()); err != nil {
			return nil, err
		}
	}
	return ks, nil
}

// rotateHoistedTasks submits a hoisted rotation to the pool: one task
// checks ct and decomposes it (in two tasks if it has several digits, see
// decomposeTasks), then splits into one task per distinct step, all reading
// that decomposition. Each step is computed as lattigo's
// RotateHoisted computes it (DecomposeNTT, then AutomorphismHoisted with
// the same arguments), so the results are bit-identical.
func (e *Evaluator) rotateHoistedTasks(ct *Ciphertext, steps []int, out []*Ciphertext, name func() string) {
	q, p, seq := e.pool, e.p, e.ops
	for i := range out {
		out[i] = q.newFuture()
	}
	// The parent finishes every result if it fails; else only the zero
	// steps, and each child the results of its step.
	parent := &task{seq: seq, outs: out}
	parent.run = func(l *lane) []*task {
		var children []*task
		var zero []*Ciphertext
		err := func() (err error) {
			defer recoverTo(&err, "")
			ks, err := e.hoistedSteps(ct, steps)
			if err != nil {
				return err
			}
			in := ct.ct
			for i, s := range steps {
				if p.normStep(s) == 0 {
					out[i].ct = in.CopyNew()
					zero = append(zero, out[i])
				}
			}
			if len(ks) == 0 {
				return nil
			}
			hp := p.hp
			level, levelP := in.Level(), hp.MaxLevelP()
			// The decomposition is made at the ciphertext's level: the
			// limbs above it, which lattigo's full-size buffer also
			// carries, are never read.
			decomp := make([]ringqp.Poly, hp.BaseRNSDecompositionVectorSize(level, levelP))
			ring := hp.RingQP().AtLevel(level, levelP)
			for i := range decomp {
				decomp[i] = ring.NewPoly()
			}
			var stepTasks []*task
			for j, k := range ks {
				var mine []*Ciphertext
				for i, s := range steps {
					if p.normStep(s) == k {
						mine = append(mine, out[i])
					}
				}
				galEl, sub := hp.GaloisElement(k), j+3
				stepTasks = append(stepTasks, &task{seq: seq, sub: sub, outs: mine, run: func(l *lane) []*task {
					err := func() (err error) {
						defer recoverTo(&err, "")
						r := hefloat.NewCiphertext(hp, 1, level)
						if err := l.ev.AutomorphismHoisted(level, in, decomp, galEl, r); err != nil {
							return fmt.Errorf("cannot RotateHoisted: %w", err)
						}
						for _, c := range mine {
							c.ct = r
						}
						return nil
					}()
					if err != nil {
						q.fail(seq, sub, fmt.Errorf("op %d (%s): %w", seq, name(), err))
					}
					return nil
				}})
			}
			children = e.decomposeTasks(l, seq, in, level, levelP, decomp, stepTasks, name)
			return nil
		}()
		if err != nil {
			for _, c := range out {
				c.ct = nil
			}
			q.fail(seq, 0, fmt.Errorf("op %d (%s): %w", seq, name(), err))
			return nil
		}
		parent.outs = zero
		return children
	}
	q.submit(parent, ct)
}

// decomposeTasks decomposes in's second polynomial into decomp and then
// hands over to the steps. A decomposition of one digit is made at once by
// lane l, as lattigo's DecomposeNTT makes it, and the steps follow; one of
// more digits is split in two halves of digits, two tasks that share the
// polynomial taken out of the NTT domain here, and whichever finishes last
// returns the steps. Each digit is computed by the same call either way
// (DecomposeSingleNTT), so the decomposition is the same bit for bit.
func (e *Evaluator) decomposeTasks(l *lane, seq int, in *rlwe.Ciphertext, level, levelP int, decomp []ringqp.Poly, steps []*task, name func() string) []*task {
	hp := e.p.hp
	d := len(decomp)
	if d < 2 || !in.IsNTT {
		l.ev.DecomposeNTT(level, levelP, hp.PCount(), in.Value[1], in.IsNTT, decomp)
		return steps
	}
	q := e.pool
	ringQ := hp.RingQ().AtLevel(level)
	inv := ringQ.NewPoly()
	ringQ.INTT(in.Value[1], inv)
	var left atomic.Int32
	left.Store(2)
	halves := make([]*task, 2)
	for h := range halves {
		from, to := digitHalf(d, h)
		halves[h] = &task{seq: seq, sub: 1 + h, run: func(l *lane) []*task {
			err := func() (err error) {
				defer recoverTo(&err, "")
				for i := from; i < to; i++ {
					l.ev.DecomposeSingleNTT(level, levelP, hp.PCount(), i, in.Value[1], inv, decomp[i].Q, decomp[i].P)
				}
				return nil
			}()
			if err != nil {
				q.fail(seq, 1+h, fmt.Errorf("op %d (%s): %w", seq, name(), err))
			}
			if left.Add(-1) == 0 {
				return steps // even after a failure: they resolve their results
			}
			return nil
		}}
	}
	return halves
}

// MulPlain multiplies ct by pt slot-wise. It does not rescale; the result's
// scale is the product of the two scales. Levels must match.
func (e *Evaluator) MulPlain(ct *Ciphertext, pt *Plaintext) *Ciphertext {
	return e.do(func() string { return "mul-plain" }, []*Ciphertext{ct}, func(l *lane) (*rlwe.Ciphertext, error) {
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
		if !pt.mform {
			return l.ev.MulNew(ct.ct, pt.pt)
		}
		out := hefloat.NewCiphertext(e.p.hp, 1, ct.Level())
		ringQ := e.p.hp.RingQ().AtLevel(ct.Level())
		for j := range out.Value {
			ringQ.MulCoeffsMontgomery(ct.ct.Value[j], pt.pt.Value, out.Value[j])
		}
		productMetaData(out, ct.ct, pt.pt)
		return out, nil
	})
}

// productMetaData gives out, a product of ct and pt, ct's metadata with the
// product of the scales, as lattigo's own product does.
func productMetaData(out, ct *rlwe.Ciphertext, pt *rlwe.Plaintext) {
	*out.MetaData = *ct.MetaData
	out.Scale = ct.Scale.Mul(pt.Scale)
}

// AddPlain adds pt to ct slot-wise. Levels and scales must match exactly.
func (e *Evaluator) AddPlain(ct *Ciphertext, pt *Plaintext) *Ciphertext {
	return e.do(func() string { return "add-plain" }, []*Ciphertext{ct}, func(l *lane) (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if err := e.p.checkPlaintext(pt); err != nil {
			return nil, err
		}
		if err := sameLevel(ct.Level(), pt.Level(), "plaintext"); err != nil {
			return nil, err
		}
		if pt.mform {
			return nil, errors.New("the plaintext is encoded for products (Encoder.Multiplier), not for addition")
		}
		if !sameScale(ct.ct.Scale, pt.pt.Scale) {
			return nil, fmt.Errorf("scales differ: ciphertext %s, plaintext %s (%v)", fmtScale(ct.ct.Scale), fmtScale(pt.pt.Scale), pt.scale)
		}
		return l.ev.AddNew(ct.ct, pt.pt)
	})
}

// Add adds two ciphertexts slot-wise. Levels and scales must match
// exactly; lattigo would otherwise rescale one operand silently.
func (e *Evaluator) Add(a, b *Ciphertext) *Ciphertext {
	return e.do(func() string { return "add" }, []*Ciphertext{a, b}, func(l *lane) (*rlwe.Ciphertext, error) {
		if err := e.check(a, b); err != nil {
			return nil, err
		}
		if err := sameLevel(a.Level(), b.Level(), "other ciphertext"); err != nil {
			return nil, err
		}
		if !sameScale(a.ct.Scale, b.ct.Scale) {
			return nil, fmt.Errorf("scales differ: %s and %s", fmtScale(a.ct.Scale), fmtScale(b.ct.Scale))
		}
		return l.ev.AddNew(a.ct, b.ct)
	})
}

// Mul multiplies two degree-1 ciphertexts slot-wise. The result has degree
// 2 (no relinearization) and the product of the scales (no rescale).
// Levels must match.
func (e *Evaluator) Mul(a, b *Ciphertext) *Ciphertext {
	return e.do(func() string { return "mul" }, []*Ciphertext{a, b}, func(l *lane) (*rlwe.Ciphertext, error) {
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
		if err := l.ev.Mul(a.ct, b.ct, out); err != nil {
			return nil, err
		}
		return out, nil
	})
}

// Relinearize brings a degree-2 ciphertext back to degree 1 with the
// relinearization key. With several threads its key switch is split as
// Rotate's is.
func (e *Evaluator) Relinearize(ct *Ciphertext) *Ciphertext {
	name := func() string { return "relinearize" }
	if e != nil && e.splits() {
		if !e.start(name) {
			return nil
		}
		return e.relinearizeSplit(ct, name)
	}
	return e.do(name, []*Ciphertext{ct}, func(l *lane) (*rlwe.Ciphertext, error) {
		if err := e.relinearizeCheck(ct); err != nil {
			return nil, err
		}
		return l.ev.RelinearizeNew(ct.ct)
	})
}

// relinearizeCheck checks a relinearization of ct: a degree-2 ciphertext
// of these parameters, and the key.
func (e *Evaluator) relinearizeCheck(ct *Ciphertext) error {
	if err := e.check(ct); err != nil {
		return err
	}
	if ct.Degree() != 2 {
		return fmt.Errorf("relinearize needs a degree-2 ciphertext, got degree %d", ct.Degree())
	}
	if !e.keys.HasRelinearization() {
		return errors.New("no relinearization key loaded")
	}
	return nil
}

// Rescale divides ct by q_level, the prime of its level, exactly: the level
// drops by one and the scale is divided by that prime.
func (e *Evaluator) Rescale(ct *Ciphertext) *Ciphertext {
	name := func() string { return "rescale" }
	if e != nil && e.splits() {
		if !e.start(name) {
			return nil
		}
		return e.rescaleSplit(ct, name)
	}
	return e.do(name, []*Ciphertext{ct}, func(l *lane) (*rlwe.Ciphertext, error) {
		if err := e.rescaleCheck(ct); err != nil {
			return nil, err
		}
		out := hefloat.NewCiphertext(e.p.hp, ct.Degree(), ct.Level()-1)
		if err := l.ev.Rescale(ct.ct, out); err != nil {
			return nil, err
		}
		return out, nil
	})
}

// rescaleCheck checks a rescale of ct: a ciphertext of these parameters
// above level 0.
func (e *Evaluator) rescaleCheck(ct *Ciphertext) error {
	if err := e.check(ct); err != nil {
		return err
	}
	if ct.Level() < 1 {
		return errors.New("rescale needs level > 0, ciphertext is at level 0")
	}
	return nil
}

// rescaleSplit is Rescale as pool tasks, one per polynomial of ct: each
// divides its polynomial by the last prime as lattigo's Rescale does
// (DivRoundByLastModulusManyNTT), so the result is the same bit for bit;
// the last to finish hands it over.
func (e *Evaluator) rescaleSplit(ct *Ciphertext, name func() string) *Ciphertext {
	q, seq := e.pool, e.ops
	res := q.newFuture()
	parent := &task{seq: seq, outs: []*Ciphertext{res}}
	parent.run = func(*lane) []*task {
		var out *rlwe.Ciphertext
		err := func() (err error) {
			defer recoverTo(&err, "")
			if err := e.rescaleCheck(ct); err != nil {
				return err
			}
			in := ct.ct
			out = hefloat.NewCiphertext(e.p.hp, in.Degree(), in.Level()-1)
			*out.MetaData = *in.MetaData
			out.Scale = in.Scale.Div(rlwe.NewScale(e.p.hp.RingQ().SubRings[in.Level()].Modulus))
			return nil
		}()
		if err != nil {
			q.fail(seq, 0, fmt.Errorf("op %d (%s): %w", seq, name(), err))
			return nil
		}
		parent.outs = nil
		in := ct.ct
		children := make([]*task, len(in.Value))
		j := newJoin(len(children), res)
		for i := range children {
			children[i] = &task{seq: seq, sub: 1 + i}
			children[i].run = func(l *lane) []*task {
				err := func() (err error) {
					defer recoverTo(&err, "")
					ringQ := e.p.hp.RingQ().AtLevel(in.Level())
					ringQ.DivRoundByLastModulusManyNTT(1, in.Value[i], l.scratchQ(e.p.hp), out.Value[i])
					return nil
				}()
				if err != nil {
					q.fail(seq, 1+i, fmt.Errorf("op %d (%s): %w", seq, name(), err))
				}
				j.done(children[i], err, out)
				return nil
			}
		}
		return children
	}
	q.submit(parent, ct)
	return res
}

// DropLevel lowers ct by n levels without dividing it (the scale stays).
func (e *Evaluator) DropLevel(ct *Ciphertext, n int) *Ciphertext {
	return e.do(func() string { return fmt.Sprintf("drop-level %d", n) }, []*Ciphertext{ct}, func(l *lane) (*rlwe.Ciphertext, error) {
		if err := e.check(ct); err != nil {
			return nil, err
		}
		if n < 0 || n > ct.Level() {
			return nil, fmt.Errorf("cannot drop %d levels from level %d", n, ct.Level())
		}
		return l.ev.DropLevelNew(ct.ct, n), nil
	})
}

// Expect records an error if ct is not at the given level and exact scale.
// Generated code calls it on its inputs, so a ciphertext made for another
// plan fails at once with a clear message. It waits for ct.
func (e *Evaluator) Expect(ct *Ciphertext, level int, scale Scale) {
	e.inline(func() string { return fmt.Sprintf("expect level %d, scale %v", level, scale) }, []*Ciphertext{ct}, func() error {
		if err := e.check(ct); err != nil {
			return err
		}
		if ct.Level() != level {
			return fmt.Errorf("ciphertext at level %d", ct.Level())
		}
		want, err := e.p.rlweScale(scale)
		if err != nil {
			return err
		}
		if !sameScale(ct.ct.Scale, want) {
			return fmt.Errorf("ciphertext at scale %s, want %s", fmtScale(ct.ct.Scale), fmtScale(want))
		}
		return nil
	})
}
