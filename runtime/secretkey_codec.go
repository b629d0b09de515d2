package runtime

import (
	"fmt"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
)

// secretKeySize is the exact payload size of a secret key for p, computed
// without allocating one: a polynomial over Q and one over P, each a matrix
// (8-byte length) of rows (8-byte length) of N coefficients. A test checks
// it against lattigo's BinarySize.
func secretKeySize(p *Params) int64 {
	n := int64(1) << p.spec.LogN
	poly := func(rows int) int64 { return 8 + int64(rows)*(8+8*n) }
	return poly(len(p.spec.Q)) + poly(len(p.spec.P))
}

// decodeSecretKey decodes a checked payload.
func decodeSecretKey(p *Params, payload []byte) (*SecretKey, error) {
	l, err := p.layout("secret key", func() (layout, error) {
		sk := rlwe.NewSecretKey(p.hp)
		return newLayout(sk, func() { fillQP(sk.Value) })
	})
	if err != nil {
		return nil, err
	}
	sk := rlwe.NewSecretKey(p.hp)
	if err := l.match(payload); err != nil {
		return nil, fmt.Errorf("not a secret key for these parameters: %w", err)
	}
	if err := readInto(sk, payload); err != nil {
		return nil, fmt.Errorf("decode secret key: %w", err)
	}
	if err := p.reducedQP(sk.Value); err != nil {
		return nil, fmt.Errorf("decode secret key: %w", err)
	}
	return &SecretKey{sk: sk, fp: p.fp}, nil
}
