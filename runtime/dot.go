package runtime

import (
	"fmt"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/he/hefloat"
)

// DotPlain returns Σ_i cts[i] ⊙ pts[i], the sum of plaintext products (the
// diagonals of one giant step of a matrix product), accumulated in one
// ciphertext: no intermediate product is allocated or added on its own.
// Plaintexts made by Encoder.Multiplier are used as they are; others are
// converted to Montgomery form first. The ciphertexts must share their
// level with each other and with their plaintexts, and every product must
// have the same scale. Like MulPlain it does not rescale.
func (e *Evaluator) DotPlain(cts []*Ciphertext, pts []*Plaintext) *Ciphertext {
	return e.do(func() string { return fmt.Sprintf("dot-plain of %d", len(cts)) }, cts, func(l *lane) (*rlwe.Ciphertext, error) {
		if len(cts) == 0 || len(cts) != len(pts) {
			return nil, fmt.Errorf("dot-plain of %d ciphertexts with %d plaintexts", len(cts), len(pts))
		}
		if err := e.check(cts...); err != nil {
			return nil, err
		}
		level := cts[0].Level()
		var scale rlwe.Scale
		for i, ct := range cts {
			pt := pts[i]
			if err := e.p.checkPlaintext(pt); err != nil {
				return nil, fmt.Errorf("term %d: %w", i, err)
			}
			if err := degreeOne(ct, "a plaintext product"); err != nil {
				return nil, fmt.Errorf("term %d: %w", i, err)
			}
			if err := sameLevel(level, ct.Level(), "another term"); err != nil {
				return nil, fmt.Errorf("term %d: %w", i, err)
			}
			if err := sameLevel(ct.Level(), pt.Level(), "plaintext"); err != nil {
				return nil, fmt.Errorf("term %d: %w", i, err)
			}
			if !ct.ct.IsNTT {
				return nil, fmt.Errorf("term %d: dot-plain needs ciphertexts in the NTT domain", i)
			}
			s := ct.ct.Scale.Mul(pt.pt.Scale)
			if i == 0 {
				scale = s
			} else if !sameScale(scale, s) {
				return nil, fmt.Errorf("term %d: product scale %s, term 0's is %s", i, fmtScale(s), fmtScale(scale))
			}
		}
		out := hefloat.NewCiphertext(e.p.hp, 1, level)
		ringQ := e.p.hp.RingQ().AtLevel(level)
		for i, ct := range cts {
			v := pts[i].pt.Value
			if !pts[i].mform {
				buf := l.scratchQ(e.p.hp)
				ringQ.MForm(v, buf)
				v = buf
			}
			for j := range out.Value {
				ringQ.MulCoeffsMontgomeryThenAdd(ct.ct.Value[j], v, out.Value[j])
			}
		}
		productMetaData(out, cts[0].ct, pts[0].pt)
		return out, nil
	})
}
