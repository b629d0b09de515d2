package runtime

import (
	"container/heap"
	"fmt"
	"sync"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
	"github.com/tuneinsight/lattigo/v5/ring"
	"github.com/tuneinsight/lattigo/v5/ring/ringqp"
)

// An Evaluator made with more than one thread runs its ops as dataflow
// tasks. Each op returns its result at once, as a Ciphertext whose value is
// still to come (a future); the op becomes a task that runs when its
// arguments are done, on at most Threads worker goroutines, each with its
// own lattigo evaluator (lattigo evaluators keep scratch buffers and are
// not safe for concurrent use). Generated code stays straight-line: it
// issues every op in program order and the Evaluator works out which ones
// are independent.
//
// Three properties make the parallel run equivalent to the sequential one:
//
//   - Results are bit-identical. Every op is a deterministic function of
//     its arguments, computed by the same lattigo calls; only the
//     goroutine differs.
//   - The error is the same. Each op keeps its number in program order;
//     the pool keeps the failure with the lowest number, and a task whose
//     number is above a recorded failure is skipped. The lowest failing op
//     saw the same arguments as in the sequential run, so it fails with
//     the same message.
//   - Memory stays close to the sequential run: ready tasks run lowest
//     number first, so the program is followed in order as far as the
//     dependencies allow, and a ciphertext is dropped once its last reader
//     has run, as in the sequential run. Lattigo evaluators are made only
//     as workers need them, at most Threads of them.
//
// Workers exist only while there is work: a worker with no ready task waits
// while some task is pending (its arguments still computing), and leaves
// when none is, so an Evaluator leaves no goroutine behind and needs no
// Close. Err (and everything that reads a ciphertext) waits for the work.

// lane is the lattigo state one goroutine computes with.
type lane struct {
	ev   *hefloat.Evaluator
	poly *hefloat.PolynomialEvaluator

	// Scratch space of RotateSum, made on first use at the top level.
	qp *rlwe.Element[ringqp.Poly]
	q  ring.Poly
}

// scratchQP is the lane's key-switching scratch element, mod QP at the top
// level (lattigo's level-aware ops read only the limbs they need).
func (l *lane) scratchQP(hp hefloat.Parameters) *rlwe.Element[ringqp.Poly] {
	if l.qp == nil {
		l.qp = rlwe.NewElementExtended(hp, 1, hp.MaxLevel(), hp.MaxLevelP())
		l.qp.IsNTT = true
	}
	return l.qp
}

// scratchQ is the lane's scratch polynomial mod Q at the top level.
func (l *lane) scratchQ(hp hefloat.Parameters) ring.Poly {
	if len(l.q.Coeffs) == 0 {
		l.q = hp.RingQ().NewPoly()
	}
	return l.q
}

func newLane(p *Params, ev *hefloat.Evaluator) *lane {
	return &lane{ev: ev, poly: hefloat.NewPolynomialEvaluator(p.hp, ev)}
}

// future is the state of a ciphertext whose op has not finished.
type future struct {
	pool *pool
	done chan struct{} // closed when the op is done, its result set or left nil

	resolved bool    // under pool.mu
	waiters  []*task // tasks waiting for this result, under pool.mu
}

// task is one op (or, for a hoisted rotation, one step of it).
type task struct {
	seq, sub int // op number in program order; part of the op (hoisted steps)
	deps     int // arguments not yet done, under pool.mu
	// run computes the op with lane l and returns any tasks it splits
	// into. It may set outs, which the pool marks done after run returns.
	run  func(l *lane) []*task
	outs []*Ciphertext
}

// pool schedules the tasks of one Evaluator.
type pool struct {
	p       *Params
	threads int
	base    *hefloat.Evaluator // lanes beyond the first are ShallowCopies of it

	mu      sync.Mutex
	idle    sync.Cond // broadcast when no task is pending and no worker runs
	more    sync.Cond // signalled when a task becomes ready or none is pending
	ready   taskHeap
	pending int     // tasks submitted and not finished
	workers int     // worker goroutines alive
	busy    int     // workers running a task
	waiting int     // workers waiting on more
	free    []*lane // lanes of workers that left; at most threads lanes exist

	err            error // the failure with the lowest (seq, sub)
	errSeq, errSub int
}

func newPool(p *Params, base *lane, threads int) *pool {
	q := &pool{p: p, threads: threads, base: base.ev, free: []*lane{base}}
	q.idle.L = &q.mu
	q.more.L = &q.mu
	return q
}

// newFuture returns a pending ciphertext of p made by this pool.
func (q *pool) newFuture() *Ciphertext {
	return &Ciphertext{fp: q.p.fp, f: &future{pool: q, done: make(chan struct{})}}
}

// failed reports whether some op has failed.
func (q *pool) failed() bool {
	q.mu.Lock()
	defer q.mu.Unlock()
	return q.err != nil
}

