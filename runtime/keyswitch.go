package runtime

import (
	"fmt"
	"sync/atomic"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
	"github.com/tuneinsight/lattigo/v5/ring"
	"github.com/tuneinsight/lattigo/v5/ring/ringqp"
)

// A rotation or relinearization on its own is one key switch that nothing
// else can overlap when the ops around it wait for it (a fold's chain of
// rotate-and-add, the relinearization after a square). With several
// threads it is split into tasks, so that two lanes share it:
//
//  1. check the operand and the key, and take the switched polynomial c
//     out of the NTT domain;
//  2. two tasks, each the digits of one half of the decomposition of c
//     (DecomposeSingleNTT) multiplied by the key's digits and summed in an
//     element of its own mod QP, reduced;
//  3. two tasks, one per polynomial of the switched pair: add the halves,
//     divide by P back to Q (ModDown), then the rest of the op on that
//     polynomial (finish);
//  4. a join that hands the result over.
//
// Each half is reduced before the halves are added and modular sums do not
// depend on their order, so the pair brought down is lattigo's
// GadgetProduct bit for bit (its lazy accumulation ends reduced too), and
// finish repeats what lattigo's Automorphism or Relinearize does after it.
type splitSwitch struct {
	e      *Evaluator
	ct     *Ciphertext
	c      int // the polynomial switched: 1 for a rotation, 2 to relinearize
	name   func() string
	seq    int
	failed atomic.Bool

	// check runs in task 1 with its lane: it checks the operand and returns
	// the key's gadget ciphertext and the finish of each polynomial.
	check func(l *lane) (*rlwe.GadgetCiphertext, func(i int, s, out ring.Poly), error)

	// Set by task 1.
	level, levelP int
	gadget        *rlwe.GadgetCiphertext
	finish        func(i int, s, out ring.Poly)
	cInv          ring.Poly
	halves        [2]*rlwe.Element[ringqp.Poly]
	out           *rlwe.Ciphertext
}

// submit queues the tasks and returns the result's future.
func (s *splitSwitch) submit() *Ciphertext {
	q := s.e.pool
	res := q.newFuture()
	opened := q.newFuture()
	halves := [2]*Ciphertext{q.newFuture(), q.newFuture()}
	polys := [2]*Ciphertext{q.newFuture(), q.newFuture()}
	q.submit(&task{seq: s.seq, outs: []*Ciphertext{opened}, run: func(l *lane) []*task {
		s.guard(0, func() error { return s.open(l) })
		return nil
	}}, s.ct)
	for h := range 2 {
		q.submit(&task{seq: s.seq, sub: 1 + h, outs: []*Ciphertext{halves[h]}, run: func(l *lane) []*task {
			s.guard(1+h, func() error { return s.half(l, h) })
			return nil
		}}, opened)
	}
	for i := range 2 {
		q.submit(&task{seq: s.seq, sub: 3 + i, outs: []*Ciphertext{polys[i]}, run: func(l *lane) []*task {
			s.guard(3+i, func() error { return s.down(l, i) })
			return nil
		}}, halves[0], halves[1])
	}
	q.submit(&task{seq: s.seq, sub: 5, outs: []*Ciphertext{res}, run: func(*lane) []*task {
		if !s.failed.Load() {
			res.ct = s.out
		}
		return nil
	}}, polys[0], polys[1])
	return res
}

// guard runs step part of the op unless an earlier part failed, and
// records its failure.
func (s *splitSwitch) guard(part int, step func() error) {
	if s.failed.Load() {
		return
	}
	err := func() (err error) {
		defer recoverTo(&err, "")
		return step()
	}()
	if err != nil {
		s.failed.Store(true)
		s.e.pool.fail(s.seq, part, fmt.Errorf("op %d (%s): %w", s.seq, s.name(), err))
	}
}

// open is task 1.
func (s *splitSwitch) open(l *lane) error {
	gadget, finish, err := s.check(l)
	if err != nil {
		return err
	}
	hp := s.e.p.hp
	in := s.ct.ct
	s.level, s.levelP = min(in.Level(), gadget.LevelQ()), gadget.LevelP()
	s.gadget, s.finish = gadget, finish
	ringQ := hp.RingQ().AtLevel(s.level)
	s.cInv = ringQ.NewPoly()
	ringQ.INTT(in.Value[s.c], s.cInv)
	s.out = hefloat.NewCiphertext(hp, 1, s.level)
	*s.out.MetaData = *in.MetaData
	return nil
}

// digits is the number of digits of the decomposition.
func (s *splitSwitch) digits() int {
	return s.e.p.hp.BaseRNSDecompositionVectorSize(s.level, s.levelP)
}

