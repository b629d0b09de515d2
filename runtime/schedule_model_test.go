//go:build linux

package runtime

import (
	"cmp"
	goruntime "runtime"
	"slices"
	"syscall"
	"testing"
	"time"

	"github.com/stretchr/testify/require"
)

// On a shared machine the wall clock cannot show a speed-up when other
// processes take the cores (the kernel shares CPU between sessions, not
// threads). BenchmarkMatVecScheduleModel gives a figure that does not
// depend on the load: it times every op of the matrix-vector workload in
// CPU time of its own thread, rebuilds the task graph the parallel
// Evaluator runs (a hoisted rotation as one decomposition, then one task
// per step), and replays the pool's policy (lowest op number first, no
// worker idle while a task is ready) on two idle workers. model-speedup is
// the one-thread time over that schedule's length: what 2 free cores
// would give, before memory-bandwidth and scheduling costs.

// threadCPU is the CPU time of the calling OS thread.
func threadCPU() time.Duration {
	var r syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_THREAD, &r); err != nil {
		return 0
	}
	return time.Duration(r.Utime.Nano() + r.Stime.Nano())
}

// modelTask is one task of the recorded graph.
type modelTask struct {
	cost time.Duration
	deps []int // tasks whose results it reads
}

// recorder runs the workload on a one-thread Evaluator, timing each op and
// recording which task made each ciphertext.
type recorder struct {
	ev    *Evaluator
	tasks []modelTask
	maker map[*Ciphertext]int
}

func (r *recorder) timed(f func()) time.Duration {
	t0 := threadCPU()
	f()
	return threadCPU() - t0
}

func (r *recorder) add(cost time.Duration, args []*Ciphertext, deps ...int) int {
	for _, a := range args {
		if i, ok := r.maker[a]; ok {
			deps = append(deps, i)
		}
	}
	r.tasks = append(r.tasks, modelTask{cost: cost, deps: deps})
	return len(r.tasks) - 1
}

func (r *recorder) one(args []*Ciphertext, f func() *Ciphertext) *Ciphertext {
	var out *Ciphertext
	cost := r.timed(func() { out = f() })
	r.maker[out] = r.add(cost, args)
	return out
}

func (r *recorder) RotateHoisted(ct *Ciphertext, steps ...int) []*Ciphertext {
	var out []*Ciphertext
	all := r.timed(func() { out = r.ev.RotateHoisted(ct, steps...) })
	// One step costs the decomposition and one rotation: that splits the
	// total into the parent task and its children.
	single := r.timed(func() { r.ev.RotateHoisted(ct, steps[0]) })
	step := max(0, (all-single)/time.Duration(max(1, len(steps)-1)))
	parent := r.add(max(0, single-step), []*Ciphertext{ct})
	for _, c := range out {
		r.maker[c] = r.add(step, nil, parent)
	}
	return out
}

func (r *recorder) Rotate(ct *Ciphertext, step int) *Ciphertext {
	return r.one([]*Ciphertext{ct}, func() *Ciphertext { return r.ev.Rotate(ct, step) })
}
func (r *recorder) MulPlain(ct *Ciphertext, pt *Plaintext) *Ciphertext {
	return r.one([]*Ciphertext{ct}, func() *Ciphertext { return r.ev.MulPlain(ct, pt) })
}
func (r *recorder) Add(a, b *Ciphertext) *Ciphertext {
	return r.one([]*Ciphertext{a, b}, func() *Ciphertext { return r.ev.Add(a, b) })
}
func (r *recorder) Mul(a, b *Ciphertext) *Ciphertext {
	return r.one([]*Ciphertext{a, b}, func() *Ciphertext { return r.ev.Mul(a, b) })
}
func (r *recorder) Relinearize(ct *Ciphertext) *Ciphertext {
	return r.one([]*Ciphertext{ct}, func() *Ciphertext { return r.ev.Relinearize(ct) })
}
func (r *recorder) Rescale(ct *Ciphertext) *Ciphertext {
	return r.one([]*Ciphertext{ct}, func() *Ciphertext { return r.ev.Rescale(ct) })
}
func (r *recorder) Err() error { return r.ev.Err() }

// schedule returns the length of the list schedule of tasks on workers
// idle workers, taking ready tasks lowest index first (program order).
func schedule(tasks []modelTask, workers int) time.Duration {
	finished := make([]bool, len(tasks))
	type run struct {
		task int
		end  time.Duration
	}
	var running []run
	now, next := time.Duration(0), 0
	waiting := []int{}
	for n := 0; n < len(tasks); {
		for ; next < len(tasks); next++ {
			waiting = append(waiting, next)
		}
		// Start ready tasks, lowest index first, on free workers.
		for i := 0; i < len(waiting) && len(running) < workers; {
			t := waiting[i]
			ready := true
			for _, d := range tasks[t].deps {
				ready = ready && finished[d]
			}
			if !ready {
				i++
				continue
			}
			running = append(running, run{t, now + tasks[t].cost})
			waiting = slices.Delete(waiting, i, i+1)
		}
		// Finish the earliest running task.
		slices.SortFunc(running, func(a, b run) int { return cmp.Compare(a.end, b.end) })
		r := running[0]
		running = running[1:]
		now, finished[r.task] = r.end, true
		n++
	}
	return now
}

func BenchmarkMatVecScheduleModel(b *testing.B) {
	s := getMV(b, 13)
	in := parEncrypt(b, s.p, s.sk, randVec(5, s.n, -1, 1), s.n)
	goruntime.LockOSThread()
	defer goruntime.UnlockOSThread()
	var total, makespan time.Duration
	for b.Loop() {
		r := &recorder{ev: NewEvaluator(s.p, s.evk), maker: map[*Ciphertext]int{}}
		if _, err := s.evaluate(r, in); err != nil {
			b.Fatal(err)
		}
		for _, t := range r.tasks {
			total += t.cost
		}
		makespan += schedule(r.tasks, 2)
	}
	b.ReportMetric(float64(total)/float64(b.N)/1e6, "cpu-ms/op")
	b.ReportMetric(float64(total)/float64(makespan), "model-speedup")
}

// The replay itself, on graphs whose schedule is known by hand.
func TestScheduleModel(t *testing.T) {
	ms := time.Millisecond
	cases := []struct {
		name    string
		tasks   []modelTask
		workers int
		want    time.Duration
	}{
		{"chain", []modelTask{{cost: ms}, {cost: 2 * ms, deps: []int{0}}, {cost: 3 * ms, deps: []int{1}}}, 2, 6 * ms},
		{"independent", []modelTask{{cost: ms}, {cost: ms}, {cost: ms}, {cost: ms}}, 2, 2 * ms},
		{"one worker", []modelTask{{cost: ms}, {cost: ms}, {cost: ms}}, 1, 3 * ms},
		// 0 and 1 run at once; 2 waits for 0, 3 for 1 and 2.
		{"diamond", []modelTask{{cost: ms}, {cost: 3 * ms}, {cost: ms, deps: []int{0}}, {cost: ms, deps: []int{1, 2}}}, 2, 4 * ms},
		// Program order first: 0 and 1 start; 2 (after 1) starts at 5 on
		// the worker 0 left, 3 at 5 too: 5 + 4 = 9.
		{"order", []modelTask{{cost: 5 * ms}, {cost: 5 * ms}, {cost: 4 * ms, deps: []int{1}}, {cost: 4 * ms}}, 2, 9 * ms},
	}
	for _, c := range cases {
		require.Equal(t, c.want, schedule(c.tasks, c.workers), c.name)
	}
}
