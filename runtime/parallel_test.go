package runtime

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math/rand/v2"
	goruntime "runtime"
	"slices"
	"testing"
	"time"

	"github.com/stretchr/testify/require"
)

// The parallel evaluator must be indistinguishable from the sequential one
// except in speed: the same ciphertext bytes, the same first error, no
// panic, and no goroutine left behind.

// parEncrypt encrypts x with the given period into one ciphertext.
func parEncrypt(t testing.TB, p *Params, sk *SecretKey, x []float64, period int) *Ciphertext {
	t.Helper()
	ct, err := encryptOne(p, sk, x, period)
	require.NoError(t, err)
	return ct
}

// parDecrypt decrypts the first n slots of ct.
func parDecrypt(t testing.TB, p *Params, sk *SecretKey, ct *Ciphertext, n int) []float64 {
	t.Helper()
	v, err := decryptOne(p, sk, ct, n)
	require.NoError(t, err)
	return v
}

// ctBytes is the content of ct (metadata and every coefficient of every
// polynomial, at its level), to compare runs bit for bit.
func ctBytes(t testing.TB, ct *Ciphertext) []byte {
	t.Helper()
	require.NotNil(t, ct)
	ct.wait()
	require.NotNil(t, ct.ct)
	c := ct.ct
	b := fmt.Appendf(nil, "degree %d level %d scale %s ntt %v dims %v\n", c.Degree(), c.Level(), c.Scale.Value.Text('g', 60), c.IsNTT, c.LogDimensions)
	for _, v := range c.Value {
		for _, limb := range v.Coeffs[:c.Level()+1] {
			for _, x := range limb {
				b = binary.LittleEndian.AppendUint64(b, x)
			}
		}
	}
	return b
}

// noLeak fails t if goroutines started after before are still running a
// second later (worker goroutines leave when they run out of work).
func noLeak(t *testing.T, before int) {
	t.Helper()
	deadline := time.Now().Add(time.Second)
	for goruntime.NumGoroutine() > before {
		if time.Now().After(deadline) {
			buf := make([]byte, 1<<16)
			n := goruntime.Stack(buf, true)
			t.Fatalf("%d goroutines, %d before:\n%s", goruntime.NumGoroutine(), before, buf[:n])
		}
		time.Sleep(5 * time.Millisecond)
	}
}

func TestParallelMatVecBitIdentical(t *testing.T) {
	s := getMV(t, 12)
	x := randVec(21, s.n, -1, 1)
	in := parEncrypt(t, s.p, s.sk, x, s.n)
	var want []byte
	for _, threads := range []int{1, 2, 3, 8} {
		before := goruntime.NumGoroutine()
		ev := NewParallelEvaluator(s.p, s.evk, threads)
		require.Equal(t, threads, ev.Threads())
		out, err := s.evaluate(ev, in)
		require.NoError(t, err, "threads %d", threads)
		got := ctBytes(t, out)
		if want == nil {
			want = got
			// The workload computes what it should (so that equal bytes
			// are not equal garbage): float64 reference, common practice.
			requireClose(t, s.reference(x), parDecrypt(t, s.p, s.sk, out, s.n), 1e-3, "matvec")
		} else {
			require.True(t, bytes.Equal(want, got), "threads %d: result differs from the one-thread run", threads)
		}
		// A second evaluation on the same evaluator reuses its lanes.
		again, err := s.evaluate(ev, in)
		require.NoError(t, err)
		require.True(t, bytes.Equal(want, ctBytes(t, again)), "threads %d, second run", threads)
		noLeak(t, before)
	}
	// The input is untouched.
	requireClose(t, x, parDecrypt(t, s.p, s.sk, in, s.n), tol, "input")
}

// randomProgram is a straight-line program of random valid ops over two
// inputs, made by running it on a one-thread evaluator and choosing each
// op among those whose operands fit (levels, degrees, exact scales).
type randomOp struct {
	kind  string
	a, b  int
	steps []int
	pt    *Plaintext
	poly  *Polynomial
}

