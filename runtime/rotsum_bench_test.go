package runtime

import (
	"fmt"
	"testing"
)

// BenchmarkRotateSum compares a sum of 8 rotations of distinct ciphertexts
// done as separate rotations and additions with one RotateSum, at ring
// degree 2^14 with five ciphertext primes, one thread.
func BenchmarkRotateSum(b *testing.B) {
	q, pp, err := GeneratePrimes(14, []int{54, 33, 33, 33, 33, 33}, []int{61})
	if err != nil {
		b.Fatal(err)
	}
	p, err := NewParams(ParamSpec{LogN: 14, Q: q, P: pp, LogScale: 33, ModelID: "rotsum-bench"})
	if err != nil {
		b.Fatal(err)
	}
	steps := []int{16, 32, 48, 64, 80, 96, 112, 128}
	sk, evk, err := GenerateKeys(p, KeyRequest{Rotations: steps})
	if err != nil {
		b.Fatal(err)
	}
	var cts []*Ciphertext
	for i := range steps {
		cts = append(cts, parEncrypt(b, p, sk, randVec(uint64(50+i), 64, -1, 1), 64))
	}
	ev := NewEvaluator(p, evk)
	for _, level := range []int{5, 3, 1} {
		in := make([]*Ciphertext, len(cts))
		for i, c := range cts {
			in[i] = c
			if d := p.MaxLevel() - level; d > 0 {
				in[i] = ev.DropLevel(c, d)
			}
		}
		b.Run(fmt.Sprintf("level%d/separate", level), func(b *testing.B) {
			for b.Loop() {
				acc := ev.Rotate(in[0], steps[0])
				for i := 1; i < len(in); i++ {
					acc = ev.Add(acc, ev.Rotate(in[i], steps[i]))
				}
			}
			if err := ev.Err(); err != nil {
				b.Fatal(err)
			}
		})
		b.Run(fmt.Sprintf("level%d/rotsum", level), func(b *testing.B) {
			for b.Loop() {
				ev.RotateSum(in, steps)
			}
			if err := ev.Err(); err != nil {
				b.Fatal(err)
			}
		})
	}
}
