package runtime

import (
	"fmt"
	"math"
	"math/big"
	"testing"

	"github.com/stretchr/testify/require"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
)

func TestGeneratePrimesMatchesLattigo(t *testing.T) {
	logQ, logP := []int{55, 40, 40, 45}, []int{56, 56}
	q1, p1, err := GeneratePrimes(13, logQ, logP)
	require.NoError(t, err)
	q2, p2, err := GeneratePrimes(13, logQ, logP)
	require.NoError(t, err)
	require.Equal(t, q1, q2, "deterministic")
	require.Equal(t, p1, p2, "deterministic")

	// The primes lattigo itself picks for a literal with LogQ/LogP.
	lit, err := hefloat.NewParametersFromLiteral(hefloat.ParametersLiteral{LogN: 13, LogQ: logQ, LogP: logP, LogDefaultScale: 40})
	require.NoError(t, err)
	require.Equal(t, lit.Q(), q1)
	require.Equal(t, lit.P(), p1)

	// Independent checks with math/big: prime, NTT-friendly (q ≡ 1 mod 2N),
	// of the requested size, all distinct.
	seen := map[uint64]bool{}
	all := append(append([]uint64{}, q1...), p1...)
	sizes := append(append([]int{}, logQ...), logP...)
	for i, q := range all {
		require.True(t, new(big.Int).SetUint64(q).ProbablyPrime(20), "q=%d", q)
		require.Equal(t, uint64(1), q%(2<<13), "q=%d", q)
		require.InDelta(t, float64(sizes[i]), math.Log2(float64(q)), 1, "q=%d", q)
		require.False(t, seen[q])
		seen[q] = true
	}

	_, err = NewParams(ParamSpec{LogN: 13, Q: q1, P: p1, LogScale: 40})
	require.NoError(t, err)
}

func TestGeneratePrimesRejects(t *testing.T) {
	for _, tc := range []struct {
		name       string
		logN       int
		logQ, logP []int
	}{
		{"logN", 30, []int{40}, []int{40}},
		{"no q", 12, nil, []int{40}},
		{"no p", 12, []int{40}, nil},
		{"q too big", 12, []int{70}, []int{40}},
		{"p negative", 12, []int{40}, []int{-3}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, _, err := GeneratePrimes(tc.logN, tc.logQ, tc.logP)
			require.Error(t, err)
		})
	}
}

func TestNewParamsRejects(t *testing.T) {
	q, p, err := GeneratePrimes(12, []int{50, 40}, []int{50})
	require.NoError(t, err)
	ok := ParamSpec{LogN: 12, Q: q, P: p, LogScale: 40}
	_, err = NewParams(ok)
	require.NoError(t, err)
	// A prime that is not 1 mod 2N for N = 2^12: 2^31-1 (a Mersenne prime).
	const mersenne31 = 1<<31 - 1
	for _, tc := range []struct {
		name string
		edit func(*ParamSpec)
		msg  string
	}{
		{"logN small", func(s *ParamSpec) { s.LogN = 2 }, "LogN 2"},
		{"logN big", func(s *ParamSpec) { s.LogN = 18 }, "LogN 18"},
		{"no Q", func(s *ParamSpec) { s.Q = nil }, "no ciphertext primes"},
		{"no P", func(s *ParamSpec) { s.P = nil }, "no key-switching primes"},
		{"scale 0", func(s *ParamSpec) { s.LogScale = 0 }, "LogScale 0"},
		{"scale 61", func(s *ParamSpec) { s.LogScale = 61 }, "LogScale 61"},
		// 8193² is 1 mod 8192 but not a prime.
		{"not prime", func(s *ParamSpec) { s.Q = []uint64{q[0], 8193 * 8193} }, "not a prime"},
		{"not NTT", func(s *ParamSpec) { s.Q = []uint64{q[0], mersenne31} }, "not NTT-friendly"},
		{"duplicate", func(s *ParamSpec) { s.P = []uint64{q[1]} }, "same prime as Q[1]"},
		{"too large", func(s *ParamSpec) { s.Q = []uint64{1<<63 + 1} }, "bits"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := ok
			s.Q = append([]uint64{}, ok.Q...)
			s.P = append([]uint64{}, ok.P...)
			tc.edit(&s)
			_, err := NewParams(s)
			require.ErrorContains(t, err, tc.msg)
		})
	}
}

func TestFingerprint(t *testing.T) {
	q, p, err := GeneratePrimes(12, []int{50, 40, 40}, []int{50})
	require.NoError(t, err)
	// Spare NTT-friendly primes to swap in.
	q2, p2, err := GeneratePrimes(12, []int{50, 40, 40, 40}, []int{50, 50})
	require.NoError(t, err)
	base := ParamSpec{LogN: 12, Q: q, P: p, LogScale: 40, ModelID: "gearbox-7"}
	fp := func(s ParamSpec) string {
		t.Helper()
		pp, err := NewParams(s)
		require.NoError(t, err)
		return pp.Fingerprint()
	}
	f0 := fp(base)
	require.Len(t, f0, 64)
	require.Equal(t, f0, fp(base), "stable")

	edits := map[string]func(*ParamSpec){
		"model id":  func(s *ParamSpec) { s.ModelID = "gearbox-8" },
		"log scale": func(s *ParamSpec) { s.LogScale = 39 },
		"P[0]":      func(s *ParamSpec) { s.P = []uint64{p2[1]} },
	}
	for i := range q {
		// q2[3] is a 40-bit prime not in q; q2 shares q's first primes.
		edits[fmt.Sprintf("Q[%d]", i)] = func(s *ParamSpec) { s.Q[i] = q2[3] }
	}
	for name, edit := range edits {
		t.Run(name, func(t *testing.T) {
			s := base
			s.Q = append([]uint64{}, base.Q...)
			s.P = append([]uint64{}, base.P...)
			edit(&s)
			require.NotEqual(t, f0, fp(s))
		})
	}
}

func TestLogQP(t *testing.T) {
	e := getEnv(t, evalEnv)
	var want float64
	s := e.p.Spec()
	for _, q := range append(s.Q, s.P...) {
		want += math.Log2(float64(q))
	}
	require.InDelta(t, want, e.p.LogQP(), 1e-9)
	require.Equal(t, 6, e.p.MaxLevel())
	require.Equal(t, 2048, e.p.Slots())
}

func TestScaleValue(t *testing.T) {
	e := getEnv(t, evalEnv)
	q := e.p.Spec().Q
	v, err := e.p.ScaleValue(Scale{Pow2: 40, Num: []int{5}, Den: []int{6}})
	require.NoError(t, err)
	want := new(big.Rat).SetFrac(
		new(big.Int).Mul(new(big.Int).Lsh(big.NewInt(1), 40), new(big.Int).SetUint64(q[5])),
		new(big.Int).SetUint64(q[6]))
	got, _ := v.Rat(nil)
	diff, _ := new(big.Rat).Quo(new(big.Rat).Sub(got, want), want).Float64()
	require.Less(t, math.Abs(diff), math.Ldexp(1, -120), "rounded to 128 bits")

	for _, bad := range []Scale{{Num: []int{7}}, {Den: []int{-1}}, {Pow2: 5000}} {
		_, err := e.p.ScaleValue(bad)
		require.Error(t, err, "%v", bad)
	}
	require.Equal(t, "2^40·q5/q6", Scale{Pow2: 40, Num: []int{5}, Den: []int{6}}.String())
}