// apply issues op on ev over the values so far and returns its results.
func (op randomOp) apply(e *testEnv, ev *Evaluator, vals []*Ciphertext) []*Ciphertext {
	a := vals[op.a]
	switch op.kind {
	case "rotate":
		return []*Ciphertext{ev.Rotate(a, op.steps[0])}
	case "hoisted":
		return ev.RotateHoisted(a, op.steps...)
	case "add":
		return []*Ciphertext{ev.Add(a, vals[op.b])}
	case "mul":
		return []*Ciphertext{ev.Mul(a, vals[op.b])}
	case "relin":
		return []*Ciphertext{ev.Relinearize(a)}
	case "rescale":
		return []*Ciphertext{ev.Rescale(a)}
	case "drop":
		return []*Ciphertext{ev.DropLevel(a, op.steps[0])}
	case "mulplain":
		return []*Ciphertext{ev.MulPlain(a, op.pt)}
	case "poly":
		return []*Ciphertext{ev.Poly(a, op.poly, e.p.DefaultScale())}
	}
	panic("unknown op " + op.kind)
}

func randomProgram(t *testing.T, e *testEnv, seed uint64, n int) ([]*Ciphertext, []randomOp) {
	r := rand.New(rand.NewPCG(seed, 5))
	const period = 16
	inputs := []*Ciphertext{
		parEncrypt(t, e.p, e.sk, randVec(seed, period, -0.5, 0.5), period),
		parEncrypt(t, e.p, e.sk, randVec(seed+1, period, -0.5, 0.5), period),
	}
	blob, err := BuildWeights([]string{"w"}, [][]float64{randVec(seed+2, period, -1, 1)})
	require.NoError(t, err)
	ws, err := decodeWeights(blob)
	require.NoError(t, err)
	enc := NewEncoder(e.p, ws)
	pts := make([]*Plaintext, e.p.MaxLevel()+1)
	for l := 1; l <= e.p.MaxLevel(); l++ {
		pts[l] = enc.Plaintext("w", l, Scale{Num: []int{l}}, period)
	}
	require.NoError(t, enc.Err())
	poly, err := NewPolynomial("p3", Chebyshev, []float64{0.1, 0.5, 0, 0.2})
	require.NoError(t, err)
	keys := []int{1, 2, 3, 5, 7, -1, 4, 16, 0}
	def, err := e.p.rlweScale(e.p.DefaultScale())
	require.NoError(t, err)

	ev := NewEvaluator(e.p, e.evk)
	vals := slices.Clone(inputs)
	var ops []randomOp
	pick := func(ok func(c *Ciphertext) bool) (int, bool) {
		var idx []int
		for i, c := range vals {
			if ok(c) {
				idx = append(idx, i)
			}
		}
		if len(idx) == 0 {
			return 0, false
		}
		return idx[r.IntN(len(idx))], true
	}
	deg1 := func(c *Ciphertext) bool { return c.Degree() == 1 }
	kinds := []string{"rotate", "hoisted", "add", "mul", "relin", "rescale", "drop", "mulplain", "poly"}
	for len(ops) < n {
		op := randomOp{kind: kinds[r.IntN(len(kinds))]}
		var ok bool
		switch op.kind {
		case "rotate":
			op.a, ok = pick(deg1)
			op.steps = []int{keys[r.IntN(len(keys))]}
		case "hoisted":
			op.a, ok = pick(deg1)
			for range 1 + r.IntN(5) {
				op.steps = append(op.steps, keys[r.IntN(len(keys))])
			}
		case "add":
			if op.a, ok = pick(func(*Ciphertext) bool { return true }); ok {
				a := vals[op.a]
				op.b, ok = pick(func(c *Ciphertext) bool {
					return c.Level() == a.Level() && sameScale(c.ct.Scale, a.ct.Scale)
				})
			}
		case "mul":
			if op.a, ok = pick(deg1); ok {
				a := vals[op.a]
				op.b, ok = pick(func(c *Ciphertext) bool { return deg1(c) && c.Level() == a.Level() })
			}
		case "relin":
			op.a, ok = pick(func(c *Ciphertext) bool { return c.Degree() == 2 })
		case "rescale":
			op.a, ok = pick(func(c *Ciphertext) bool { return c.Level() > 0 })
		case "drop":
			if op.a, ok = pick(func(c *Ciphertext) bool { return c.Level() > 0 }); ok {
				op.steps = []int{1 + r.IntN(vals[op.a].Level())}
			}
		case "mulplain":
			if op.a, ok = pick(func(c *Ciphertext) bool { return deg1(c) && c.Level() > 0 }); ok {
				op.pt = pts[vals[op.a].Level()]
			}
		case "poly":
			op.a, ok = pick(func(c *Ciphertext) bool {
				return deg1(c) && c.Level() >= 2 && sameScale(c.ct.Scale, def)
			})
			op.poly = poly
		}
		if !ok {
			continue
		}
		out := op.apply(e, ev, vals)
		require.NoError(t, ev.Err(), "op %d: %+v", len(ops)+1, op)
		ops = append(ops, op)
		vals = append(vals, out...)
	}
	return vals, ops
}

