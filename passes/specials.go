package passes

import (
	"fmt"
	"slices"

	"github.com/lanthorn/lanthorn/ir"
)

// maxSpecialBits is the largest special prime lattigo takes.
const maxSpecialBits = 61

// chooseSpecials decides how many primes the special modulus P has (see
// withSpecials). A pinned logP and the naive lowering keep one prime.
func chooseSpecials(s *State) error {
	if s.Opts.Naive || (s.Graph.Pin != nil && len(s.Graph.Pin.LogP) > 0) {
		return nil
	}
	c, err := withSpecials(s.Prog.Params, s.profile(), s.Opts.Objective)
	if err != nil {
		return err
	}
	s.Prog.Params = c
	return nil
}

// withSpecials returns pr with as many special primes as make key switches
// cheapest. A key switch at level ℓ with k special primes decomposes its
// input into ceil((ℓ+1)/k) digits of k ciphertext primes each, instead of
// ℓ+1 digits of one (hybrid key switching, common practice): fewer digits
// mean fewer NTTs and smaller keys, while each digit and the basis change
// back cover k more primes. P must exceed the largest digit by
// ceil(logN/2) bits, as params sizes one special prime above the largest
// ciphertext prime, so more primes cost bits of the 128-bit bound; params
// chose the ring with one, and more only spend what that ring leaves.
// Among the counts that fit and whose key switches the profile has
// measured, the cheapest is kept: the one pricing a key switch of each
// kind (rotation, hoisted rotations, rotate-sum, relinearized product) at
// each level of the chain lowest, or under the keys objective the one
// whose keys for every level are smallest; one prime on a tie. The rule
// reads only the parameters, so the selection's search applies it too.
// Parameters the spec accepts as insecure keep one prime.
func withSpecials(pr ir.Params, prof *Profile, obj Objective) (ir.Params, error) {
	if pr.Insecure || len(pr.LogP) != 1 {
		return pr, nil
	}
	levels := make([]int, pr.MaxLevel()+1)
	for l := range levels {
		levels[l] = l
	}
	price := func(c ir.Params) (float64, int64) {
		pk := prof.ForSpecials(len(c.LogP))
		ms := 0.0
		for _, l := range levels {
			for _, op := range keySwitchOps {
				ms += pk.Cost(op, c.LogN, l) / 1e6
			}
		}
		return ms, keyFileBytes(c, levels, true)
	}
	best := pr
	bestMS, bestKeys := price(pr)
	first := bestMS
	for k := 2; k <= len(pr.LogQ); k++ {
		if !prof.HasSpecials(k, pr.LogN) {
			continue
		}
		logP := specialSizes(pr.LogN, pr.LogQ, k)
		if logP == nil {
			continue
		}
		c := pr
		c.LogP = logP
		c.LogQP = sumBits(c.LogQ) + sumBits(logP)
		if c.LogQP > c.SecurityBound {
			continue
		}
		// As params does: log2 of the product of the primes themselves
		// within the bound.
		q, pp, err := generatePrimes(c.LogN, c.LogQ, c.LogP)
		if err != nil || log2Product(q)+log2Product(pp) > float64(c.SecurityBound) {
			continue
		}
		c.Q, c.P = q, pp
		ms, keys := price(c)
		better := ms < bestMS
		if obj == KeyBytes {
			better = keys < bestKeys || (keys == bestKeys && ms < bestMS)
		}
		if better {
			best, bestMS, bestKeys = c, ms, keys
		}
	}
	if len(best.LogP) == 1 {
		return pr, nil
	}
	best.Why = append(slices.Clone(pr.Why), fmt.Sprintf(
		"P of %d primes %v: key switches in digits of %d ciphertext primes (the largest %d bits), priced %.0f%% cheaper than with one special prime, within the bound: log2(QP) = %d of %d",
		len(best.LogP), best.LogP, len(best.LogP), largestDigit(best.LogQ, len(best.LogP)), 100*(1-bestMS/first), best.LogQP, best.SecurityBound))
	return best, nil
}

// specialSizes is the special primes for k of them: together ceil(logN/2)
// bits above the largest digit of k consecutive ciphertext primes, as even
// as may be; nil if a prime would exceed lattigo's 61 bits.
func specialSizes(logN int, logQ []int, k int) []int {
	need := largestDigit(logQ, k) + (logN+1)/2
	each := (need + k - 1) / k
	if each > maxSpecialBits {
		return nil
	}
	out := make([]int, k)
	for i := range out {
		out[i] = each
	}
	return out
}

// largestDigit is the bit size of the largest digit when the ciphertext
// primes are grouped k at a time from q0, as lattigo's decomposition does.
func largestDigit(logQ []int, k int) int {
	most := 0
	for i := 0; i < len(logQ); i += k {
		most = max(most, sumBits(logQ[i:min(i+k, len(logQ))]))
	}
	return most
}

func sumBits(b []int) int {
	t := 0
	for _, x := range b {
		t += x
	}
	return t
}
