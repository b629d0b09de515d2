package runtime

import (
	"fmt"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
)

// secretKeySize is the exact payload size of a secret key for p.
func secretKeySize(p *Params) int64 {
	return int64(rlwe.NewSecretKey(p.hp).BinarySize())
}

// decodeSecretKey decodes a checked payload.
func decodeSecretKey(p *Params, payload []byte) (*SecretKey, error) {
	sk := rlwe.NewSecretKey(p.hp)
	l, err := newLayout(sk, func() { fillQP(sk.Value) })
	if err != nil {
		return nil, err
	}
	if err := l.match(payload); err != nil {
		return nil, fmt.Errorf("not a secret key for these parameters: %w", err)
	}
	if err := readInto(sk, payload); err != nil {
		return nil, fmt.Errorf("decode secret key: %w", err)
	}
	return &SecretKey{sk: sk, fp: p.fp}, nil
}