func TestParallelRandomOpsBitIdentical(t *testing.T) {
	e := getEnv(t, evalEnv)
	for _, seed := range []uint64{1, 2, 3} {
		want, ops := randomProgram(t, e, seed, 40)
		for _, threads := range []int{2, 4} {
			before := goruntime.NumGoroutine()
			ev := NewParallelEvaluator(e.p, e.evk, threads)
			vals := slices.Clone(want[:2])
			for _, op := range ops {
				vals = append(vals, op.apply(e, ev, vals)...)
			}
			require.NoError(t, ev.Err())
			require.Len(t, vals, len(want))
			for i := range want {
				require.True(t, bytes.Equal(ctBytes(t, want[i]), ctBytes(t, vals[i])), "seed %d, threads %d: value %d differs", seed, threads, i)
			}
			noLeak(t, before)
		}
	}
}

// Reading a result before Err waits for it.
func TestParallelReadWaits(t *testing.T) {
	e := getEnv(t, evalEnv)
	const period = 16
	x := randVec(8, period, -1, 1)
	ct := parEncrypt(t, e.p, e.sk, x, period)
	ev := NewParallelEvaluator(e.p, e.evk, 2)
	r := ev.Rotate(ev.Rotate(ev.Rotate(ct, 1), 2), 4)
	require.Equal(t, e.p.MaxLevel(), r.Level())
	requireClose(t, rotRef(x, 7), parDecrypt(t, e.p, e.sk, r, period), tol, "rotate 7 before Err")
	hs := ev.RotateHoisted(r, 1, 0, 1)
	requireClose(t, rotRef(x, 8), parDecrypt(t, e.p, e.sk, hs[0], period), tol, "hoisted")
	requireClose(t, rotRef(x, 7), parDecrypt(t, e.p, e.sk, hs[1], period), tol, "hoisted step 0")
	require.Same(t, hs[0].ct, hs[2].ct, "a repeated step shares its rotation, as with one thread")
	require.NoError(t, ev.Err())
	// A result of one evaluator is an argument of another.
	other := NewParallelEvaluator(e.p, e.evk, 2)
	s := other.Add(ev.Rotate(ct, 3), ct)
	require.NoError(t, errors2(ev.Err(), other.Err()))
	want := rotRef(x, 3)
	for i := range want {
		want[i] += x[i]
	}
	requireClose(t, want, parDecrypt(t, e.p, e.sk, s, period), tol, "across evaluators")
}

func errors2(a, b error) error {
	if a != nil {
		return a
	}
	return b
}