// fail records err for op seq (part sub) if no earlier op has failed.
func (q *pool) fail(seq, sub int, err error) {
	q.mu.Lock()
	defer q.mu.Unlock()
	if q.err == nil || seq < q.errSeq || seq == q.errSeq && sub < q.errSub {
		q.err, q.errSeq, q.errSub = err, seq, sub
	}
}

// submit queues t, to run once the ciphertexts args are done. A ciphertext
// still computing in another Evaluator is waited for here.
func (q *pool) submit(t *task, args ...*Ciphertext) {
	for _, a := range args {
		if a != nil && a.f != nil && a.f.pool != q {
			a.wait()
		}
	}
	q.mu.Lock()
	defer q.mu.Unlock()
	for _, a := range args {
		if a != nil && a.f != nil && a.f.pool == q && !a.f.resolved {
			a.f.waiters = append(a.f.waiters, t)
			t.deps++
		}
	}
	q.pending++
	if t.deps == 0 {
		heap.Push(&q.ready, t)
		q.spawn()
	}
}

// spawn wakes waiting workers and starts new ones, up to threads, for the
// ready tasks that no worker is about to take. Called with mu held.
func (q *pool) spawn() {
	for i := 0; i < min(q.waiting, len(q.ready)); i++ {
		q.more.Signal()
	}
	for q.workers < q.threads && q.workers-q.busy < len(q.ready) {
		var l *lane
		if n := len(q.free); n > 0 {
			l, q.free = q.free[n-1], q.free[:n-1]
		}
		q.workers++
		go q.work(l)
	}
}

// work runs ready tasks until no task is pending. A nil l is made here, as
// a ShallowCopy of the base evaluator.
func (q *pool) work(l *lane) {
	var made error
	if l == nil {
		func() {
			defer recoverTo(&made, "evaluator copy")
			l = newLane(q.p, q.base.ShallowCopy())
		}()
	}
	q.mu.Lock()
	for {
		for len(q.ready) == 0 && q.pending > 0 {
			q.waiting++
			q.more.Wait()
			q.waiting--
		}
		if len(q.ready) == 0 {
			break
		}
		t := heap.Pop(&q.ready).(*task)
		skip := q.err != nil && q.errSeq < t.seq
		q.busy++
		q.mu.Unlock()
		var more []*task
		switch {
		case skip:
		case made != nil:
			q.fail(t.seq, t.sub, fmt.Errorf("op %d: %w", t.seq, made))
		default:
			more = q.exec(t, l)
		}
		q.mu.Lock()
		q.busy--
		q.finish(t, more)
	}
	q.workers--
	if made == nil {
		q.free = append(q.free, l)
	}
	if q.workers == 0 && q.pending == 0 {
		q.idle.Broadcast()
	}
	q.mu.Unlock()
}

// exec runs t under a panic guard. The ops guard lattigo themselves; this
// one keeps a worker goroutine from ever taking the process down.
func (q *pool) exec(t *task, l *lane) (more []*task) {
	defer func() {
		if r := recover(); r != nil {
			q.fail(t.seq, t.sub, fmt.Errorf("op %d: internal error: %v", t.seq, r))
			more = nil
		}
	}()
	return t.run(l)
}

// finish marks t's results done, queues the tasks waiting for them and the
// tasks t split into. Called with mu held.
func (q *pool) finish(t *task, more []*task) {
	for _, c := range t.outs {
		f := c.f
		if f == nil || f.resolved {
			continue
		}
		f.resolved = true
		close(f.done)
		for _, w := range f.waiters {
			if w.deps--; w.deps == 0 {
				heap.Push(&q.ready, w)
			}
		}
		f.waiters = nil
	}
	for _, m := range more {
		q.pending++
		heap.Push(&q.ready, m)
	}
	q.pending--
	q.spawn()
	if q.pending == 0 {
		q.more.Broadcast() // waiting workers leave
		if q.workers == 0 {
			q.idle.Broadcast()
		}
	}
}

// wait blocks until every submitted task is done and every worker has
// left, and returns the first failure.
func (q *pool) wait() error {
	q.mu.Lock()
	defer q.mu.Unlock()
	for q.pending > 0 || q.workers > 0 {
		q.idle.Wait()
	}
	return q.err
}

// taskHeap orders ready tasks by op number, then part.
type taskHeap []*task

func (h taskHeap) Len() int { return len(h) }
func (h taskHeap) Less(i, j int) bool {
	return h[i].seq < h[j].seq || h[i].seq == h[j].seq && h[i].sub < h[j].sub
}
func (h taskHeap) Swap(i, j int) { h[i], h[j] = h[j], h[i] }
func (h *taskHeap) Push(x any)   { *h = append(*h, x.(*task)) }
func (h *taskHeap) Pop() any {
	old := *h
	t := old[len(old)-1]
	old[len(old)-1] = nil
	*h = old[:len(old)-1]
	return t
}
