package runtime

import (
	"fmt"
	goruntime "runtime"
	"testing"

	"github.com/stretchr/testify/require"
)

// With several threads a lone rotation or relinearization is split into
// tasks (keyswitch.go), a hoisted rotation's decomposition into two halves
// of digits, a rotate-sum's basis change and a rescale into one task per
// polynomial.
// The results must be the one-thread results bit for bit, for one, two and three special primes (one, two or three digits
// fewer per key switch) and at every level, including levels whose
// decomposition has a single digit, where the second half is empty.
func TestSplitKeySwitchBitIdentical(t *testing.T) {
	for _, specials := range []int{1, 2, 3} {
		t.Run(fmt.Sprintf("P=%d", specials), func(t *testing.T) {
			logP := make([]int, specials)
			for i := range logP {
				logP[i] = 45
			}
			q, pp, err := GeneratePrimes(12, []int{45, 35, 35, 35}, logP)
			require.NoError(t, err)
			p, err := NewParams(ParamSpec{LogN: 12, Q: q, P: pp, LogScale: 35, ModelID: "split"})
			require.NoError(t, err)
			sk, evk, err := GenerateKeys(p, KeyRequest{Rotations: []int{1, 5}, Relinearize: true})
			require.NoError(t, err)
			top := parEncrypt(t, p, sk, randVec(3, 64, -1, 1), 64)
			one := NewEvaluator(p, evk)
			for level := p.MaxLevel(); level >= 0; level-- {
				x := top
				if level < p.MaxLevel() {
					x = one.DropLevel(top, p.MaxLevel()-level)
				}
				sq := one.Mul(x, x)
				wantRot, wantRel := one.Rotate(x, 5), one.Relinearize(sq)
				wantHoist := one.RotateHoisted(x, 1, 5)
				var wantRescale *Ciphertext
				if level > 0 {
					wantRescale = one.Rescale(one.Relinearize(sq))
				}
				wantSum := one.RotateSum([]*Ciphertext{x, x, x}, []int{0, 1, 5})
				require.NoError(t, one.Err())
				for _, threads := range []int{2, 3} {
					before := goruntime.NumGoroutine()
					ev := NewParallelEvaluator(p, evk, threads)
					gotRot, gotRel := ev.Rotate(x, 5), ev.Relinearize(sq)
					chain := ev.Rotate(ev.Rotate(x, 1), 5) // a split switch reading another's result
					gotHoist := ev.RotateHoisted(x, 1, 5)
					gotSum := ev.RotateSum([]*Ciphertext{x, x, x}, []int{0, 1, 5})
					var gotRescale *Ciphertext
					if level > 0 {
						gotRescale = ev.Rescale(ev.Relinearize(sq))
					}
					require.NoError(t, ev.Err(), "level %d, threads %d", level, threads)
					if level > 0 {
						require.Equal(t, ctBytes(t, wantRescale), ctBytes(t, gotRescale), "rescale, level %d, threads %d", level, threads)
					}
					for i := range wantHoist {
						require.Equal(t, ctBytes(t, wantHoist[i]), ctBytes(t, gotHoist[i]), "hoisted %d, level %d, threads %d", i, level, threads)
					}
					require.Equal(t, ctBytes(t, wantSum), ctBytes(t, gotSum), "rotate-sum, level %d, threads %d", level, threads)
					require.Equal(t, ctBytes(t, wantRot), ctBytes(t, gotRot), "rotation, level %d, threads %d", level, threads)
					require.Equal(t, ctBytes(t, wantRel), ctBytes(t, gotRel), "relinearization, level %d, threads %d", level, threads)
					require.Equal(t, ctBytes(t, one.Rotate(one.Rotate(x, 1), 5)), ctBytes(t, chain), "chain, level %d", level)
					noLeak(t, before)
				}
			}
		})
	}
}

// A split key switch fails as the one-thread op does: same op number and
// message, and later ops do not run.
func TestSplitKeySwitchErrors(t *testing.T) {
	s := getMV(t, 12)
	x := parEncrypt(t, s.p, s.sk, randVec(4, s.n, -1, 1), s.n)
	for _, c := range []struct {
		name string
		run  func(ev *Evaluator)
	}{
		{"missing key", func(ev *Evaluator) { ev.Rotate(x, 100) }},
		{"degree 2", func(ev *Evaluator) { ev.Rotate(ev.Mul(x, x), 1) }},
		{"relinearize degree 1", func(ev *Evaluator) { ev.Relinearize(x) }},
		{"nil", func(ev *Evaluator) { ev.Relinearize(nil) }},
		{"no keys", func(*Evaluator) {}},
	} {
		t.Run(c.name, func(t *testing.T) {
			keys := s.evk
			run := c.run
			if c.name == "no keys" {
				keys = nil
				run = func(ev *Evaluator) { ev.Relinearize(ev.Mul(x, x)) }
			}
			one := NewEvaluator(s.p, keys)
			run(one)
			one.Rotate(x, 1)
			want := one.Err()
			require.Error(t, want)
			ev := NewParallelEvaluator(s.p, keys, 2)
			run(ev)
			ev.Rotate(x, 1)
			require.Equal(t, want.Error(), ev.Err().Error())
		})
	}
}