// Failing programs: the first error, in program order, is the same with
// any number of threads, and nothing panics or leaks.
func TestParallelFirstError(t *testing.T) {
	e := getEnv(t, evalEnv)
	other := getEnv(t, fileEnv)
	const period = 16
	constant, err := NewPolynomial("const", Monomial, []float64{1, 0})
	require.NoError(t, err)
	// chain issues n dependent rotations of ct.
	chain := func(ev *Evaluator, ct *Ciphertext, n int) *Ciphertext {
		for range n {
			ct = ev.Rotate(ct, 1)
		}
		return ct
	}
	// busy issues independent work.
	busy := func(ev *Evaluator, ct *Ciphertext) {
		for range 6 {
			ev.RotateHoisted(ct, 1, 2, 3, 5)
			ev.Rescale(ev.Relinearize(ev.Mul(ct, ct)))
		}
	}
	cases := []struct {
		name    string
		program func(ev *Evaluator, ct *Ciphertext)
		want    string
	}{
		{"missing key first", func(ev *Evaluator, ct *Ciphertext) {
			ev.Rotate(ct, 6)
			busy(ev, ct)
		}, "op 1 (rotate 6): no rotation key for step 6"},
		{"missing key last", func(ev *Evaluator, ct *Ciphertext) {
			busy(ev, ct)
			ev.Rotate(chain(ev, ct, 3), 6)
		}, "op 28 (rotate 6): no rotation key for step 6"},
		{"slow failure before a fast one", func(ev *Evaluator, ct *Ciphertext) {
			// Op 6 waits for a chain of 5 rotations; op 7 fails at once.
			ev.Add(chain(ev, ct, 5), ev.DropLevel(ct, 1))
			ev.Rescale(ev.DropLevel(ct, e.p.MaxLevel()))
		}, "op 7 (add): levels differ: ciphertext at 6, other ciphertext at 5"},
		{"hoisted missing key, then its results", func(ev *Evaluator, ct *Ciphertext) {
			busy(ev, ct)
			rs := ev.RotateHoisted(ct, 1, 9)
			ev.Add(rs[0], rs[1])
			busy(ev, ct)
		}, "op 25 (rotate-hoisted [1 9]): no rotation key for step 9"},
		{"degree 2 rotation in a chain", func(ev *Evaluator, ct *Ciphertext) {
			sq := ev.Mul(chain(ev, ct, 2), ct)
			ev.Rotate(sq, 1)
			busy(ev, ct)
		}, "op 4 (rotate 1): rotation needs a degree-1 ciphertext, got degree 2"},
		{"nil argument", func(ev *Evaluator, ct *Ciphertext) {
			busy(ev, ct)
			ev.Add(ct, nil)
		}, "op 25 (add): nil ciphertext"},
		{"ciphertext of another model", func(ev *Evaluator, ct *Ciphertext) {
			x := parEncrypt(t, other.p, other.sk, []float64{1}, 1)
			ev.Mul(chain(ev, ct, 2), ct)
			ev.Add(ct, x)
		}, "op 4 (add): ciphertext for another model"},
		{"constant polynomial", func(ev *Evaluator, ct *Ciphertext) {
			ev.Poly(chain(ev, ct, 2), constant, e.p.DefaultScale())
			busy(ev, ct)
		}, "op 3 (poly \"const\" (monomial, degree 1)): the polynomial is constant"},
		{"expect on a result", func(ev *Evaluator, ct *Ciphertext) {
			busy(ev, ct)
			ev.Expect(ev.Rescale(chain(ev, ct, 2)), e.p.MaxLevel(), e.p.DefaultScale())
			busy(ev, ct)
		}, "op 28 (expect level 6, scale 2^40): ciphertext at level 5"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			ct := parEncrypt(t, e.p, e.sk, randVec(3, period, -1, 1), period)
			var first string
			for _, threads := range []int{1, 2, 4} {
				before := goruntime.NumGoroutine()
				ev := NewParallelEvaluator(e.p, e.evk, threads)
				c.program(ev, ct)
				err := ev.Err()
				require.Error(t, err, "threads %d", threads)
				require.ErrorContains(t, err, c.want, "threads %d", threads)
				if threads == 1 {
					first = err.Error()
				} else {
					require.Equal(t, first, err.Error(), "threads %d", threads)
				}
				// Sticky: later ops do nothing and return nil.
				require.Nil(t, ev.Rotate(ct, 1))
				require.Equal(t, []*Ciphertext{nil, nil}, ev.RotateHoisted(ct, 1, 2))
				require.Equal(t, first, ev.Err().Error())
				noLeak(t, before)
			}
		})
	}
}

func TestParallelThreadsRange(t *testing.T) {
	e := getEnv(t, evalEnv)
	for _, n := range []int{0, -1, MaxThreads + 1} {
		ev := NewParallelEvaluator(e.p, e.evk, n)
		require.ErrorContains(t, ev.Err(), fmt.Sprintf("evaluator: %d threads, want 1..%d", n, MaxThreads))
		require.Nil(t, ev.Add(nil, nil))
	}
	// ShallowCopy keeps the threads and runs on its own.
	ev := NewParallelEvaluator(e.p, e.evk, 3)
	c := ev.ShallowCopy()
	require.Equal(t, 3, c.Threads())
	ct := parEncrypt(t, e.p, e.sk, []float64{1, 2}, 2)
	require.NotNil(t, c.Rotate(ct, 1))
	require.NoError(t, c.Err())
	require.Equal(t, 1, NewEvaluator(e.p, e.evk).Threads())
}

// Generated code indexes a hoisted rotation's results before it checks
// Err; after an earlier failure the index must not panic.
func TestHoistedAfterFailureIndexes(t *testing.T) {
	e := getEnv(t, evalEnv)
	ct := parEncrypt(t, e.p, e.sk, []float64{1}, 1)
	for _, threads := range []int{1, 2} {
		ev := NewParallelEvaluator(e.p, e.evk, threads)
		ev.Expect(ct, 0, e.p.DefaultScale()) // wrong level: fails
		rs := ev.RotateHoisted(ct, 1, 2, 3)
		a, b, c := rs[0], rs[1], rs[2]
		require.Nil(t, ev.Add(ev.Add(a, b), c))
		require.ErrorContains(t, ev.Err(), "op 1 (expect level 0, scale 2^40): ciphertext at level 6")
	}
}
