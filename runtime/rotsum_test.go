package runtime

import (
	"math"
	goruntime "runtime"
	"testing"

	"github.com/stretchr/testify/require"
)

// RotateSum must compute Σ rot_{s_i}(c_i), as the rotations and additions
// it replaces do, to within CKKS noise, and bit-identically for any number
// of threads.
func TestRotateSumMatchesRotations(t *testing.T) {
	s := getMV(t, 12)
	xs := [][]float64{randVec(31, s.n, -1, 1), randVec(32, s.n, -1, 1), randVec(33, s.n, -1, 1)}
	steps := []int{0, 8, 24} // the setup has keys for 8, 16, …, 56
	var cts []*Ciphertext
	for _, x := range xs {
		cts = append(cts, parEncrypt(t, s.p, s.sk, x, s.n))
	}
	want := make([]float64, s.n)
	for i, x := range xs {
		for j := range want {
			want[j] += x[(j+steps[i])%s.n]
		}
	}
	var first []byte
	for _, threads := range []int{1, 2, 4} {
		before := goruntime.NumGoroutine()
		ev := NewParallelEvaluator(s.p, s.evk, threads)
		out := ev.RotateSum(cts, steps)
		require.NoError(t, ev.Err(), "threads %d", threads)
		got := parDecrypt(t, s.p, s.sk, out, s.n)
		for j := range want {
			require.InDelta(t, want[j], got[j], 1e-6, "slot %d, threads %d", j, threads)
		}
		b := ctBytes(t, out)
		if first == nil {
			first = b
		} else {
			require.Equal(t, first, b, "threads %d differs from one thread", threads)
		}
		noLeak(t, before)
	}

	// Against the separate rotations: the same sum, with the rounding of
	// one basis change instead of two.
	ev := NewEvaluator(s.p, s.evk)
	sep := ev.Add(ev.Add(cts[0], ev.Rotate(cts[1], 8)), ev.Rotate(cts[2], 24))
	require.NoError(t, ev.Err())
	a, b := parDecrypt(t, s.p, s.sk, sep, s.n), parDecrypt(t, s.p, s.sk, ev.RotateSum(cts, steps), s.n)
	var errSep, errSum float64
	for j := range want {
		errSep = math.Max(errSep, math.Abs(a[j]-want[j]))
		errSum = math.Max(errSum, math.Abs(b[j]-want[j]))
	}
	t.Logf("max error: separate rotations %.3g, rotate-sum %.3g", errSep, errSum)
	require.Less(t, errSum, 1e-6)
}

func TestRotateSumErrors(t *testing.T) {
	s := getMV(t, 12)
	x := parEncrypt(t, s.p, s.sk, randVec(34, s.n, -1, 1), s.n)
	for _, threads := range []int{1, 2} {
		ev := NewParallelEvaluator(s.p, s.evk, threads)
		ev.RotateSum([]*Ciphertext{x, x}, []int{8, 60}) // no key for 60
		require.ErrorContains(t, ev.Err(), "no rotation key for step 60", "threads %d", threads)

		ev = NewParallelEvaluator(s.p, s.evk, threads)
		ev.RotateSum([]*Ciphertext{x}, []int{8, 16})
		require.ErrorContains(t, ev.Err(), "rotate-sum of 1 ciphertexts with 2 steps", "threads %d", threads)

		ev = NewParallelEvaluator(s.p, s.evk, threads)
		low := ev.Rescale(x)
		ev.RotateSum([]*Ciphertext{x, low}, []int{8, 16})
		require.ErrorContains(t, ev.Err(), "levels differ", "threads %d", threads)
	}
}
