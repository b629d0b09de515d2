package runtime

import (
	"fmt"
	"slices"
	"sync/atomic"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
	"github.com/tuneinsight/lattigo/v5/ring/ringqp"
)

// RotateSum returns Σ_i rot_{steps[i]}(cts[i]), the sum of rotations of
// several ciphertexts (a baby-step giant-step product's giant steps). Each
// rotation's key switch is left in the extended basis QP, the switched
// terms are added there, and the sum is brought down to Q once (one
// ModDown instead of one per rotation: less time, and one rounding instead
// of several). Terms with a zero step are added unrotated. The ciphertexts
// must share level and scale and have degree 1. With several threads the
// key switches run concurrently; the sum is the same bit for bit, since
// modular addition does not depend on the order.
func (e *Evaluator) RotateSum(cts []*Ciphertext, steps []int) *Ciphertext {
	name := func() string { return fmt.Sprintf("rotate-sum %v", steps) }
	if e.pool == nil {
		return e.do(name, cts, func(l *lane) (*rlwe.Ciphertext, error) {
			s, err := e.rotSumCheck(cts, steps)
			if err != nil {
				return nil, err
			}
			// One accumulator: each switched term is added to it at once.
			var acc, tmp *rlwe.Element[ringqp.Poly]
			for i, g := range s.galEls {
				if g == 0 {
					continue
				}
				dst := tmp
				if acc == nil {
					acc = s.newQP()
					dst = acc
				} else if tmp == nil {
					tmp = s.newQP()
					dst = tmp
				}
				if err := s.term(l, i, dst); err != nil {
					return nil, err
				}
				if dst != acc {
					s.add(acc, dst)
				}
			}
			return s.combine(l, []*rlwe.Element[ringqp.Poly]{acc})
		})
	}
	if !e.start(name) {
		return nil
	}
	return e.rotSumTasks(cts, steps, name)
}

// rotSum is a checked RotateSum.
type rotSum struct {
	p      *Params
	cts    []*Ciphertext
	ks     []int    // normalised steps, 0 for an unrotated term
	galEls []uint64 // their Galois elements (0 for an unrotated term)
}

// level is the level of the terms (checked equal).
func (s *rotSum) level() int { return s.cts[0].ct.Level() }

// rotSumCheck checks the operands of a RotateSum and the keys it needs,
// term by term (checkTerm), so that the parallel run, which checks each
// term in its own task, reports the same first error.
func (e *Evaluator) rotSumCheck(cts []*Ciphertext, steps []int) (*rotSum, error) {
	s, err := e.newRotSum(cts, steps)
	if err != nil {
		return nil, err
	}
	for i := range cts {
		if err := s.checkTerm(e, i); err != nil {
			return nil, err
		}
	}
	return s, nil
}

// newRotSum checks the shape of a RotateSum: one step per ciphertext.
func (e *Evaluator) newRotSum(cts []*Ciphertext, steps []int) (*rotSum, error) {
	if len(cts) == 0 || len(cts) != len(steps) {
		return nil, fmt.Errorf("rotate-sum of %d ciphertexts with %d steps", len(cts), len(steps))
	}
	s := &rotSum{p: e.p, cts: cts, ks: make([]int, len(cts)), galEls: make([]uint64, len(cts))}
	for i, st := range steps {
		if k := e.p.normStep(st); k != 0 {
			s.ks[i], s.galEls[i] = k, e.p.hp.GaloisElement(k)
		}
	}
	return s, nil
}

// checkTerm checks term i against term 0 (level and scale) and its key;
// it reads only those two ciphertexts.
func (s *rotSum) checkTerm(e *Evaluator, i int) error {
	ct, first := s.cts[i], s.cts[0]
	if err := e.check(first, ct); err != nil {
		return fmt.Errorf("term %d: %w", i, err)
	}
	if err := degreeOne(ct, "rotation"); err != nil {
		return fmt.Errorf("term %d: %w", i, err)
	}
	if err := sameLevel(first.Level(), ct.Level(), "another term"); err != nil {
		return fmt.Errorf("term %d: %w", i, err)
	}
	if !sameScale(first.ct.Scale, ct.ct.Scale) {
		return fmt.Errorf("term %d: scales differ: %s and %s", i, fmtScale(first.ct.Scale), fmtScale(ct.ct.Scale))
	}
	if !ct.ct.IsNTT {
		return fmt.Errorf("term %d: rotate-sum needs ciphertexts in the NTT domain", i)
	}
	if s.galEls[i] != 0 {
		if err := e.rotationKey(s.ks[i], ct.Level()); err != nil {
			return fmt.Errorf("term %d: %w", i, err)
		}
	}
	return nil
}

// newQP makes an element mod QP at the terms' level.
func (s *rotSum) newQP() *rlwe.Element[ringqp.Poly] {
	e := rlwe.NewElementExtended(s.p.hp, 1, s.level(), s.p.hp.MaxLevelP())
	e.IsNTT = true
	return e
}

// add adds b to acc, mod QP.
func (s *rotSum) add(acc, b *rlwe.Element[ringqp.Poly]) {
	ring := s.p.hp.RingQP().AtLevel(s.level(), s.p.hp.MaxLevelP())
	ring.Add(acc.Value[0], b.Value[0], acc.Value[0])
	ring.Add(acc.Value[1], b.Value[1], acc.Value[1])
}

