package passes

import (
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/lanthorn/lanthorn/ir"
	"github.com/lanthorn/lanthorn/runtime"
	"github.com/lanthorn/lanthorn/spec"
)

// lattigo groups the ciphertext primes k at a time from q0 into the digits
// of its decomposition (BaseRNSDecompositionVectorSize = ceil((ℓ+1)/k)); P
// must exceed the largest digit by ceil(logN/2) bits, the margin params
// gives one special prime over the largest ciphertext prime.
func TestSpecialSizes(t *testing.T) {
	logQ := []int{54, 33, 33, 33, 33, 33}
	require.Equal(t, 54, largestDigit(logQ, 1))
	require.Equal(t, 87, largestDigit(logQ, 2))                    // {q0, q1}
	require.Equal(t, 120, largestDigit(logQ, 3))                   // {q0, q1, q2}
	require.Equal(t, 153, largestDigit(logQ, 4))                   // {q0..q3}; {q4, q5} is 66
	require.Equal(t, []int{47, 47}, specialSizes(14, logQ, 2))     // 87 + 7 = 94
	require.Equal(t, []int{43, 43, 43}, specialSizes(14, logQ, 3)) // 120 + 7 = 127, rounded up to 129
	require.Nil(t, specialSizes(14, []int{60, 60, 60}, 2))         // 127 bits: two primes of 64
}

// The digit classifier's ring (2^14, six ciphertext primes, 280 of 438
// bits) leaves room for more special primes; the pass takes them, within
// the bound, and prices the program cheaper for it.
func TestSpecialPrimesDigits(t *testing.T) {
	g, err := spec.Load("../testdata/mnist/digits.yaml")
	require.NoError(t, err)
	prog, _, err := Compile(g, Options{})
	require.NoError(t, err)
	pr := prog.Params
	require.Greater(t, len(pr.LogP), 1, "%v", pr.LogP)
	require.Len(t, pr.P, len(pr.LogP))
	require.LessOrEqual(t, pr.LogQP, MaxLogQP128[pr.LogN])
	require.Equal(t, sumBits(pr.LogQ)+sumBits(pr.LogP), pr.LogQP)
	require.GreaterOrEqual(t, sumBits(pr.LogP), largestDigit(pr.LogQ, len(pr.LogP))+(pr.LogN+1)/2)
	require.Contains(t, pr.Why[len(pr.Why)-1], "P of")

	one := *prog
	one.Params.LogP = one.Params.LogP[:1]
	one.Params.LogP[0] = 61
	prof := DefaultProfile()
	require.Less(t, EstimateProgram(prog, prof).TotalMS, EstimateProgram(&one, prof).TotalMS)
	require.Less(t, keyBytes(pr), keyBytes(one.Params))

	// The naive lowering, a pinned logP and a profile that has not
	// measured more special primes keep one.
	naive, _, err := Compile(g, Options{Naive: true})
	require.NoError(t, err)
	require.Len(t, naive.Params.LogP, 1)
	bare := &Profile{Machine: "k=1 only", Ops: map[string]map[int][]Point{}}
	for op, byN := range prof.Ops {
		if op == specialsName(CostRotate, 2) || op == specialsName(CostRotate, 3) {
			continue
		}
		bare.Ops[op] = byN
	}
	plain, _, err := Compile(g, Options{Profile: bare})
	require.NoError(t, err)
	require.Len(t, plain.Params.LogP, 1)
	pinned := *g
	pinned.Pin = &ir.ParamPin{LogN: 14, LogQ: pr.LogQ, LogP: []int{61}, LogScale: pr.LogScale}
	pp, _, err := Compile(&pinned, Options{})
	require.NoError(t, err)
	require.Equal(t, []int{61}, pp.Params.LogP)
}

// A profile prices key switches with k special primes from its "op@k"
// entries, everything else (and profiles without them) as measured with
// one.
func TestProfileSpecials(t *testing.T) {
	var ts []runtime.OpTiming
	for _, k := range []int{1, 2} {
		for _, l := range []int{1, 3} {
			x := float64(l+1) / float64(k)
			ts = append(ts, runtime.OpTiming{LogN: 13, Level: l, Specials: k, Add: 10 * float64(k), MulPlain: 20, MulRelin: 100 * x, Rescale: 30, Rotate: 90 * x, Hoisted: 200 * x, RotSum: 300 * x, Encode: 1000})
		}
	}
	p, err := FitProfile("test", ts)
	require.NoError(t, err)
	require.True(t, p.HasSpecials(2, 13))
	require.False(t, p.HasSpecials(3, 13))
	require.False(t, p.HasSpecials(2, 14))
	require.InDelta(t, 90*4, p.Cost(CostRotate, 13, 3), 1e-6)
	require.InDelta(t, 90*2, p.ForSpecials(2).Cost(CostRotate, 13, 3), 1e-6)
	require.InDelta(t, 300*2, p.ForSpecials(2).Cost(CostRotSum, 13, 3), 1e-6)
	// Additions do not depend on P: taken from the one-prime timings.
	require.InDelta(t, 10, p.ForSpecials(2).Cost(CostAdd, 13, 3), 1e-6)
	// Not measured with three: priced as with one.
	require.InDelta(t, 90*4, p.ForSpecials(3).Cost(CostRotate, 13, 3), 1e-6)
}
