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
	out := s.newOut()
	for i := range 2 {
		s.combinePoly(l, terms, i, out)
	}
	return out, nil
}

// newOut is the result ciphertext, at the terms' level and metadata.
func (s *rotSum) newOut() *rlwe.Ciphertext {
	out := hefloat.NewCiphertext(s.p.hp, 1, s.level())
	*out.MetaData = *s.cts[0].ct.MetaData
	return out
}

// combinePoly is combine for polynomial i of the pair: the switched terms'
// polynomial i added in QP (into the first term's), brought down to Q as
// lattigo's ModDown brings down each of its two, and the unrotated terms'
// polynomial i added. The two polynomials touch disjoint memory.
func (s *rotSum) combinePoly(l *lane, terms []*rlwe.Element[ringqp.Poly], i int, out *rlwe.Ciphertext) {
	hp := s.p.hp
	levelP := hp.MaxLevelP()
	rqp := hp.RingQP().AtLevel(s.level(), levelP)
	var acc *rlwe.Element[ringqp.Poly]
	for _, t := range terms {
		switch {
		case t == nil:
		case acc == nil:
			acc = t
		default:
			rqp.Add(acc.Value[i], t.Value[i], acc.Value[i])
		}
	}
	if acc != nil {
		l.ev.ModDownQPtoQNTT(s.level(), levelP, acc.Value[i].Q, acc.Value[i].P, out.Value[i])
	}
	ringQ := hp.RingQ().AtLevel(s.level())
	for j, g := range s.galEls {
		if g == 0 {
			ringQ.Add(out.Value[i], s.cts[j].ct.Value[i], out.Value[i])
		}
	}
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
	combiner := &task{seq: seq, sub: len(cts) + 1, outs: []*Ciphertext{res}}
	combiner.run = func(l *lane) []*task {
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
		// The two polynomials are brought down by two tasks; the one that
		// finishes last hands the result over.
		var out *rlwe.Ciphertext
		err := func() (err error) {
			defer recoverTo(&err, "")
			out = s.newOut()
			return nil
		}()
		if err != nil {
			q.fail(seq, 0, fmt.Errorf("op %d (%s): %w", seq, name(), err))
			return nil
		}
		combiner.outs = nil
		polys := make([]*task, 2)
		j := newJoin(len(polys), res)
		for i := range polys {
			polys[i] = &task{seq: seq, sub: len(cts) + 2 + i}
			polys[i].run = func(l *lane) []*task {
				err := func() (err error) {
					defer recoverTo(&err, "")
					s.combinePoly(l, terms, i, out)
					return nil
				}()
				if err != nil {
					q.fail(seq, 0, fmt.Errorf("op %d (%s): %w", seq, name(), err))
				}
				j.done(polys[i], err, out)
				return nil
			}
		}
		return polys
	}
	q.submit(combiner, deps...)
	return res
}