// term key-switches term i (of nonzero step) into dst, in the extended
// basis: P·c0 + the key switch of c1, mod QP, then the automorphism. It is
// lattigo's Automorphism without the ModDown (GadgetProductLazy decomposes
// digit by digit, as Automorphism does).
func (s *rotSum) term(l *lane, i int, dst *rlwe.Element[ringqp.Poly]) error {
	hp := s.p.hp
	level := s.level()
	evk, err := l.ev.CheckAndGetGaloisKey(s.galEls[i])
	if err != nil {
		return err
	}
	levelP := evk.LevelP()
	ring := hp.RingQP().AtLevel(level, levelP)
	tmp := l.scratchQP(hp)
	in := s.cts[i].ct
	l.ev.GadgetProductLazy(level, in.Value[1], &evk.GadgetCiphertext, tmp)
	ringQ := ring.RingQ
	ringQ.MulScalarBigint(in.Value[0], ring.RingP.ModulusAtLevel[levelP], l.scratchQ(hp))
	ringQ.Add(tmp.Value[0].Q, l.scratchQ(hp), tmp.Value[0].Q)
	index := l.ev.AutomorphismIndex(s.galEls[i])
	ring.AutomorphismNTTWithIndex(tmp.Value[0], index, dst.Value[0])
	ring.AutomorphismNTTWithIndex(tmp.Value[1], index, dst.Value[1])
	return nil
}

// combine adds the switched terms in QP, brings the sum down to Q and adds
// the unrotated terms.
func (s *rotSum) combine(l *lane, terms []*rlwe.Element[ringqp.Poly]) (*rlwe.Ciphertext, error) {
	hp := s.p.hp
	levelP := hp.MaxLevelP()
	var acc *rlwe.Element[ringqp.Poly]
	for _, t := range terms {
		switch {
		case t == nil:
		case acc == nil:
			acc = t
		default:
			s.add(acc, t)
		}
	}
	out := hefloat.NewCiphertext(hp, 1, s.level())
	if acc != nil {
		l.ev.ModDown(s.level(), levelP, acc, out)
	}
	*out.MetaData = *s.cts[0].ct.MetaData
	ringQ := hp.RingQ().AtLevel(s.level())
	for i, g := range s.galEls {
		if g != 0 {
			continue
		}
		in := s.cts[i].ct
		ringQ.Add(out.Value[0], in.Value[0], out.Value[0])
		ringQ.Add(out.Value[1], in.Value[1], out.Value[1])
	}
	return out, nil
}

// rotSumTasks submits a RotateSum to the pool: one task per rotated term,
// which waits only for its ciphertext and the first one, checks the term
// and key-switches it; then one task, once every term is done, that checks
// the unrotated terms, adds the switched ones and brings the sum down.
// Failures carry the term's number as their part, so the first error is
// the one the sequential run reports.
func (e *Evaluator) rotSumTasks(cts []*Ciphertext, steps []int, name func() string) *Ciphertext {
	q, seq := e.pool, e.ops
	res := q.newFuture()
	s, err := e.newRotSum(cts, steps)
	if err != nil {
		q.submit(&task{seq: seq, outs: []*Ciphertext{res}, run: func(*lane) []*task {
			q.fail(seq, 0, fmt.Errorf("op %d (%s): %w", seq, name(), err))
			return nil
		}})
		return res
	}
	terms := make([]*rlwe.Element[ringqp.Poly], len(cts))
	var failed atomic.Bool
	fail := func(i int, err error) {
		failed.Store(true)
		q.fail(seq, i+1, fmt.Errorf("op %d (%s): %w", seq, name(), err))
	}
	deps := slices.Clone(cts)
	for i, g := range s.galEls {
		if g == 0 {
			continue
		}
		done := q.newFuture()
		deps = append(deps, done)
		q.submit(&task{seq: seq, sub: i + 1, outs: []*Ciphertext{done}, run: func(l *lane) []*task {
			err := func() (err error) {
				defer recoverTo(&err, "")
				if err := s.checkTerm(e, i); err != nil {
					return err
				}
				terms[i] = s.newQP()
				return s.term(l, i, terms[i])
			}()
			if err != nil {
				fail(i, err)
			}
			return nil
		}}, cts[0], cts[i])
	}
	q.submit(&task{seq: seq, sub: len(cts) + 1, outs: []*Ciphertext{res}, run: func(l *lane) []*task {
		// Check the unrotated terms even after a failure: the pool keeps
		// the failure of the lowest term.
		for i, g := range s.galEls {
			if g != 0 {
				continue
			}
			if err := s.checkTerm(e, i); err != nil {
				fail(i, err)
				break
			}
		}
		if failed.Load() {
			return nil
		}
		err := func() (err error) {
			defer recoverTo(&err, "")
			res.ct, err = s.combine(l, terms)
			return err
		}()
		if err != nil {
			res.ct = nil
			q.fail(seq, 0, fmt.Errorf("op %d (%s): %w", seq, name(), err))
		}
		return nil
	}}, deps...)
	return res
}