// half is task 2: the digits [from, to) of one half, multiplied by the
// key's and summed mod QP, reduced. The second half of a one-digit
// decomposition is empty.
func (s *splitSwitch) half(l *lane, h int) error {
	from, to := digitHalf(s.digits(), h)
	if from == to {
		return nil
	}
	hp := s.e.p.hp
	rqp := hp.RingQP().AtLevel(s.level, s.levelP)
	acc := rlwe.NewElementExtended(hp, 1, s.level, s.levelP)
	acc.IsNTT = true
	digit := rqp.NewPoly()
	qOver, pOver := hp.QiOverflowMargin(s.level)>>1, hp.PiOverflowMargin(s.levelP)>>1
	el := s.gadget.Value
	cNTT := s.ct.ct.Value[s.c]
	for i := from; i < to; i++ {
		l.ev.DecomposeSingleNTT(s.level, s.levelP, s.levelP+1, i, cNTT, s.cInv, digit.Q, digit.P)
		n := i - from
		if n == 0 {
			rqp.MulCoeffsMontgomeryLazy(el[i][0][0], digit, acc.Value[0])
			rqp.MulCoeffsMontgomeryLazy(el[i][0][1], digit, acc.Value[1])
		} else {
			rqp.MulCoeffsMontgomeryLazyThenAddLazy(el[i][0][0], digit, acc.Value[0])
			rqp.MulCoeffsMontgomeryLazyThenAddLazy(el[i][0][1], digit, acc.Value[1])
		}
		if n%qOver == qOver-1 {
			rqp.RingQ.Reduce(acc.Value[0].Q, acc.Value[0].Q)
			rqp.RingQ.Reduce(acc.Value[1].Q, acc.Value[1].Q)
		}
		if n%pOver == pOver-1 {
			rqp.RingP.Reduce(acc.Value[0].P, acc.Value[0].P)
			rqp.RingP.Reduce(acc.Value[1].P, acc.Value[1].P)
		}
	}
	// Canonical residues, whatever the margins did.
	for i := range acc.Value {
		rqp.RingQ.Reduce(acc.Value[i].Q, acc.Value[i].Q)
		rqp.RingP.Reduce(acc.Value[i].P, acc.Value[i].P)
	}
	s.halves[h] = acc
	return nil
}

// down is task 3 for polynomial i of the switched pair: the halves added,
// brought down to Q, finished into the result.
func (s *splitSwitch) down(l *lane, i int) error {
	hp := s.e.p.hp
	rqp := hp.RingQP().AtLevel(s.level, s.levelP)
	sum := s.halves[0].Value[i]
	if b := s.halves[1]; b != nil {
		rqp.Add(sum, b.Value[i], sum)
	}
	ringQ := hp.RingQ().AtLevel(s.level)
	tmp := ringQ.NewPoly()
	l.ev.ModDownQPtoQNTT(s.level, s.levelP, sum.Q, sum.P, tmp)
	s.finish(i, tmp, s.out.Value[i])
	return nil
}

// digitHalf is the range [from, to) of digits in half h (0 or 1) of a
// decomposition of d digits; the second half of one digit is empty.
func digitHalf(d, h int) (from, to int) {
	if h == 0 {
		return 0, (d + 1) / 2
	}
	return (d + 1) / 2, d
}

// join hands an op's result over from whichever of its n last tasks
// finishes last: each calls done with its own task, and the last one sets
// the result (unless one of them failed) and takes it as its output, so
// that the pool resolves it only then.
type join struct {
	left   atomic.Int32
	failed atomic.Bool
	res    *Ciphertext
}

func newJoin(n int, res *Ciphertext) *join {
	j := &join{res: res}
	j.left.Store(int32(n))
	return j
}

// done records that t finished (failed if err is not nil) and, for the
// last of them, sets the result to out.
func (j *join) done(t *task, err error, out *rlwe.Ciphertext) {
	if err != nil {
		j.failed.Store(true)
	}
	if j.left.Add(-1) == 0 {
		if !j.failed.Load() {
			j.res.ct = out
		}
		t.outs = []*Ciphertext{j.res}
	}
}

// splits reports whether a key switch at this evaluator runs split: with a
// pool of two threads or more.
func (e *Evaluator) splits() bool { return e.pool != nil && e.pool.threads > 1 }

// rotateSplit is Rotate by the nonzero normalised step k as split tasks.
func (e *Evaluator) rotateSplit(ct *Ciphertext, k int, name func() string) *Ciphertext {
	s := &splitSwitch{e: e, ct: ct, c: 1, name: name, seq: e.ops}
	s.check = func(l *lane) (*rlwe.GadgetCiphertext, func(int, ring.Poly, ring.Poly), error) {
		if err := e.rotateCheck(ct, k); err != nil {
			return nil, nil, err
		}
		galEl := e.p.hp.GaloisElement(k)
		evk, err := l.ev.CheckAndGetGaloisKey(galEl)
		if err != nil {
			return nil, nil, err
		}
		index := l.ev.AutomorphismIndex(galEl)
		in := ct.ct
		finish := func(i int, sw, out ring.Poly) {
			ringQ := e.p.hp.RingQ().AtLevel(in.Level())
			if i == 0 {
				ringQ.Add(sw, in.Value[0], sw)
			}
			ringQ.AutomorphismNTTWithIndex(sw, index, out)
		}
		return &evk.GadgetCiphertext, finish, nil
	}
	return s.submit()
}

// relinearizeSplit is Relinearize as split tasks.
func (e *Evaluator) relinearizeSplit(ct *Ciphertext, name func() string) *Ciphertext {
	s := &splitSwitch{e: e, ct: ct, c: 2, name: name, seq: e.ops}
	s.check = func(l *lane) (*rlwe.GadgetCiphertext, func(int, ring.Poly, ring.Poly), error) {
		if err := e.relinearizeCheck(ct); err != nil {
			return nil, nil, err
		}
		rlk, err := l.ev.CheckAndGetRelinearizationKey()
		if err != nil {
			return nil, nil, err
		}
		in := ct.ct
		finish := func(i int, sw, out ring.Poly) {
			e.p.hp.RingQ().AtLevel(in.Level()).Add(in.Value[i], sw, out)
		}
		return &rlk.GadgetCiphertext, finish, nil
	}
	return s.submit()
}
