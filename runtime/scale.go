package runtime

import (
	"fmt"
	"math"
	"math/big"
	"strings"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
)

// Scale is an exact CKKS scale, 2^Pow2 · Π q_{Num[i]} / Π q_{Den[j]}, where
// q_l = Q[l] is the ciphertext prime of level l. It is the emitted form of
// the generator's symbolic scale: plaintexts are encoded at scales such as
// Scale{Pow2: 0, Num: []int{5}} (= q5) so that the next rescale, which
// divides by q5, brings the product back to exactly 2^LogScale.
type Scale struct {
	Pow2     int
	Num, Den []int
}

// maxScalePow2 bounds Pow2 so that a scale stays a sane big.Float.
const maxScalePow2 = 4096

// String prints the scale as 2^40·q5/q6.
func (s Scale) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "2^%d", s.Pow2)
	for _, l := range s.Num {
		fmt.Fprintf(&b, "·q%d", l)
	}
	for _, l := range s.Den {
		fmt.Fprintf(&b, "/q%d", l)
	}
	return b.String()
}

// DefaultScale returns 2^LogScale, the scale of fresh ciphertexts.
func (p *Params) DefaultScale() Scale {
	if !p.ok() {
		return Scale{}
	}
	return Scale{Pow2: p.spec.LogScale}
}

// ScaleValue returns the value of s for these parameters, rounded to
// lattigo's scale precision (128 bits).
func (p *Params) ScaleValue(s Scale) (*big.Float, error) {
	if !p.ok() {
		return nil, fmt.Errorf("scale %v: nil parameters (or not made by NewParams)", s)
	}
	if s.Pow2 < -maxScalePow2 || s.Pow2 > maxScalePow2 {
		return nil, fmt.Errorf("scale %v: power of two out of range ±%d", s, maxScalePow2)
	}
	num := new(big.Int).SetInt64(1)
	den := new(big.Int).SetInt64(1)
	if s.Pow2 >= 0 {
		num.Lsh(num, uint(s.Pow2))
	} else {
		den.Lsh(den, uint(-s.Pow2))
	}
	for _, list := range []struct {
		idx []int
		acc *big.Int
	}{{s.Num, num}, {s.Den, den}} {
		for _, l := range list.idx {
			if l < 0 || l >= len(p.spec.Q) {
				return nil, fmt.Errorf("scale %v: no prime q%d (levels 0..%d)", s, l, len(p.spec.Q)-1)
			}
			list.acc.Mul(list.acc, new(big.Int).SetUint64(p.spec.Q[l]))
		}
	}
	r := new(big.Rat).SetFrac(num, den)
	return new(big.Float).SetPrec(rlwe.ScalePrecision).SetRat(r), nil
}

// rlweScale converts s to lattigo's scale type.
func (p *Params) rlweScale(s Scale) (rlwe.Scale, error) {
	v, err := p.ScaleValue(s)
	if err != nil {
		return rlwe.Scale{}, err
	}
	return rlwe.NewScale(v), nil
}

// sameScale reports whether two scales are equal up to a relative
// difference of 2^-60, far below the 2^-128 rounding of lattigo's scale
// arithmetic yet far above any meaningful difference between scales (a
// prime differs from a power of two by more than 2^-40 relative).
func sameScale(a, b rlwe.Scale) bool {
	return relDiff(&a.Value, &b.Value) <= math.Ldexp(1, -60)
}

// relDiff returns |a-b| / max(|a|, |b|), or +Inf if either is not positive.
func relDiff(a, b *big.Float) float64 {
	if a.Sign() <= 0 || b.Sign() <= 0 || a.IsInf() || b.IsInf() {
		return math.Inf(1)
	}
	d := new(big.Float).SetPrec(rlwe.ScalePrecision).Sub(a, b)
	d.Abs(d)
	m := a
	if b.Cmp(a) > 0 {
		m = b
	}
	d.Quo(d, m)
	f, _ := d.Float64()
	return f
}

// log2Scale returns log2 of a lattigo scale, for messages.
func log2Scale(s rlwe.Scale) float64 {
	if s.Value.Sign() <= 0 {
		return math.NaN()
	}
	mant := new(big.Float)
	exp := s.Value.MantExp(mant)
	m, _ := mant.Float64()
	return float64(exp) + math.Log2(m)
}

// fmtScale prints a lattigo scale for messages: 2^40.000000000000 (12
// decimals tell apart two primes of the same size).
func fmtScale(s rlwe.Scale) string {
	return fmt.Sprintf("2^%.12f", log2Scale(s))
}
