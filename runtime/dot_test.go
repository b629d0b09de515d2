package runtime

import (
	"testing"

	"github.com/stretchr/testify/require"
)

// DotPlain is the sum of MulPlain products, computed in one accumulator:
// modular arithmetic is exact, so the result must be the chain's bit for
// bit, with plaintexts encoded either way and for any thread count.
func TestDotPlainMatchesProducts(t *testing.T) {
	s := getMV(t, 12)
	var cts []*Ciphertext
	for i := range 3 {
		cts = append(cts, parEncrypt(t, s.p, s.sk, randVec(uint64(70+i), s.n, -1, 1), s.n))
	}
	low := NewEvaluator(s.p, s.evk)
	for i := range cts {
		cts[i] = low.DropLevel(cts[i], s.p.MaxLevel()-3) // s.pt1 is at level 3
	}
	require.NoError(t, low.Err())
	names := []string{"w1.0", "w1.1", "w1.2"}
	blob, err := BuildWeights(names, [][]float64{randVec(80, s.n, -1, 1), randVec(81, s.n, -1, 1), randVec(82, s.n, -1, 1)})
	require.NoError(t, err)
	ws, err := decodeWeights(blob)
	require.NoError(t, err)
	enc := NewEncoder(s.p, ws)
	var plain, mont []*Plaintext
	for _, n := range names {
		plain = append(plain, enc.Plaintext(n, 3, Scale{Num: []int{3}}, s.n))
		mont = append(mont, enc.Multiplier(n, 3, Scale{Num: []int{3}}, s.n))
	}
	require.NoError(t, enc.Err())

	ev := NewEvaluator(s.p, s.evk)
	chain := ev.MulPlain(cts[0], plain[0])
	for i := 1; i < len(cts); i++ {
		chain = ev.Add(chain, ev.MulPlain(cts[i], plain[i]))
	}
	require.NoError(t, ev.Err())
	want := ctBytes(t, chain)
	require.Equal(t, ctBytes(t, ev.MulPlain(cts[1], plain[1])), ctBytes(t, ev.MulPlain(cts[1], mont[1])), "MulPlain with a Multiplier")
	for _, threads := range []int{1, 2} {
		for _, pts := range [][]*Plaintext{plain, mont} {
			ev := NewParallelEvaluator(s.p, s.evk, threads)
			out := ev.DotPlain(cts, pts)
			require.NoError(t, ev.Err())
			require.Equal(t, want, ctBytes(t, out), "threads %d", threads)
		}
	}

	ev = NewEvaluator(s.p, s.evk)
	ev.AddPlain(cts[0], mont[0])
	require.ErrorContains(t, ev.Err(), "encoded for products")
	ev = NewEvaluator(s.p, s.evk)
	ev.DotPlain(cts[:2], mont)
	require.ErrorContains(t, ev.Err(), "dot-plain of 2 ciphertexts with 3 plaintexts")
	ev = NewEvaluator(s.p, s.evk)
	ev.DotPlain([]*Ciphertext{cts[0], low.Rescale(cts[1])}, mont[:2])
	require.ErrorContains(t, ev.Err(), "term 1: levels differ")
}

// BenchmarkDotPlain compares 32 plaintext products summed by MulPlain and
// Add with one DotPlain of Multiplier plaintexts, at ring degree 2^14 and
// level 3, one thread.
func BenchmarkDotPlain(b *testing.B) {
	q, pp, err := GeneratePrimes(14, []int{54, 33, 33, 33}, []int{61})
	require.NoError(b, err)
	p, err := NewParams(ParamSpec{LogN: 14, Q: q, P: pp, LogScale: 33, ModelID: "dot-bench"})
	require.NoError(b, err)
	sk, evk, err := GenerateKeys(p, KeyRequest{})
	require.NoError(b, err)
	const n = 32
	var cts []*Ciphertext
	var names []string
	var vecs [][]float64
	for i := range n {
		cts = append(cts, parEncrypt(b, p, sk, randVec(uint64(60+i), 64, -1, 1), 64))
		names = append(names, string(rune('a'+i)))
		vecs = append(vecs, randVec(uint64(100+i), 64, -1, 1))
	}
	blob, err := BuildWeights(names, vecs)
	require.NoError(b, err)
	ws, err := decodeWeights(blob)
	require.NoError(b, err)
	enc := NewEncoder(p, ws)
	var plain, mont []*Plaintext
	for i := range n {
		plain = append(plain, enc.Plaintext(names[i], 3, Scale{Num: []int{3}}, 64))
		mont = append(mont, enc.Multiplier(names[i], 3, Scale{Num: []int{3}}, 64))
	}
	require.NoError(b, enc.Err())
	ev := NewEvaluator(p, evk)
	b.Run("mulplain-add", func(b *testing.B) {
		for b.Loop() {
			acc := ev.MulPlain(cts[0], plain[0])
			for i := 1; i < n; i++ {
				acc = ev.Add(acc, ev.MulPlain(cts[i], plain[i]))
			}
		}
	})
	b.Run("dotplain", func(b *testing.B) {
		for b.Loop() {
			ev.DotPlain(cts, mont)
		}
	})
	require.NoError(b, ev.Err())
}
